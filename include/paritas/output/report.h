// The HTML report: one self-contained page (inline SVG and CSS, one small
// script that only sorts tables) for people who review parities by looking.
// Everything is drawn on the server side from the result, so the page opens
// offline, prints, and carries no data inside script.
#ifndef PARITAS_OUTPUT_REPORT_H_
#define PARITAS_OUTPUT_REPORT_H_

#include <string>
#include <string_view>
#include <vector>

#include "paritas/compute/compute.h"
#include "paritas/compute/plausibility.h"
#include "paritas/output/output_writers.h"
#include "paritas/survey/config.h"
#include "paritas/uncertainty/outliers.h"
#include "paritas/survey/survey.h"
#include "paritas/survey/survey_loader.h"

namespace paritas {

struct ContributionTable;  // use/heading_contributions.h

// One flagged cell (region x item of a basic heading), as the outlier
// listing gives it.
struct ReportOutlier {
  std::string heading;  // basic heading code
  std::string region;   // region code
  std::string item;     // item code
  // Cell price observed (geometric mean of the quotes) and the price the
  // model predicts, in currency units.
  double observed = 0.0;
  double predicted = 0.0;
  // Residual of ln price divided by its standard error; the sign says
  // whether the observed price is above (+) or below (-) the prediction.
  double standardised_residual = 0.0;
  int num_quotes = 0;  // quotes behind the cell
  // Labels shown beside the codes: the heading's (`labels:`) and the item's
  // description (items.csv); empty when none.
  std::string heading_label;
  std::string item_label;
};

// Sensitivity of the root's parities, when a sensitivity run was made.
// Every vector may be empty; the report draws only what is filled.
struct ReportSensitivity {
  // Interval of the root parity of each region (survey order, reference =
  // 100); NaN where none. Both empty or both of size num_regions.
  std::vector<double> parity_lower;
  std::vector<double> parity_upper;
  // What the interval is, for the legend, e.g. "90 % interval over item
  // resamples". Default "uncertainty interval".
  std::string interval_label = "uncertainty interval";

  // One point of the coverage curve: the survey thinned to a share of each heading's
  // items, and the typical change of the root's parities that follows.
  struct CoveragePoint {
    double coverage_share = 1.0;  // share of each heading's items kept, in (0, 1]
    // Median over regions of |ln(parity thinned / parity full)|, x 100
    // (percent, about).
    double median_spread_pct = 0.0;
  };
  std::vector<CoveragePoint> coverage_curve;

  // Root parity of each region (survey order, reference = 100) under each
  // alternative method; method_parity[m] has num_regions entries, NaN where
  // the method gives none. method_names[m] names method m.
  std::vector<std::string> method_names;
  std::vector<std::vector<double>> method_parity;

  // Which regions' levels can be told apart at one node (the root and each
  // top-level aggregate), from the intervals of their parity ratios
  // (uncertainty/pair_ratios.h).
  struct PairChart {
    int node = 0;  // classification node index
    // Regions with a parity at the node, dearest first.
    std::vector<int> order;
    // Every pair known: verdict[i * order.size() + j] of order[i] against
    // order[j] is +1 (dearer), -1 (cheaper), 0 (cannot be told apart), NaN
    // (no interval or i = j). Empty when only neighbours in rank were
    // computed.
    std::vector<double> verdict;
    // neighbour_apart[k]: 1 when order[k] and order[k + 1] are told apart,
    // 0 when not, NaN when no interval; order.size() - 1 entries.
    std::vector<double> neighbour_apart;
  };
  std::vector<PairChart> pair_charts;
  // The level of the pair intervals, e.g. "95 %".
  std::string pair_level_label;
};

// Everything the report shows. Pointers may be null where a part was not
// computed; the report leaves that section out.
struct ReportInputs {
  const RunConfig* config = nullptr;
  const Survey* survey = nullptr;
  const LoadSummary* load = nullptr;
  const ParityResult* result = nullptr;
  const ComputeSummary* compute = nullptr;
  // Every warning of the run, in listing order (CollectWarnings).
  std::vector<RunWarning> warnings;
  // Warning kinds per node and region: marks (&#9888;) in the price level
  // table and the aggregate grid. May be null.
  const PlausibilityResult* plausibility = nullptr;
  // Flagged outliers; null = outliers were not looked for (section left
  // out), empty = none beyond the threshold.
  const std::vector<ReportOutlier>* outliers = nullptr;
  // Cells the screen could form no prediction for (nothing checked them).
  int64_t num_cells_not_screenable = 0;
  // Sensitivity of the root; null = not run (section and intervals left out).
  const ReportSensitivity* sensitivity = nullptr;
  // Contributions of each heading to each region's ln parity
  // (HeadingContributions); null = section "Why regions are dear" left out.
  const ContributionTable* contributions = nullptr;
  // Region explained heading by heading in that section (a code); empty =
  // the dearest at the root.
  std::string explain_region;
  // Runs of `paritas carry`: the caution shown first on the page, in a box
  // of its own ("Extrapolated parities"), that every figure was carried
  // from a benchmark by price indices. Empty (default) = a survey run.
  std::string extrapolation_caution;
  // The root's spreads per region (RegionSpreads) when the caller has them;
  // null or of another size = computed here from the root's bilaterals.
  const std::vector<RegionSpread>* root_spreads = nullptr;
  // False when the run wrote no matrix/ and bilateral/ tables (a survey
  // beyond matrices_up_to_regions); the report then says how to ask for them.
  bool pair_tables_written = true;
};

// Regions and cells shown individually in the grids (region x aggregate,
// parity matrix, coverage) before they are thinned (every k-th region by
// price level) or binned; the full data are in the CSV outputs.
inline constexpr int kReportMaxGridRegions = 60;
// Regions drawn as labelled horizontal bars; above this the price-level chart
// becomes a compact column per region.
inline constexpr int kReportMaxLabelledBars = 80;

// The outlier listing as the report shows it (quotes are marked in the item
// column, e.g. "milk (highest quote)").
std::vector<ReportOutlier> ToReportOutliers(const Survey& survey, const OutlierReport& report);

// Returns the whole page. Never fails: missing inputs leave sections out.
std::string ReportHtml(const ReportInputs& inputs);

// Escapes text for HTML element content and attribute values (& < > " '),
// after showing control and bidirectional-override characters and invalid
// UTF-8 as visible escapes (VisibleText in text.h).
std::string HtmlEscape(std::string_view text);

}  // namespace paritas

#endif  // PARITAS_OUTPUT_REPORT_H_
