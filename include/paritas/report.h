// The HTML report: one self-contained page (inline SVG and CSS) for people
// who review parities by looking.
#ifndef PARITAS_REPORT_H_
#define PARITAS_REPORT_H_

#include <string>
#include <vector>

#include "paritas/compute.h"
#include "paritas/config.h"
#include "paritas/survey.h"
#include "paritas/survey_loader.h"

namespace paritas {

// Everything the report shows. Pointers may be null where a part was not
// computed; the report leaves that section out.
struct ReportInputs {
  const RunConfig* config = nullptr;
  const Survey* survey = nullptr;
  const LoadSummary* load = nullptr;
  const ParityResult* result = nullptr;
  const ComputeSummary* compute = nullptr;
  std::vector<std::string> warnings;
};

// Returns the whole page.
std::string ReportHtml(const ReportInputs& inputs);

// Escapes text for HTML element content and attribute values.
std::string HtmlEscape(std::string_view text);

}  // namespace paritas

#endif  // PARITAS_REPORT_H_
