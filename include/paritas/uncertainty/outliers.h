// Screening of cell prices for recording errors: every cell is compared with
// the price the rest of the survey predicts for it, so that a wrong price
// cannot pass unflagged because it moved its own fit. The screen refits each
// heading itself (a robust CPD by default), whatever the elementary method,
// and leaves the parities untouched.
#ifndef PARITAS_UNCERTAINTY_OUTLIERS_H_
#define PARITAS_UNCERTAINTY_OUTLIERS_H_

#include <cstdint>
#include <string>
#include <vector>

#include "paritas/compute/compute.h"
#include "paritas/output/run_folder.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey.h"

namespace paritas {

// The fit each heading's cells are screened against.
enum class OutlierFit {
  // CPD by iteratively reweighted least squares with Huber weights, the scale
  // re-estimated at every iteration (default): gross errors get little
  // weight, so they neither drag the fit nor hide behind it.
  kRobust,
  // Plain least-squares CPD: every cell weighs 1, so a gross error pulls the
  // fit (and the other cells of its region and item) towards itself.
  kLeastSquares,
};
// "robust", "least-squares".
std::string ToString(OutlierFit fit);
// Case-insensitive; returns false for unknown names.
bool FromString(const std::string& text, OutlierFit* fit);

struct OutlierOptions {
  // A cell or quote is flagged when |standardised residual| exceeds this.
  // 3.5 (default) follows Iglewicz and Hoaglin (1993), "How to Detect and
  // Handle Outliers", who recommend flagging modified z-scores (residual /
  // (1.4826 x median absolute residual)) above 3.5; under normal errors
  // about 0.47 clean cells in 1,000 exceed it. Positive and finite.
  double threshold = 3.5;
  // Fit of each heading (default robust).
  OutlierFit fit = OutlierFit::kRobust;
  // Huber tuning constant c (robust fit): a cell with |residual| > c x scale
  // gets weight c x scale / |residual|, the others weight 1. 1.345 (default)
  // gives 95 % efficiency under normal errors (Huber 1981, "Robust
  // Statistics"; Holland and Welsch 1977; common practice). Positive, finite.
  double huber_constant = 1.345;
  // Iterations of the robust fit at most (default 200; 1 to 10,000). Most
  // headings settle in 5 to 15; re-estimating the scale at every step can
  // make a few creep for a hundred (one demo heading takes 117). A heading
  // that reaches the cap is still screened, with the last weights;
  // OutlierReport::converged says so.
  int max_iterations = 200;
  // The robust fit stops when no cell's weight changes by more than this
  // between two iterations (default 1e-4, far finer than anything that
  // moves a flag; in (0, 0.5]).
  double weight_tolerance = 1e-4;
  // Worker threads for the headings (default 0 = all cores; the run's
  // `threads`). The flags do not depend on it.
  int num_threads = 0;

  // Returns false and sets `error` when a field is out of range, e.g.
  // "outlier threshold must be a positive number".
  bool IsValid(std::string* error) const;
  // The options a run configuration asks for (outlier_threshold, outlier_fit).
  static OutlierOptions FromConfig(const RunConfig& config);
};

enum class OutlierKind { kCell, kLowestQuote, kHighestQuote };
// "cell", "lowest_quote", "highest_quote".
std::string ToString(OutlierKind kind);

// How a cell was screened: the `how` column of outliers.csv.
enum class ScreenedBy {
  // By its own residual in the heading's robust (or least-squares) fit, which
  // for a cell of hat value h_k <= 0.5 carries most of its deviation.
  kFit,
  // By the error of predicting it without it: from the heading's other cells
  // when they determine the prediction (hat value above 0.5, e.g. an item
  // priced in two regions), from the region's price level in the other
  // headings when they do not (hat value 1, e.g. a region's only cell).
  kLeaveOneOut,
  // Nothing else prices what the cell measures (an item priced only in this
  // region, a heading priced in one region, a region priced in no other
  // heading): no residual exists and none is invented.
  kNotScreenable,
};
// "robust fit" or "least-squares fit" (by `fit`), "leave-one-out",
// "not screenable".
std::string ToString(ScreenedBy how, OutlierFit fit);

struct Outlier {
  OutlierKind kind = OutlierKind::kCell;
  int heading = -1;
  int region = -1;
  int item = -1;
  // Observed price (cell geometric mean, or the quote) and the price the rest
  // of the survey predicts for the cell, exp(ln observed cell price - d) with
  // d the leave-one-out prediction error (see standardised_residual);
  // currency units. NaN for a cell that is not screenable.
  double observed = 0.0;
  double predicted = 0.0;
  // Prediction error over its standard deviation, read on the normal scale:
  // the ratio t is mapped to the normal deviate with the same tail
  // probability under Student's t on 0.37 x the degrees of freedom behind
  // the scale (the MAD's Gaussian efficiency, Rousseeuw and Croux 1993;
  // Wallace 1959's approximation), so the threshold means the same in a
  // small heading as in a large one. The ratio: for cells screened by the
  // fit, e / (s sqrt((1 - h)(1 - h + q))), i.e. the leave-one-out error
  // d = e / (1 - h) of the weighted fit (e the residual, q = x'(X'WX)^+ x,
  // h = w q the hat value) over its standard deviation s sqrt(1 + q / (1 - h)),
  // with s = OutlierReport::residual_scale. For h = 1 (leave-one-out across
  // headings): d / sqrt(s^2 (1 + 1/m) + t^2), d how much dearer the region is
  // in this heading than in the others (medians over headings and regions),
  // m the item's other cells, t the heading's spread of such d over its
  // regions (degrees of freedom by Welch-Satterthwaite). A quote:
  // (ln quote - ln predicted) / sqrt(sd^2 + v^2), sd the cell's prediction
  // standard deviation, v the heading's typical within-cell sd of ln quotes.
  // NaN when not screenable.
  double standardised_residual = 0.0;
  int num_quotes = 0;
  ScreenedBy how = ScreenedBy::kFit;
  // Hat value w q of the cell in the screen's fit (0 to 1; 1 = the cell alone
  // fixes a region's or item's level in the heading).
  double leverage = 0.0;
  // Why a cell was screened by leave-one-out or not at all, e.g. "region's
  // only linked cell in the heading"; empty for cells screened by the fit.
  std::string note;
};

// Dispersion of one region's log price ratios against the fitted parities in
// one heading.
struct Dispersion {
  int heading = -1;
  int region = -1;
  int num_items = 0;
  double rms_log_residual = 0.0;
  double max_abs_log_residual = 0.0;
  int num_flagged = 0;
};

struct OutlierReport {
  // The fit the cells were screened against (OutlierOptions::fit).
  OutlierFit fit = OutlierFit::kRobust;
  // Flagged cells and quotes, worst (largest |standardised residual|) first.
  std::vector<Outlier> outliers;
  // Cells no residual can be formed for (how = kNotScreenable), in survey
  // order; not flags, but a reviewer must know nothing checked them.
  std::vector<Outlier> not_screenable;
  std::vector<Dispersion> dispersion;  // heading-major, regions in survey order
  // Per heading: flagged cells, and the robust residual scale s in log
  // points: 1.4826 x median |e_k| / sqrt(1 - h_k) over the cells with hat
  // value h_k < 1 in the final fit (normalised MAD about 0, Hampel 1974;
  // dividing by sqrt(1 - h) gives each term variance sigma^2); the median
  // heading's where fewer than 3 cells have h < 1. NaN where the heading
  // was not screened.
  std::vector<int> num_flagged_cells;
  std::vector<double> residual_scale;
  // Per heading: iterations of the robust fit, and whether its weights
  // settled within OutlierOptions::weight_tolerance (1 for least squares).
  std::vector<int> num_iterations;
  std::vector<uint8_t> converged;
  // Cells screened by the fit, by leave-one-out, and not screenable.
  int64_t num_cells_by_fit = 0;
  int64_t num_cells_leave_one_out = 0;
  int64_t num_cells_not_screenable = 0;
};

// Screens every heading whose regions are linked (the others have no
// parities; `paritas check` reports them). Cells are screened whatever the
// elementary method, each weighing 1 before the Huber weights
// (representativity weights shape parities, not the search for errors); `result` gives the dispersion (its residuals where the
// method has them, otherwise ln p - ln P_r - b_i with b_i the mean over the
// item's cells of ln p - ln P_r). Quotes: the lowest and highest quote of
// every screened cell with several quotes are listed when they are beyond the
// threshold both against the cell's prediction and against the mean of the
// cell's other quotes (so a cell whose quotes are all wrong by one factor is
// one row). Deterministic for any number of threads. Returns an empty report
// (scales NaN) when `options` are invalid.
OutlierReport FindOutliers(const Survey& survey, const ParityResult& result,
                           const OutlierOptions& options);

// outliers.csv: heading,region,item,kind,observed,predicted,ratio,
// standardised_residual,num_quotes,how,leverage,note (ratio = observed /
// predicted; how as ToString(ScreenedBy)). The flagged rows come first, worst
// first; then one row per cell that is not screenable, with predicted, ratio
// and standardised_residual empty.
std::string OutliersCsv(const Survey& survey, const OutlierReport& report);
// As OutliersCsv, handed to `emit` in blocks as they are formatted.
void OutliersCsvBlocks(const Survey& survey, const OutlierReport& report, const TextBlocks& emit);
// dispersion.csv: heading,region,num_items,rms_log_residual,
// max_abs_log_residual,num_flagged.
std::string DispersionCsv(const Survey& survey, const OutlierReport& report);
// As DispersionCsv, handed to `emit` in blocks as they are formatted.
void DispersionCsvBlocks(const Survey& survey, const OutlierReport& report, const TextBlocks& emit);

}  // namespace paritas

#endif  // PARITAS_UNCERTAINTY_OUTLIERS_H_
