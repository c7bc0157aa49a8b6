// What the files of the HTML report share: number formats, colour scales,
// the page context and the sections ReportHtml strings together. The names
// are short (C, Num, Rgb) because the drawing code uses them on every line,
// so they live in a namespace of their own rather than in all of
// paritas::internal.
#ifndef PARITAS_INTERNAL_OUTPUT_REPORT_PARTS_H_
#define PARITAS_INTERNAL_OUTPUT_REPORT_PARTS_H_

#include <algorithm>
#include <array>
#include <cmath>
#include <cstddef>
#include <functional>
#include <limits>
#include <set>
#include <string>
#include <string_view>
#include <vector>

#include "paritas/aggregation/bilateral_matrix.h"
#include "base/not_a_number.h"
#include "paritas/output/output_writers.h"
#include "paritas/output/report.h"

namespace paritas::internal::report {

// Width of every chart in SVG units; charts scale down with the page.
inline constexpr double kChartWidth = 1000.0;

// ---------------------------------------------------------------------------
// Number formats, one rule per kind of number, used everywhere on the page.
// These, the scales and the page pieces below are in report_format.cc.

// Parities in charts: 1 decimal; in tables: 2.
inline constexpr int kChartParityDecimals = 1;
inline constexpr int kTableParityDecimals = 2;
// What the report says of the pair tables (matrix/, bilateral/): written,
// or left out of a survey beyond matrices_up_to_regions.
inline constexpr const char* kPairTablesWritten = "Every ordered pair is in <code>bilateral/</code>.";
inline constexpr const char* kPairTablesLeftOut =
    "The pair tables (<code>matrix/</code>, <code>bilateral/</code>) were not written for this "
    "many regions; ask for them with <code>--matrices</code>.";

// Returns `value` with `decimals` digits, or an en dash for NaN.
std::string Num(double value, int decimals);
// Returns a share in [0, 1] as a percentage, e.g. "12.3 %".
std::string Percent(double share, int decimals);
// Returns an SVG coordinate (one decimal is finer than a pixel).
std::string C(double value);
// Returns the first `max_chars` code points of UTF-8 text, with an ellipsis
// when cut, so labels fit their column without splitting a character.
std::string Truncate(std::string_view text, size_t max_chars);
// Returns the number of code points of UTF-8 text.
size_t CodePoints(std::string_view text);

// ---------------------------------------------------------------------------
// Colour scales. Both avoid red-green contrasts; the coverage scale grows
// darker with the share, the price-level scale with the distance from 100.

struct Rgb {
  double r, g, b;
};

template <size_t N>
Rgb Interpolate(const std::array<Rgb, N>& stops, double t) {
  t = std::clamp(std::isfinite(t) ? t : 0.5, 0.0, 1.0) * (N - 1);
  const size_t i = std::min(static_cast<size_t>(t), N - 2);
  const double f = t - i;
  return {stops[i].r + f * (stops[i + 1].r - stops[i].r),
          stops[i].g + f * (stops[i + 1].g - stops[i].g),
          stops[i].b + f * (stops[i + 1].b - stops[i].b)};
}

// Returns the colour as "#rrggbb".
std::string Hex(Rgb c);
// True when dark text is more legible than white on `c`.
bool WantsDarkText(Rgb c);

// Price levels: dark blue (cheaper) through light grey at 100 to dark
// orange-brown (dearer). Both ends are dark (L* about 21 and 25) and
// lightness rises evenly toward 100 (L* 88) on both sides, so the regions
// furthest from 100 stand out most on a white page, and a greyscale print
// still shows the distance from 100 (the side is told by the bar's
// direction and its value). Blue against orange is the contrast that the
// common forms of colour-vision deficiency keep. Stops hand-coded for this
// report, with their CIE L* (D65) in the comments.
inline constexpr std::array<Rgb, 9> kDivergingStops = {{{8, 48, 107},     // L* 21
                                                        {33, 102, 172},   // L* 43
                                                        {67, 147, 195},   // L* 58
                                                        {146, 197, 222},  // L* 77
                                                        {222, 222, 222},  // L* 88
                                                        {253, 184, 99},   // L* 80
                                                        {224, 130, 20},   // L* 63
                                                        {160, 76, 8},     // L* 42
                                                        {100, 42, 6}}};   // L* 25
// Coverage shares: pale yellow to dark green, one hue family, lightness
// falling with the share, distinct from the price-level scale; stops
// hand-coded for this report.
inline constexpr std::array<Rgb, 7> kSequentialStops = {{{255, 255, 229},
                                                         {217, 240, 163},
                                                         {173, 221, 142},
                                                         {120, 198, 121},
                                                         {65, 171, 93},
                                                         {35, 132, 67},
                                                         {0, 90, 50}}};

// A symmetric scale for price levels: ratio `span` >= 1 maps to the top end
// and 1 / span to the bottom, 100 to the middle.
struct DivergingScale {
  double span = 1.25;
  // True when some values lie beyond the span and take the end colours.
  bool clamped = false;
  double T(double parity) const { return 0.5 + 0.5 * std::log(parity / 100.0) / std::log(span); }
  Rgb Colour(double parity) const { return Interpolate(kDivergingStops, T(parity)); }
};

// Returns the smallest readable span covering ratios up to `max_ratio`.
DivergingScale MakeDivergingScale(double max_ratio);
// Folds a parity into the ratio to 100 as seen from either side.
double FoldedRatio(double parity);
// A scale for a grid: spans the 95th percentile of the values' distances
// from 100, so one extreme cell does not wash out the rest.
DivergingScale GridScale(const std::vector<std::vector<double>>& values);
// Nice tick positions covering [lo, hi], about `target` of them.
std::vector<double> NiceTicks(double lo, double hi, int target);
// Decimals that show ticks of this spacing without noise.
int TickDecimals(const std::vector<double>& ticks);
// A horizontal gradient legend with labelled ends and middle; `id` names
// its gradient, unique on the page.
std::string DivergingLegend(const DivergingScale& scale, const std::string& id);
std::string SequentialLegend(const std::string& id);

// ---------------------------------------------------------------------------
// The page context: the regions in price-level order and their labels.

struct Context {
  const ReportInputs& in;
  const Survey& survey;
  const ParityResult& result;
  const NodeResult& root;
  std::string root_code;
  // Regions with a root parity, dearest first (ties by survey order).
  std::vector<int> order;
  // Regions without one.
  std::vector<int> missing;
  // Rank position of each region in `order`; -1 when missing.
  std::vector<int> position;

  std::string Code(int r) const { return std::string(survey.regions.Code(r)); }
  // The region's name when given, else its code.
  std::string Label(int r) const {
    const std::string& name =
        r < static_cast<int>(survey.region_name.size()) ? survey.region_name[r] : "";
    return name.empty() ? Code(r) : name;
  }
  // A node's label when given, else its code.
  const std::string& NodeName(int node) const { return survey.classification.LabelOrCode(node); }
  // "label (code)" when the node has a label, else the code.
  std::string NodeTip(int node) const {
    const ClassificationNode& n = survey.classification.nodes()[node];
    return n.label.empty() ? n.code : n.label + " (" + n.code + ")";
  }
  bool HasNames() const {
    for (const std::string& name : survey.region_name) {
      if (!name.empty()) return true;
    }
    return false;
  }
};

// Returns at most `max_count` of `order`, evenly spaced and keeping both
// ends, so a thinned grid still spans the dearest to the cheapest.
std::vector<int> EveryKth(const std::vector<int>& order, int max_count);
// Labels of the warnings about a node and region, ", "-joined ("" when none
// or when the report has no plausibility result).
std::string WarningKindsOf(const Context& ctx, int node, int region);
// A visible mark (&#9888; with the labels as its tooltip) when there are
// such warnings, else "".
std::string WarningMark(const Context& ctx, int node, int region);
// The note under a thinned grid ("" when every region is shown).
std::string ThinningNote(const Context& ctx, size_t shown, const std::string& where);

// Small pieces of every section.
std::string OpenSection(const std::string& id, const std::string& title);
std::string Card(const std::string& value, const std::string& label);

// ---------------------------------------------------------------------------
// Region grids (report_grids.cc).

// A region x column grid of coloured cells with optional values.
struct GridSpec {
  std::string id;
  std::string aria;
  std::vector<std::string> row_labels;
  std::vector<std::string> row_tips;
  std::vector<std::string> column_labels;
  // Tooltips of the column titles (empty = none), e.g. the code behind a name.
  std::vector<std::string> column_tips;
  std::vector<bool> column_bold;
  // values[row][column], NaN = no value (hatched).
  std::vector<std::vector<double>> values;
  std::function<Rgb(double)> colour;
  std::function<std::string(double)> format;
  std::function<std::string(int, int, double)> tip;
  double max_cell_w = 64.0;
  // Extra gap before these columns (separates summary columns).
  std::set<int> gap_before;
};

std::string Grid(const GridSpec& g);

// The pair-interval charts of the sensitivity section (report_pairs.cc);
// "" when the run computed none.
std::string PairChartsHtml(const Context& ctx, const ReportSensitivity& s);

// ---------------------------------------------------------------------------
// The sections, in page order; each returns a whole <section>.

std::string Overview(const Context& ctx);  // report_overview.cc
// Wraps the chart and table of report_price_levels.cc.
std::string PriceLevelSection(const Context& ctx, const std::vector<RegionSpread>& spreads);
// report_grids.cc
std::string AggregateSection(const Context& ctx);
// The analytic groups: their definitions and headings, and their price levels.
std::string GroupSection(const Context& ctx);
std::string MatrixSection(const Context& ctx);
std::string CoverageSection(const Context& ctx);
// report_diagnostics.cc
// From the root's full matrices, or from the spreads computed without them.
std::string SpreadSection(const Context& ctx, const BilateralMatrices& b);
std::string SpreadSection(const Context& ctx, const SpreadSummary& summary);
std::string OutlierSection(const Context& ctx, const std::vector<ReportOutlier>& outliers);
std::string SensitivitySection(const Context& ctx, const ReportSensitivity& s);
// report_contributions.cc: "Why regions are dear" (empty without root rows).
std::string ContributionSection(const Context& ctx, const ContributionTable& table);
// report_tree.cc: the root's spanning tree (spanning-tree method only).
std::string TreeSection(const Context& ctx);
// report_methods.cc
std::string MethodsSection(const Context& ctx);
std::string CautionsSection();

// The page's style sheet and its one script (report_style.cc).
extern const char* const kStyle;
extern const char* const kScript;

}  // namespace paritas::internal::report

#endif  // PARITAS_INTERNAL_OUTPUT_REPORT_PARTS_H_
