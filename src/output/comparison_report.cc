// The comparison page reuses the report's style sheet, number formats and
// section pieces (report_parts.h), so the two pages read alike. Charts are
// inline SVG; every text from the folders passes through HtmlEscape.
#include "paritas/output/comparison_report.h"

#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "output/report_parts.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

using internal::report::C;
using internal::report::Card;
using internal::report::CodePoints;
using internal::report::kChartWidth;
using internal::report::Num;
using internal::report::OpenSection;
using internal::report::Truncate;

// Rises and falls: orange and blue, the pair colour-vision deficiencies keep,
// both dark enough for white and black text around them.
constexpr const char* kRise = "#c25400";
constexpr const char* kFall = "#1f5f99";
// Parts of a heading's change: price, weight and method.
constexpr const char* kPartColour[3] = {"#1f5f99", "#c25400", "#8a949c"};
constexpr const char* kPartName[3] = {"price part", "weight part", "method part"};

// A signed figure; one that rounds to zero gets no sign.
std::string Signed(double value, int decimals) {
  if (!std::isfinite(value)) return "\xE2\x80\x93";
  const std::string text = FormatFixed(value, decimals);
  const bool zero = text.find_first_not_of("-0.") == std::string::npos;
  return zero ? FormatFixed(0.0, decimals) : (value > 0 ? "+" : "") + text;
}

std::vector<const ParityChange*> Movers(const RunComparison& cmp) {
  std::vector<const ParityChange*> movers;
  for (const ParityChange& c : cmp.changes) {
    if (c.node == cmp.summary_node && std::isfinite(c.log_change)) movers.push_back(&c);
  }
  std::stable_sort(movers.begin(), movers.end(), [](const ParityChange* a, const ParityChange* b) {
    return std::abs(a->log_change) > std::abs(b->log_change);
  });
  return movers;
}

std::string Overview(const RunComparison& cmp, const std::vector<const ParityChange*>& movers) {
  std::string out = OpenSection("overview", "Overview");
  out += "<table class=\"facts\"><tr><th>old run</th><td><code>" + HtmlEscape(cmp.old_dir) +
         "</code> (run " + HtmlEscape(cmp.old_run_id) + ", reference " +
         HtmlEscape(cmp.old_reference) + ")</td></tr><tr><th>new run</th><td><code>" +
         HtmlEscape(cmp.new_dir) + "</code> (run " + HtmlEscape(cmp.new_run_id) + ", reference " +
         HtmlEscape(cmp.new_reference) + ")</td></tr></table>\n";
  int beyond = 0;
  for (const ParityChange* c : movers) beyond += c->beyond_uncertainty == 1 ? 1 : 0;
  out += "<div class=\"cards\">" + Card(FormatCount(static_cast<int64_t>(movers.size())),
                                        "regions in both runs at " + HtmlEscape(cmp.summary_node));
  if (cmp.has_uncertainty) out += Card(FormatCount(beyond), "moved more than the uncertainty");
  if (!movers.empty()) {
    out += Card(Signed(movers.front()->percent_change, 1) + "\xC2\xA0%",
                "largest move: " + HtmlEscape(movers.front()->region));
  }
  out += "</div>\n";
  if (!cmp.statements.empty()) {
    out += "<h3>What differs between the runs</h3><ul class=\"warnings\">";
    for (const std::string& s : cmp.statements) out += "<li>" + HtmlEscape(s) + "</li>";
    out += "</ul>\n";
  }
  out += "</section>\n";
  return out;
}

// One bar per region from 0 to its change in percent, largest moves first.
std::string ChangeChart(const std::vector<const ParityChange*>& movers) {
  const size_t n = std::min(movers.size(), static_cast<size_t>(kCompareMaxBars));
  if (n == 0) return "<p>No region has a parity at this node in both runs.</p>\n";
  size_t max_chars = 6;
  double lo = 0.0, hi = 0.0;
  for (size_t i = 0; i < n; ++i) {
    max_chars = std::max(max_chars, CodePoints(movers[i]->region));
    lo = std::min(lo, movers[i]->percent_change);
    hi = std::max(hi, movers[i]->percent_change);
  }
  max_chars = std::min<size_t>(max_chars, 30);
  const double pad = 0.08 * (hi - lo) + 0.2;
  lo -= pad;
  hi += pad;
  const double label_w = 18.0 + 6.6 * max_chars, x0 = label_w + 10, x1 = kChartWidth - 60;
  const double top = 20.0, row_h = 22.0, height = top + row_h * n + 34.0;
  auto x = [&](double v) { return x0 + (v - lo) / (hi - lo) * (x1 - x0); };
  std::string out = "<svg class=\"chart\" id=\"change-chart\" viewBox=\"0 0 " + C(kChartWidth) +
                    " " + C(height) +
                    "\" role=\"img\" aria-label=\"change of each region's parity in percent\">";
  const std::vector<double> ticks = internal::report::NiceTicks(lo, hi, 8);
  const int decimals = internal::report::TickDecimals(ticks);
  for (double t : ticks) {
    out += "<line class=\"grid\" x1=\"" + C(x(t)) + "\" x2=\"" + C(x(t)) + "\" y1=\"" + C(top) +
           "\" y2=\"" + C(top + row_h * n) + "\"/><text class=\"tick\" x=\"" + C(x(t)) + "\" y=\"" +
           C(top + row_h * n + 16) + "\" text-anchor=\"middle\">" + Num(t, decimals) + "</text>";
  }
  for (size_t i = 0; i < n; ++i) {
    const ParityChange& c = *movers[i];
    const double y = top + row_h * i, v = c.percent_change;
    const double bx = std::min(x(0), x(v)), bw = std::max(1.0, std::abs(x(v) - x(0)));
    std::string tip = c.region + ": " + Num(c.parity_old, 2) + " \xE2\x86\x92 " +
                      Num(c.parity_new, 2) + " (" + Signed(v, 2) + " %)";
    if (c.beyond_uncertainty == 1) tip += ", beyond the runs' uncertainty";
    if (c.beyond_uncertainty == 0) tip += ", within the runs' uncertainty";
    out += "<g><title>" + HtmlEscape(tip) + "</title><text class=\"row-label\" x=\"" + C(label_w) +
           "\" y=\"" + C(y + row_h / 2 + 4) + "\" text-anchor=\"end\">" +
           HtmlEscape(Truncate(c.region, max_chars)) + "</text><rect x=\"" + C(bx) + "\" y=\"" +
           C(y + 4) + "\" width=\"" + C(bw) + "\" height=\"" + C(row_h - 8) + "\" fill=\"" +
           (v >= 0 ? kRise : kFall) + "\"" +
           (c.beyond_uncertainty == 0 ? " fill-opacity=\"0.45\"" : "") +
           "/><text class=\"value\" x=\"" + C(x(v) + (v >= 0 ? 4 : -4)) + "\" y=\"" +
           C(y + row_h / 2 + 4) + "\" text-anchor=\"" + (v >= 0 ? "start" : "end") + "\">" +
           Signed(v, 2) + (c.beyond_uncertainty == 1 ? " *" : "") + "</text></g>";
  }
  out += "<line class=\"reference\" x1=\"" + C(x(0)) + "\" x2=\"" + C(x(0)) + "\" y1=\"" +
         C(top - 4) + "\" y2=\"" + C(top + row_h * n) + "\"/><text class=\"axis-title\" x=\"" +
         C((x0 + x1) / 2) + "\" y=\"" + C(height - 4) +
         "\" text-anchor=\"middle\">change of the parity, % (new against old)</text></svg>\n";
  if (movers.size() > n) {
    out += "<p class=\"note\">The " + std::to_string(n) + " largest of " +
           std::to_string(movers.size()) + " moves are drawn; the table lists all.</p>\n";
  }
  return out;
}

std::string NumCell(double v, const std::string& text) {
  return "<td class=\"num\" data-v=\"" + (std::isfinite(v) ? FormatFixed(v, 8) : std::string()) +
         "\">" + text + "</td>";
}

std::string ChangeTable(const RunComparison& cmp, const std::vector<const ParityChange*>& movers) {
  std::string out =
      "<div class=\"table-scroll" + std::string(movers.size() > 40 ? " tall" : "") +
      "\"><table class=\"data sortable\" id=\"change-table\"><thead><tr><th>region</th><th "
      "class=\"num\">old</th><th class=\"num\">new</th><th class=\"num\">change, %</th><th "
      "class=\"num\">log change</th><th class=\"num\">rank old</th><th class=\"num\">rank "
      "new</th>";
  if (cmp.has_uncertainty) out += "<th class=\"num\">threshold</th><th>beyond</th>";
  out += "</tr></thead><tbody>";
  for (const ParityChange* c : movers) {
    out += "<tr><td>" + HtmlEscape(c->region) + "</td>" +
           NumCell(c->parity_old, Num(c->parity_old, 2)) +
           NumCell(c->parity_new, Num(c->parity_new, 2)) +
           NumCell(c->percent_change, Signed(c->percent_change, 2)) +
           NumCell(c->log_change, Signed(c->log_change, 4)) +
           NumCell(c->rank_old > 0 ? c->rank_old : kNaN,
                   c->rank_old > 0 ? std::to_string(c->rank_old) : "\xE2\x80\x93") +
           NumCell(c->rank_new > 0 ? c->rank_new : kNaN,
                   c->rank_new > 0 ? std::to_string(c->rank_new) : "\xE2\x80\x93");
    if (cmp.has_uncertainty) {
      out += NumCell(c->threshold, Num(c->threshold, 4)) + "<td>" +
             (c->beyond_uncertainty == 1   ? "yes"
              : c->beyond_uncertainty == 0 ? "no"
                                           : "\xE2\x80\x93") +
             "</td>";
    }
    out += "</tr>";
  }
  out += "</tbody></table></div>\n";
  return out;
}

std::string ChangeSection(const RunComparison& cmp,
                          const std::vector<const ParityChange*>& movers) {
  std::string out = OpenSection("changes", "Changes at " + HtmlEscape(cmp.summary_node));
  out +=
      "<p>How much each region's parity for <b>" + HtmlEscape(cmp.summary_node) +
      "</b> moved from the old run to the new one, in percent" +
      (cmp.rebased_to.empty() ? "" : ", both runs against region " + HtmlEscape(cmp.rebased_to)) +
      ". Orange: dearer than before relative to the reference; blue: cheaper.";
  if (cmp.has_uncertainty) {
    out += " Marked * and drawn solid: the move is larger than " + FormatFixed(cmp.z, 2) +
           " times the combined standard error of the two runs, sqrt(se<sub>old</sub>\xC2\xB2 + "
           "se<sub>new</sub>\xC2\xB2), so chance alone would rarely give it; pale bars stay "
           "within it.";
  }
  out += "</p>\n" + ChangeChart(movers) + ChangeTable(cmp, movers) + "</section>\n";
  return out;
}

// One region's drivers: a bar per heading for each part, the rest summed.
std::string DriverChart(const RegionDrivers& d, int index) {
  const size_t shown = std::min(d.headings.size(), static_cast<size_t>(kCompareDriverHeadings));
  struct Row {
    std::string label;
    double part[3];
  };
  std::vector<Row> rows;
  for (size_t k = 0; k < shown; ++k) {
    const HeadingDriver& h = d.headings[k];
    rows.push_back({h.heading, {100 * h.price_part, 100 * h.weight_part, 100 * h.method_part}});
  }
  if (d.headings.size() > shown) {
    Row other{"other " + std::to_string(d.headings.size() - shown) + " headings", {0, 0, 0}};
    for (size_t k = shown; k < d.headings.size(); ++k) {
      other.part[0] += 100 * d.headings[k].price_part;
      other.part[1] += 100 * d.headings[k].weight_part;
      other.part[2] += 100 * d.headings[k].method_part;
    }
    rows.push_back(other);
  }
  double lo = 0, hi = 0;
  for (const Row& r : rows) {
    for (double p : r.part) {
      lo = std::min(lo, p);
      hi = std::max(hi, p);
    }
  }
  const double pad = 0.1 * (hi - lo) + 0.05;
  lo -= pad;
  hi += pad;
  const double label_w = 200, x0 = 210, x1 = kChartWidth - 60, top = 16, group_h = 34;
  const double height = top + group_h * rows.size() + 34;
  auto x = [&](double v) { return x0 + (v - lo) / (hi - lo) * (x1 - x0); };
  std::string out = "<svg class=\"chart driver-chart\" id=\"drivers-" + std::to_string(index) +
                    "\" viewBox=\"0 0 " + C(kChartWidth) + " " + C(height) +
                    "\" role=\"img\" aria-label=\"parts of the change by heading\">";
  for (double t : internal::report::NiceTicks(lo, hi, 8)) {
    out += "<line class=\"grid\" x1=\"" + C(x(t)) + "\" x2=\"" + C(x(t)) + "\" y1=\"" + C(top) +
           "\" y2=\"" + C(top + group_h * rows.size()) + "\"/><text class=\"tick\" x=\"" + C(x(t)) +
           "\" y=\"" + C(top + group_h * rows.size() + 16) + "\" text-anchor=\"middle\">" +
           Num(t, 2) + "</text>";
  }
  for (size_t i = 0; i < rows.size(); ++i) {
    const double y = top + group_h * i;
    out += "<text class=\"row-label\" x=\"" + C(label_w) + "\" y=\"" + C(y + group_h / 2 + 4) +
           "\" text-anchor=\"end\">" + HtmlEscape(Truncate(rows[i].label, 30)) + "</text>";
    for (int p = 0; p < 3; ++p) {
      const double v = rows[i].part[p];
      const double bx = std::min(x(0), x(v)), bw = std::max(0.5, std::abs(x(v) - x(0)));
      out += "<rect x=\"" + C(bx) + "\" y=\"" + C(y + 4 + 9 * p) + "\" width=\"" + C(bw) +
             "\" height=\"8\" fill=\"" + kPartColour[p] + "\"><title>" +
             HtmlEscape(rows[i].label + ", " + kPartName[p] + ": " + Signed(v, 3)) +
             "</title></rect>";
    }
  }
  out += "<line class=\"reference\" x1=\"" + C(x(0)) + "\" x2=\"" + C(x(0)) + "\" y1=\"" + C(top) +
         "\" y2=\"" + C(top + group_h * rows.size()) + "\"/><text class=\"axis-title\" x=\"" +
         C((x0 + x1) / 2) + "\" y=\"" + C(height - 4) +
         "\" text-anchor=\"middle\">part of the change, log points \xC3\x97 100 (about %)</text>"
         "</svg>\n";
  return out;
}

std::string DriverSection(const RunComparison& cmp,
                          const std::vector<const ParityChange*>& movers) {
  std::string out = OpenSection("drivers", "What drove the largest moves");
  if (cmp.drivers.empty()) {
    return out +
           "<p>No breakdown by heading: see \xE2\x80\x9cWhat differs\xE2\x80\x9d "
           "above.</p></section>\n";
  }
  out +=
      "<p>Each heading's part in a region's move, split three ways: the <b>price part</b> (the "
      "heading's own price level moved, weighted by its average share of the region's spending), "
      "the <b>weight part</b> (the heading's share of spending changed; a heading dearer than the "
      "region's average that gains weight lifts it) and the <b>method part</b> (what the "
      "aggregation method adds beyond a simple weighted average, spread over the headings by "
      "their share). The parts of all headings add up to the region's move exactly. Figures are "
      "log points \xC3\x97 100, about percent.</p>\n";
  out += "<div class=\"legend-row\">";
  for (int p = 0; p < 3; ++p) {
    out +=
        "<span class=\"key\"><svg width=\"14\" height=\"10\"><rect width=\"14\" height=\"10\" "
        "fill=\"" +
        std::string(kPartColour[p]) + "\"/></svg> " + kPartName[p] + "</span>";
  }
  out += "</div>\n";
  int drawn = 0;
  for (const ParityChange* c : movers) {
    if (drawn == kCompareDriverRegions) break;
    for (const RegionDrivers& d : cmp.drivers) {
      if (d.node != c->node || d.region != c->region) continue;
      out += "<h3>" + HtmlEscape(d.region) + ": " + Signed(c->percent_change, 2) + " % (" +
             Num(c->parity_old, 2) + " \xE2\x86\x92 " + Num(c->parity_new, 2) + ")</h3>\n";
      out += DriverChart(d, drawn++);
    }
  }
  out +=
      "<p class=\"note\">Every region and aggregate is in "
      "<code>drivers.csv</code>.</p></section>\n";
  return out;
}

std::string OnlyList(const std::string& what, const std::vector<std::string>& names) {
  if (names.empty()) return "";
  std::string out = "<li><b>" + what + "</b> (" + std::to_string(names.size()) + "): ";
  for (size_t k = 0; k < names.size(); ++k) out += (k ? ", " : "") + HtmlEscape(names[k]);
  return out + "</li>";
}

std::string OneRunSection(const RunComparison& cmp) {
  const std::string items = OnlyList("regions in the old run only", cmp.regions_old_only) +
                            OnlyList("regions in the new run only", cmp.regions_new_only) +
                            OnlyList("nodes in the old run only", cmp.nodes_old_only) +
                            OnlyList("nodes in the new run only", cmp.nodes_new_only);
  std::string out = OpenSection("one-run", "In one run only");
  out += items.empty()
             ? "<p>Both runs hold the same regions and nodes.</p>"
             : "<ul>" + items +
                   "</ul><p class=\"note\">Their rows are in "
                   "<code>changes.csv</code> with presence \xE2\x80\x9cold only\xE2\x80\x9d "
                   "or \xE2\x80\x9cnew only\xE2\x80\x9d.</p>";
  return out + "</section>\n";
}

}  // namespace

std::string ComparisonHtml(const RunComparison& cmp) {
  const std::vector<const ParityChange*> movers = Movers(cmp);
  std::string out =
      "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\">"
      "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">"
      "<meta name=\"generator\" content=\"paritas " PARITAS_VERSION
      "\"><title>Comparison of two runs</title><style>";
  out += internal::report::kStyle;
  out +=
      "</style></head><body>\n<header class=\"top\"><div class=\"wrap\"><h1>Comparison of two "
      "runs: " +
      HtmlEscape(cmp.summary_node) + "</h1><div class=\"sub\">" + HtmlEscape(cmp.old_dir) +
      " \xE2\x86\x92 " + HtmlEscape(cmp.new_dir) +
      "</div></div></header>\n<nav class=\"toc\" aria-label=\"sections\"><div class=\"wrap\">"
      "<a href=\"#overview\">Overview</a><a href=\"#changes\">Changes</a><a "
      "href=\"#drivers\">Drivers</a><a href=\"#one-run\">In one run only</a></div></nav>\n"
      "<main class=\"wrap\">\n";
  out += Overview(cmp, movers) + ChangeSection(cmp, movers) + DriverSection(cmp, movers) +
         OneRunSection(cmp);
  out += "</main>\n<footer><div class=\"wrap\">Made by paritas " PARITAS_VERSION
         ". Full results: <code>changes.csv</code>, <code>drivers.csv</code>.</div></footer>\n"
         "<script>";
  out += internal::report::kScript;
  out += "</script>\n</body></html>\n";
  return out;
}

}  // namespace paritas
