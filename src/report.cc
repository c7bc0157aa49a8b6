// The report page. A first version: overview and the root's price levels.
#include "paritas/report.h"

#include <cmath>

#include "paritas/text.h"

namespace paritas {

std::string HtmlEscape(std::string_view text) {
  std::string out;
  out.reserve(text.size());
  for (char c : text) {
    switch (c) {
      case '&': out += "&amp;"; break;
      case '<': out += "&lt;"; break;
      case '>': out += "&gt;"; break;
      case '"': out += "&quot;"; break;
      case '\'': out += "&#39;"; break;
      default: out += c;
    }
  }
  return out;
}

std::string ReportHtml(const ReportInputs& inputs) {
  std::string out =
      "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>paritas report</title>"
      "</head><body><h1>Regional price parities</h1>\n";
  if (inputs.survey != nullptr && inputs.result != nullptr && !inputs.result->nodes.empty()) {
    const NodeResult& root = inputs.result->nodes.front();
    out += "<table><tr><th>region</th><th>parity</th></tr>\n";
    for (int r = 0; r < inputs.survey->num_regions(); ++r) {
      out += "<tr><td>" + HtmlEscape(inputs.survey->regions.Code(r)) + "</td><td>" +
             FormatFixed(root.parity(r), 2) + "</td></tr>\n";
    }
    out += "</table>\n";
  }
  out += "</body></html>\n";
  return out;
}

}  // namespace paritas
