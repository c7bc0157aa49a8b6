// The page of `paritas compare`: one self-contained HTML file in the style of
// the compute report (same style sheet, inline SVG, no data in script).
#ifndef PARITAS_OUTPUT_COMPARISON_REPORT_H_
#define PARITAS_OUTPUT_COMPARISON_REPORT_H_

#include <string>

#include "paritas/use/run_comparison.h"

namespace paritas {

// Regions drawn as labelled bars in the change chart; past this the chart
// shows the largest moves only (the table and changes.csv list all).
inline constexpr int kCompareMaxBars = 60;
// Regions whose drivers are drawn (the largest moves at the summary node).
inline constexpr int kCompareDriverRegions = 3;
// Headings drawn per region before the rest are summed as "other headings".
inline constexpr int kCompareDriverHeadings = 8;

// Returns the whole page: what differs, the changes at the summary node as
// a chart and a sortable table, the drivers of the largest moves, and what
// is in one run only.
std::string ComparisonHtml(const RunComparison& comparison);

}  // namespace paritas

#endif  // PARITAS_OUTPUT_COMPARISON_REPORT_H_
