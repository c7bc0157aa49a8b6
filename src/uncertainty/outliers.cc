// Every cell is judged by how well the rest of the survey predicts it, never
// by a residual the cell itself could have shrunk: a robust fit keeps gross
// errors from dragging the heading's fit, the leave-one-out error corrects
// for what a cell's own weight pulls the fit, and a cell that alone fixes its
// region's level in a heading is predicted from the region's level in the
// other headings. The yardsticks are robust (median absolute residual) so the
// errors being looked for do not inflate the scale that measures them.
#include "paritas/uncertainty/outliers.h"

#include <algorithm>
#include <array>
#include <atomic>
#include <bit>
#include <cmath>
#include <iterator>
#include <limits>
#include <numeric>
#include <span>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include "base/not_a_number.h"
#include "base/eigen_threads.h"
#include "output/format_rows.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/output/output_writers.h"
#include "uncertainty/outlier_fit.h"

namespace paritas {
namespace {

using internal::CellLink;
using internal::ScreenFit;

constexpr double kMadToSigma = 1.4826;
// Above this hat value a cell's residual holds less than half of its
// deviation; it is reported as screened by leave-one-out (the statistic is
// the same leave-one-out error either way, so nothing jumps at 0.5).
constexpr double kLeaveOneOutHat = 0.5;
// Gaussian efficiency of the median absolute deviation (Rousseeuw and Croux
// 1993, "Alternatives to the median absolute deviation", JASA 88): a MAD
// from n residuals is as variable as a standard deviation on 0.37 n degrees
// of freedom.
constexpr double kMadEfficiency = 0.37;
// Regions needed to measure a heading's spread of regional levels against
// the other headings; below it the survey's median spread is used.
constexpr int kMinSpreadRegions = 3;

// Returns the standard normal deviate with the tail probability of Student's
// t = `t` on `dof` degrees of freedom (Wallace 1959, "Bounds on normal
// approximations to Student's and the chi-square distributions", Ann. Math.
// Statist. 30: z = (8 dof + 1) / (8 dof + 3) sqrt(dof ln(1 + t^2 / dof)),
// within about 0.01 of the exact deviate from 5 degrees of freedom). A ratio
// to an estimated scale is t-like; on the normal scale the threshold keeps
// its nominal rate however few cells the scale came from.
double NormalEquivalent(double t, double dof) {
  if (!(dof > 0.0) || !std::isfinite(t)) return t;
  const double z = (8.0 * dof + 1.0) / (8.0 * dof + 3.0) * std::sqrt(dof * std::log1p(t * t / dof));
  return t < 0.0 ? -z : z;
}

double Median(std::vector<double> values) {
  if (values.empty()) return kNaN;
  const size_t mid = values.size() / 2;
  std::nth_element(values.begin(), values.begin() + mid, values.end());
  double median = values[mid];
  if (values.size() % 2 == 0) median = 0.5 * (median + *std::max_element(values.begin(), values.begin() + mid));
  return median;
}

// Median of the finite values, NaN when there are none.
double FiniteMedian(const std::vector<double>& values) {
  std::vector<double> finite;
  for (double v : values) {
    if (std::isfinite(v)) finite.push_back(v);
  }
  return Median(std::move(finite));
}

ScreenFit FitHeading(const Survey& survey, int h, const OutlierOptions& options,
                     internal::FitWorkspace* workspace) {
  const HeadingRange& range = survey.heading_range[h];
  const size_t begin = static_cast<size_t>(range.cell_begin), n = static_cast<size_t>(range.num_cells());
  std::vector<int> item(n);  // numbered within the heading
  for (size_t k = 0; k < n; ++k) item[k] = survey.cells.item[begin + k] - range.item_begin;
  CpdData data;
  data.num_regions = survey.num_regions();
  data.num_items = range.num_items();
  data.region = std::span<const int>(survey.cells.region).subspan(begin, n);
  data.item = item;
  data.log_price = std::span<const double>(survey.cells.log_price).subspan(begin, n);
  return internal::FitScreen(data, options, workspace);
}

// Median of sorted `values` without the one at position `skip`.
double MedianWithout(const std::vector<double>& values, size_t skip) {
  const size_t n = values.size() - 1;
  auto at = [&](size_t i) { return values[i < skip ? i : i + 1]; };
  return n % 2 == 1 ? at(n / 2) : 0.5 * (at(n / 2 - 1) + at(n / 2));
}

// For every region s priced in heading h, how much dearer s is in h than its
// price level in the other headings predicts: the median over the headings
// g that price s and at least two regions of h of
//   (a_sh - a_sg) - median over the other regions t of (a_th - a_tg).
// Relative to the other regions priced in both headings, so no normalisation
// enters; medians, so an error elsewhere in h (or in g) does not move it.
// NaN where no such g. `levels` holds the screen's ln parities, regions x
// headings (NaN where absent).
Eigen::VectorXd LevelDeviations(const Eigen::MatrixXd& levels, int h) {
  const int num_regions = static_cast<int>(levels.rows()), num_headings = static_cast<int>(levels.cols());
  std::vector<std::vector<double>> per_region(num_regions);
  std::vector<std::pair<double, int>> pairs;
  std::vector<double> sorted;
  for (int g = 0; g < num_headings; ++g) {
    if (g == h) continue;
    pairs.clear();
    for (int t = 0; t < num_regions; ++t) {
      if (std::isfinite(levels(t, h)) && std::isfinite(levels(t, g))) pairs.push_back({levels(t, h) - levels(t, g), t});
    }
    if (pairs.size() < 3) continue;  // s and at least two others
    std::sort(pairs.begin(), pairs.end());
    sorted.clear();
    for (const auto& [difference, t] : pairs) sorted.push_back(difference);
    for (size_t p = 0; p < pairs.size(); ++p) per_region[pairs[p].second].push_back(sorted[p] - MedianWithout(sorted, p));
  }
  Eigen::VectorXd deviation = Eigen::VectorXd::Constant(num_regions, kNaN);
  for (int s = 0; s < num_regions; ++s) {
    if (std::isfinite(levels(s, h))) deviation[s] = Median(std::move(per_region[s]));
  }
  return deviation;
}

// As LevelDeviations for a group of regions `side` against the heading's
// other regions (a cell that alone links several regions to the rest):
// median over g of the median of (a_th - a_tg) on the side less the median
// over the others.
double SideLevelDeviation(const Eigen::MatrixXd& levels, int h, const std::vector<int>& side) {
  std::vector<uint8_t> on_side(levels.rows(), 0);
  for (int r : side) on_side[r] = 1;
  std::vector<double> values, differences[2];
  for (int g = 0; g < levels.cols(); ++g) {
    if (g == h) continue;
    differences[0].clear();
    differences[1].clear();
    for (int t = 0; t < levels.rows(); ++t) {
      if (std::isfinite(levels(t, h)) && std::isfinite(levels(t, g))) {
        differences[on_side[t]].push_back(levels(t, h) - levels(t, g));
      }
    }
    if (differences[0].empty() || differences[1].empty()) continue;
    values.push_back(Median(differences[1]) - Median(differences[0]));
  }
  return Median(std::move(values));
}

// What the survey-wide context gives every heading's screen.
struct ScreenContext {
  const Eigen::MatrixXd* levels = nullptr;  // regions x headings
  // Per heading: LevelDeviations, the robust scale s and the spread t of
  // the regional levels against the other headings (both pooled where the
  // heading has too few cells or regions of its own).
  std::vector<Eigen::VectorXd> level_deviation;
  std::vector<double> scale;
  std::vector<double> spread;
  // Degrees of freedom of each (kMadEfficiency x the residual degrees of
  // freedom of the fit, or of the regions behind the spread).
  std::vector<double> scale_dof;
  std::vector<double> spread_dof;
};

// The prediction a cell is measured against: ln predicted price, the
// standard deviation of the prediction error, and how it was formed.
struct Prediction {
  ScreenedBy how = ScreenedBy::kNotScreenable;
  double log_predicted = kNaN;
  double sd = kNaN;
  // Degrees of freedom of the estimate of `sd` (MAD efficiency x residual
  // degrees of freedom; Welch-Satterthwaite when two scales combine).
  double dof = kNaN;
  double leverage = kNaN;
  std::string note;
};

// Predicts a cell whose hat value is 1 from its region's (or its side's)
// price level in the other headings: d = how much dearer the region is here
// than elsewhere, which for such a cell moves one for one with its price.
Prediction PredictFromOtherHeadings(const Survey& survey, int h, int64_t k, const ScreenFit& fit,
                                    const ScreenContext& context) {
  const int64_t c = survey.heading_range[h].cell_begin + k;
  const int region = survey.cells.region[c];
  const int item = survey.cells.item[c] - survey.heading_range[h].item_begin;
  Prediction p;
  p.leverage = 1.0;
  const auto side = fit.region_side.find(static_cast<int>(k));
  const bool alone = side == fit.region_side.end();
  const double d = alone ? context.level_deviation[h][region] : SideLevelDeviation(*context.levels, h, side->second);
  if (!std::isfinite(d)) {
    p.note = alone ? "region's only linked cell in the heading, and no other heading prices it with the others"
                   : "links regions that no other heading prices with the rest";
    return p;
  }
  const double s = context.scale[h], t = context.spread[h];
  if (!std::isfinite(s) || !std::isfinite(t)) {
    p.note = "too few cells in the survey to measure the scatter";
    return p;
  }
  // Error variance: the cell's own noise, the item effect from its m other
  // cells, and how far regions' levels in this heading stray from their
  // levels elsewhere (t, measured on the heading's regions).
  const int others = fit.item_num_cells[item] - 1;
  const double own = s * s * (1.0 + 1.0 / others), levels = t * t;
  p.how = ScreenedBy::kLeaveOneOut;
  p.log_predicted = survey.cells.log_price[c] - d;
  p.sd = std::sqrt(own + levels);
  p.dof = (own + levels) * (own + levels) /
          (own * own / context.scale_dof[h] + levels * levels / context.spread_dof[h]);
  p.note = alone ? "region's only linked cell in the heading"
                 : "cell alone links " + std::to_string(side->second.size()) + " regions to the heading";
  return p;
}

// Predicts cell k of heading h, whose entries in the fit are at `slot` (k,
// or its place in ScreenFit::open once the fit is prescreened).
// SurelyQuiet below repeats this function's rules for which cells can be
// screened (two regions or more, an ordinary link, finite s and q, hat < 1)
// and its split between the fit and leave-one-out: a case added here must
// be added there, or a quiet cell would skip it.
Prediction PredictCell(const Survey& survey, int h, int64_t k, int64_t slot, const ScreenFit& fit,
                       const ScreenContext& context, int num_regions_present) {
  Prediction p;
  p.leverage = 1.0;  // until shown otherwise: the cases below all have hat value 1
  if (num_regions_present < 2) {
    p.note = "heading priced in one region";
    return p;
  }
  if (fit.link[slot] == CellLink::kItemOnlyHere) {
    p.note = "item priced only in this region";
    return p;
  }
  if (fit.link[slot] == CellLink::kCutsHeading) return PredictFromOtherHeadings(survey, h, k, fit, context);
  const double s = context.scale[h];
  const double q = fit.leverage[slot];
  const double hat = std::min(1.0, fit.weight[slot] * q);
  if (!std::isfinite(s) || !std::isfinite(q) || !(hat < 1.0)) {
    p.note = "too few cells in the survey to measure the scatter";
    return p;
  }
  // Leave-one-out error of the weighted fit, d = e / (1 - h), and its
  // standard deviation s sqrt(1 + q / (1 - h)) (the prediction's variance
  // x'(X'WX - w x x')^-1 x s^2 by Sherman-Morrison).
  const int item = survey.cells.item[survey.heading_range[h].cell_begin + k] - survey.heading_range[h].item_begin;
  p.how = hat > kLeaveOneOutHat ? ScreenedBy::kLeaveOneOut : ScreenedBy::kFit;
  p.leverage = hat;
  p.log_predicted = survey.cells.log_price[survey.heading_range[h].cell_begin + k] - fit.residual[slot] / (1.0 - hat);
  p.sd = s * std::sqrt((1.0 - hat + q) / (1.0 - hat));
  p.dof = context.scale_dof[h];
  if (p.how == ScreenedBy::kLeaveOneOut) {
    p.note = fit.item_num_cells[item] == 2 ? "item priced in 2 regions" : "hat value " + FormatFixed(hat, 2);
  }
  return p;
}

// Flags and counts of one heading.
struct HeadingRows {
  std::vector<Outlier> flagged;
  std::vector<Outlier> not_screenable;
  std::vector<int> num_flagged_by_region;
  int64_t num_by_fit = 0;
  int64_t num_leave_one_out = 0;
};

// m(dof), the median of chi-square on dof degrees of freedom (see below).
double MedianChiSquare(int dof) { return dof == 1 ? 0.454936 : dof * std::pow(1.0 - 2.0 / (9.0 * dof), 3); }

// The typical scatter of one quote around its cell's mean: the median over
// the heading's cells with several quotes of sd_k / sqrt(m(n_k - 1) /
// (n_k - 1)), m(k) the median of chi-square on k degrees of freedom, so each
// term has median sigma (a plain median of sd_k would be 0.67 sigma for two
// quotes). m(1) = 0.6745^2 exactly; otherwise k (1 - 2 / (9k))^3 (Wilson and
// Hilferty 1931).
double WithinCellSd(const Survey& survey, int h) {
  // sqrt(m(dof) / dof) of the few degrees of freedom most cells have,
  // formed at a heading's first cell with each (at run time, as before:
  // a value folded by the compiler could differ from the library's pow in
  // its last digit); 0 until then.
  constexpr int kNumKept = 32;
  std::array<double, kNumKept> kept{};
  // The terms' bit patterns: when all are non-negative and finite (as sds
  // are), the median is selected by radix (the same value as Median gives).
  std::vector<uint64_t> within;
  uint64_t largest = 0;
  for (int64_t c = survey.heading_range[h].cell_begin; c < survey.heading_range[h].cell_end; ++c) {
    const int dof = survey.cells.num_quotes[c] - 1;
    if (dof < 1) continue;
    double root_share = dof < kNumKept ? kept[dof] : 0.0;
    if (root_share == 0.0) {
      root_share = std::sqrt(MedianChiSquare(dof) / dof);
      if (dof < kNumKept) kept[dof] = root_share;
    }
    within.push_back(std::bit_cast<uint64_t>(survey.cells.log_sd[c] / root_share));
    largest = std::max(largest, within.back());
  }
  if (within.empty()) return 0.0;
  if (largest < std::bit_cast<uint64_t>(std::numeric_limits<double>::infinity())) {
    internal::ScaleScratch scratch;
    return internal::MedianOfNonNegative(within, &scratch);
  }
  std::vector<double> values(within.size());
  std::transform(within.begin(), within.end(), values.begin(), [](uint64_t x) { return std::bit_cast<double>(x); });
  return Median(std::move(values));
}

Outlier MakeRow(const Survey& survey, int h, int64_t c, const Prediction& p) {
  Outlier row;
  row.heading = h;
  row.region = survey.cells.region[c];
  row.item = survey.cells.item[c];
  row.num_quotes = survey.cells.num_quotes[c];
  row.how = p.how;
  row.leverage = p.leverage;
  row.note = p.note;
  row.observed = std::exp(survey.cells.log_price[c]);
  row.predicted = std::exp(p.log_predicted);  // NaN when not screenable
  return row;
}

// Prediction error of ln price `log_observed` over `sd`, on the normal scale.
double Standardised(double log_observed, double sd, const Prediction& p) {
  const double d = log_observed - p.log_predicted;
  return sd > 0.0 ? NormalEquivalent(d / sd, p.dof) : 0.0;
}

// Whether |Standardised| exceeds `threshold`, setting *z when it does. The
// normal deviate is never larger than the ratio it maps (Student's t has
// the heavier tails; in Wallace's formula ln(1 + x) <= x and
// (8 dof + 1) / (8 dof + 3) < 1), so a ratio within the threshold is not
// mapped: most cells cost no logarithm.
bool Beyond(double log_observed, double sd, const Prediction& p, double threshold, double* z) {
  if (!(sd > 0.0) || !(std::abs((log_observed - p.log_predicted) / sd) > threshold)) return false;
  *z = Standardised(log_observed, sd, p);
  return std::abs(*z) > threshold;
}

// Lists the lowest and highest quote of cell c when it is far from the
// prediction and also from the mean of the cell's other quotes: one bad
// quote among good ones, not a cell whose quotes all share one error (that
// is the cell's row). The second test needs no model, so a prediction that
// is off cannot make a cell's quotes look wrong.
void ScreenQuotes(const Survey& survey, int h, int64_t c, const Prediction& p, double within_sd,
                  double threshold, std::vector<Outlier>* flagged) {
  const int n = survey.cells.num_quotes[c];
  if (n < 2) return;
  double quote_sd = kNaN;  // formed when first needed: most cells' quotes are not apart
  const double mate_sd = within_sd * std::sqrt(1.0 + 1.0 / (n - 1));
  for (OutlierKind kind : {OutlierKind::kLowestQuote, OutlierKind::kHighestQuote}) {
    const double x = kind == OutlierKind::kLowestQuote ? survey.cells.log_min[c] : survey.cells.log_max[c];
    const double mates = (n * survey.cells.log_price[c] - x) / (n - 1);
    const double gap = std::abs(x - mates);
    const bool apart = mate_sd > 0.0 ? gap / mate_sd > threshold : gap > 0.0;
    double z = 0.0;
    if (!apart) continue;
    if (std::isnan(quote_sd)) quote_sd = std::hypot(p.sd, within_sd);
    if (!Beyond(x, quote_sd, p, threshold, &z)) continue;
    Outlier quote = MakeRow(survey, h, c, p);
    quote.kind = kind;
    quote.observed = std::exp(x);
    quote.standardised_residual = z;
    flagged->push_back(std::move(quote));
  }
}

// A test that most cells of a heading pass with products alone: a cell
// passing it is neither flagged nor has a quote apart from its mates, so
// PredictCell and ScreenQuotes need not run (their quotients and roots are
// most of the screen proper's time). It asks, in squares, for the cell's
// error and each extreme quote's gap to stay below the threshold by the
// relative margin kQuietMargin, far beyond the roundings of the exact test
// (a few units of 1e-16, relative to the log prices, which the per-heading
// bounds keep small against the margin).
struct QuietTest {
  bool usable = false;          // for the cells (then also for cells of one quote)
  bool quotes_usable = false;   // for cells of several quotes
  double threshold_scale_square = 0.0;   // (threshold s)^2 (1 - 4e-4)^2
  double threshold_within_square = 0.0;  // (threshold within_sd)^2 (1 - 4e-4)^2
  double log_price_limit = 0.0;          // |ln p| of the cells tested stays below
};
constexpr double kQuietMargin = 4e-4;

QuietTest MakeQuietTest(double scale, double within_sd, double threshold) {
  QuietTest test;
  const double t_s = threshold * scale, t_within = threshold * within_sd;
  const double shrink = (1.0 - kQuietMargin) * (1.0 - kQuietMargin);
  // The roundings of the exact tests are below 20 units of 2^-53 of the
  // largest |ln p| involved; the limit keeps them below a tenth of the margin.
  const double unit = std::numeric_limits<double>::epsilon() / 2.0;
  test.usable = std::isfinite(t_s) && t_s > 1e-100 && t_s < 1e100;
  test.quotes_usable = test.usable && std::isfinite(t_within) && t_within > 1e-100 && t_within < 1e100;
  test.log_price_limit = 0.1 * kQuietMargin * (test.quotes_usable ? std::min(t_s, t_within) : t_s) / (20.0 * unit);
  test.threshold_scale_square = t_s * t_s * shrink;
  test.threshold_within_square = t_within * t_within * shrink;
  return test;
}

// Whether cell k (c in the survey) passes `test` as a cell screened by the
// fit's own residual (link kNone, hat value w q in [0, 1)), setting *hat.
// |d| / sd < threshold, d = e / (1 - h) and sd = s sqrt((1 - h + q) /
// (1 - h)), in squares: e^2 < (threshold s)^2 (1 - h) (1 - h + q). Each
// extreme quote x of n: |x - mates| / mate_sd < threshold, mates = (n ln p -
// x) / (n - 1) and mate_sd = within sqrt(n / (n - 1)): (x - ln p)^2 n <
// (threshold within)^2 (n - 1).
bool SurelyQuiet(const Survey& survey, int64_t k, int64_t c, const ScreenFit& fit, const QuietTest& test,
                 double* hat) {
  const double q = fit.leverage[k];
  const double h = std::min(1.0, fit.weight[k] * q);
  *hat = h;
  const double log_price = survey.cells.log_price[c];
  if (fit.link[k] != CellLink::kNone || !(q >= 0.0) || !(h < 1.0) || !(std::abs(log_price) < test.log_price_limit)) {
    return false;
  }
  const double e = fit.residual[k];
  const double one_less = 1.0 - h;
  if (!(e * e < test.threshold_scale_square * one_less * (one_less + q))) return false;
  const int n = survey.cells.num_quotes[c];
  if (n < 2) return true;
  if (!test.quotes_usable) return false;
  const double low = survey.cells.log_min[c], high = survey.cells.log_max[c];
  if (!(std::abs(low) < test.log_price_limit) || !(std::abs(high) < test.log_price_limit)) return false;
  const double bound = test.threshold_within_square * (n - 1);
  return (low - log_price) * (low - log_price) * n < bound && (high - log_price) * (high - log_price) * n < bound;
}

// The number of regions with a parity in the heading's fit.
int NumRegionsPresent(const Survey& survey, const ScreenFit& fit) {
  int num_regions_present = 0;
  for (int r = 0; r < survey.num_regions(); ++r) num_regions_present += std::isfinite(fit.log_parity[r]) ? 1 : 0;
  return num_regions_present;
}

// Whether the quiet pretest (SurelyQuiet with `quiet`) may settle cells.
bool PretestApplies(const QuietTest& quiet, int num_regions_present) {
  return quiet.usable && num_regions_present >= 2 && internal::QuietPretestEnabled();
}

// When the heading's own scale is finite (the screen then uses it, whatever
// the other headings give), settles its surely quiet cells right after the
// fit, as ScreenHeading would, and keeps the fit's per-cell entries only for
// the others (ScreenFit::open): the fits of every heading wait for the
// screen's second pass, and most cells are quiet (on a survey of 21 million
// quotes the entries took 25 bytes for each of 10.5 million cells).
void PrescreenQuietCells(const Survey& survey, int h, const OutlierOptions& options, ScreenFit* fit) {
  if (!fit->identified || !std::isfinite(fit->scale)) return;
  const QuietTest quiet = MakeQuietTest(fit->scale, fit->within_sd, options.threshold);
  if (!PretestApplies(quiet, NumRegionsPresent(survey, *fit))) return;
  const HeadingRange& range = survey.heading_range[h];
  for (int64_t k = 0; k < range.num_cells(); ++k) {
    double hat = 0.0;
    if (SurelyQuiet(survey, k, range.cell_begin + k, *fit, quiet, &hat)) {
      (hat > kLeaveOneOutHat ? fit->num_quiet_leave_one_out : fit->num_quiet_by_fit) += 1;
    } else {
      fit->open.push_back(static_cast<int>(k));
    }
  }
  const auto keep_open = [&fit](auto& entries) {
    std::decay_t<decltype(entries)> kept(fit->open.size());
    for (size_t j = 0; j < fit->open.size(); ++j) kept[j] = entries[fit->open[j]];
    entries.swap(kept);
  };
  keep_open(fit->residual);
  keep_open(fit->weight);
  keep_open(fit->leverage);
  keep_open(fit->link);
  fit->prescreened = true;
}

// Screens cell k of heading h (its fit's entries at `slot`), adding its
// rows and counts to `rows`.
void ScreenCell(const Survey& survey, int h, int64_t k, int64_t slot, const ScreenFit& fit,
                const ScreenContext& context, const OutlierOptions& options, int num_regions_present,
                double within_sd, HeadingRows* rows) {
  const int64_t c = survey.heading_range[h].cell_begin + k;
  const Prediction p = PredictCell(survey, h, k, slot, fit, context, num_regions_present);
  if (p.how == ScreenedBy::kNotScreenable) {
    rows->not_screenable.push_back(MakeRow(survey, h, c, p));
    rows->not_screenable.back().standardised_residual = kNaN;
    return;
  }
  (p.how == ScreenedBy::kFit ? rows->num_by_fit : rows->num_leave_one_out) += 1;
  double z = 0.0;
  if (Beyond(survey.cells.log_price[c], p.sd, p, options.threshold, &z)) {
    rows->flagged.push_back(MakeRow(survey, h, c, p));
    rows->flagged.back().standardised_residual = z;
    ++rows->num_flagged_by_region[survey.cells.region[c]];
  }
  ScreenQuotes(survey, h, c, p, within_sd, options.threshold, &rows->flagged);
}

// Screens the cells of heading h and the extreme quotes of each.
HeadingRows ScreenHeading(const Survey& survey, int h, const ScreenFit& fit, const ScreenContext& context,
                          const OutlierOptions& options) {
  HeadingRows rows;
  rows.num_flagged_by_region.assign(survey.num_regions(), 0);
  const HeadingRange& range = survey.heading_range[h];
  const int num_regions_present = NumRegionsPresent(survey, fit);
  const double within_sd = fit.within_sd;
  if (fit.prescreened) {
    rows.num_by_fit = fit.num_quiet_by_fit;
    rows.num_leave_one_out = fit.num_quiet_leave_one_out;
    for (size_t j = 0; j < fit.open.size(); ++j) {
      ScreenCell(survey, h, fit.open[j], static_cast<int64_t>(j), fit, context, options, num_regions_present,
                 within_sd, &rows);
    }
    return rows;
  }
  const QuietTest quiet = MakeQuietTest(context.scale[h], within_sd, options.threshold);
  const bool try_quiet = PretestApplies(quiet, num_regions_present);
  for (int64_t k = 0; k < range.num_cells(); ++k) {
    double hat = 0.0;
    if (try_quiet && SurelyQuiet(survey, k, range.cell_begin + k, fit, quiet, &hat)) {
      (hat > kLeaveOneOutHat ? rows.num_leave_one_out : rows.num_by_fit) += 1;
      continue;
    }
    ScreenCell(survey, h, k, k, fit, context, options, num_regions_present, within_sd, &rows);
  }
  return rows;
}

// Residual ln p - fitted of every cell of heading h under the elementary
// method, in cell order (for dispersion.csv).
Eigen::VectorXd MethodResiduals(const Survey& survey, const HeadingParities& heading) {
  const HeadingRange& range = survey.heading_range[heading.heading];
  const int64_t n = range.num_cells();
  if (heading.cell_residual.size() == n) return heading.cell_residual;
  Eigen::VectorXd item_sum = Eigen::VectorXd::Zero(range.num_items());
  Eigen::VectorXd item_count = Eigen::VectorXd::Zero(range.num_items());
  for (int64_t c = range.cell_begin; c < range.cell_end; ++c) {
    const int i = survey.cells.item[c] - range.item_begin;
    item_sum(i) += survey.cells.log_price[c] - heading.log_parity(survey.cells.region[c]);
    item_count(i) += 1.0;
  }
  Eigen::VectorXd residual(n);
  for (int64_t k = 0; k < n; ++k) {
    const int64_t c = range.cell_begin + k;
    const int i = survey.cells.item[c] - range.item_begin;
    residual(k) = survey.cells.log_price[c] - heading.log_parity(survey.cells.region[c]) - item_sum(i) / item_count(i);
  }
  return residual;
}

std::vector<Dispersion> HeadingDispersion(const Survey& survey, const HeadingParities& heading,
                                          const std::vector<int>& num_flagged_by_region) {
  const HeadingRange& range = survey.heading_range[heading.heading];
  const Eigen::VectorXd residual = MethodResiduals(survey, heading);
  std::vector<Dispersion> rows(survey.num_regions());
  for (int64_t k = 0; k < range.num_cells(); ++k) {
    Dispersion& d = rows[survey.cells.region[range.cell_begin + k]];
    d.num_items += 1;
    d.rms_log_residual += residual(k) * residual(k);
    d.max_abs_log_residual = std::max(d.max_abs_log_residual, std::abs(residual(k)));
  }
  std::vector<Dispersion> out;
  for (int r = 0; r < survey.num_regions(); ++r) {
    Dispersion& d = rows[r];
    if (d.num_items == 0) continue;
    d.heading = heading.heading;
    d.region = r;
    d.rms_log_residual = std::sqrt(d.rms_log_residual / d.num_items);
    d.num_flagged = num_flagged_by_region.empty() ? 0 : num_flagged_by_region[r];
    out.push_back(d);
  }
  return out;
}

// Spread t of heading h's regional levels against the other headings:
// 1.4826 x median |LevelDeviations| over its regions (NaN with fewer than
// kMinSpreadRegions), with its degrees of freedom.
void MeasureSpread(const Eigen::MatrixXd& levels, int h, ScreenContext* context) {
  context->level_deviation[h] = LevelDeviations(levels, h);
  std::vector<double> magnitude;
  for (double d : context->level_deviation[h]) {
    if (std::isfinite(d)) magnitude.push_back(std::abs(d));
  }
  if (static_cast<int>(magnitude.size()) < kMinSpreadRegions) return;
  context->spread[h] = kMadToSigma * Median(magnitude);
  context->spread_dof[h] = kMadEfficiency * (static_cast<double>(magnitude.size()) - 1.0);
}

// The survey-wide part: every heading's scale, and for the headings with
// cells that cut them (the only ones that need it) the level deviations and
// spread; a heading with too little of its own borrows the median heading's.
ScreenContext MakeContext(const std::vector<ScreenFit>& fits, const Eigen::MatrixXd& levels,
                          int threads) {
  const int num_headings = static_cast<int>(fits.size());
  ScreenContext context;
  context.levels = &levels;
  context.level_deviation.resize(num_headings);
  context.scale.assign(num_headings, kNaN);
  context.spread.assign(num_headings, kNaN);
  context.scale_dof.assign(num_headings, kNaN);
  context.spread_dof.assign(num_headings, kNaN);
  std::vector<uint8_t> needs_spread(num_headings, 0);
  for (int h = 0; h < num_headings; ++h) {
    if (!fits[h].identified) continue;
    needs_spread[h] = std::count(fits[h].link.begin(), fits[h].link.end(), CellLink::kCutsHeading) > 0;
    if (std::isfinite(fits[h].scale)) {
      context.scale[h] = fits[h].scale;
      context.scale_dof[h] = kMadEfficiency * std::max(1, fits[h].degrees_of_freedom);
    }
  }
  for (int pass = 0; pass < 2; ++pass) {
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
    for (int h = 0; h < num_headings; ++h) {
      internal::KeepEigenOnThisThread();
      if (fits[h].identified && needs_spread[h] == (pass == 0 ? 1 : 0)) MeasureSpread(levels, h, &context);
    }
    // The second pass measures the other headings too, only when a heading
    // must borrow and none of the first has a spread to lend.
    bool must_borrow = false;
    for (int h = 0; h < num_headings; ++h) must_borrow |= needs_spread[h] && !std::isfinite(context.spread[h]);
    if (!must_borrow || std::isfinite(FiniteMedian(context.spread))) break;
  }
  const double pooled[4] = {FiniteMedian(context.scale), FiniteMedian(context.scale_dof),
                            FiniteMedian(context.spread), FiniteMedian(context.spread_dof)};
  for (int h = 0; h < num_headings; ++h) {
    if (!std::isfinite(context.scale[h])) {
      context.scale[h] = pooled[0];
      context.scale_dof[h] = pooled[1];
    }
    if (!std::isfinite(context.spread[h])) {
      context.spread[h] = pooled[2];
      context.spread_dof[h] = pooled[3];
    }
  }
  return context;
}

std::atomic<bool> quiet_pretest_enabled{true};

}  // namespace

namespace internal {
void EnableQuietPretest(bool enabled) { quiet_pretest_enabled.store(enabled, std::memory_order_relaxed); }
bool QuietPretestEnabled() { return quiet_pretest_enabled.load(std::memory_order_relaxed); }
}  // namespace internal

OutlierOptions OutlierOptions::FromConfig(const RunConfig& config) {
  OutlierOptions options;
  options.threshold = config.outlier_threshold;
  FromString(config.outlier_fit, &options.fit);
  options.num_threads = config.threads;
  return options;
}

std::string ToString(OutlierFit fit) { return fit == OutlierFit::kRobust ? "robust" : "least-squares"; }

bool FromString(const std::string& text, OutlierFit* fit) {
  const std::string lower = ToLower(Trim(text));
  for (OutlierFit candidate : {OutlierFit::kRobust, OutlierFit::kLeastSquares}) {
    if (lower == ToString(candidate)) {
      *fit = candidate;
      return true;
    }
  }
  return false;
}

bool OutlierOptions::IsValid(std::string* error) const {
  if (!(threshold > 0) || !std::isfinite(threshold)) {
    *error = "outlier threshold must be a positive number";
    return false;
  }
  if (fit != OutlierFit::kRobust && fit != OutlierFit::kLeastSquares) {
    *error = "outlier fit must be robust or least-squares";
    return false;
  }
  if (!(huber_constant > 0) || !std::isfinite(huber_constant)) {
    *error = "outlier huber_constant must be a positive number";
    return false;
  }
  if (max_iterations < 1 || max_iterations > 10000) {
    *error = "outlier max_iterations is " + std::to_string(max_iterations) + "; it must be from 1 to 10,000";
    return false;
  }
  if (!(weight_tolerance > 0 && weight_tolerance <= 0.5)) {
    *error = "outlier weight_tolerance must be above 0 and at most 0.5";
    return false;
  }
  if (num_threads < 0) {
    *error = "outlier num_threads is " + std::to_string(num_threads) + "; it must be 0 (all cores) or more";
    return false;
  }
  return true;
}

std::string ToString(OutlierKind kind) {
  switch (kind) {
    case OutlierKind::kCell:
      return "cell";
    case OutlierKind::kLowestQuote:
      return "lowest_quote";
    case OutlierKind::kHighestQuote:
      return "highest_quote";
  }
  return "?";
}

std::string ToString(ScreenedBy how, OutlierFit fit) {
  switch (how) {
    case ScreenedBy::kFit:
      return fit == OutlierFit::kRobust ? "robust fit" : "least-squares fit";
    case ScreenedBy::kLeaveOneOut:
      return "leave-one-out";
    case ScreenedBy::kNotScreenable:
      return "not screenable";
  }
  return "?";
}

OutlierReport FindOutliers(const Survey& survey, const ParityResult& result,
                           const OutlierOptions& options) {
  OutlierReport report;
  internal::FixEigenBlockSizes();
  report.fit = options.fit;
  const int num_headings = survey.num_headings();
  report.num_flagged_cells.assign(num_headings, 0);
  report.residual_scale.assign(num_headings, kNaN);
  report.num_iterations.assign(num_headings, 0);
  report.converged.assign(num_headings, 0);
  std::string error;
  if (!options.IsValid(&error)) return report;
  // Headings are independent in each pass: each fills its own slot, joined
  // in heading order afterwards, so the report is the same for any number of
  // threads.
  std::vector<ScreenFit> fits(num_headings);
  const int threads = options.num_threads > 0 ? options.num_threads : omp_get_max_threads();
  // One workspace per thread, reused from heading to heading; the biggest
  // headings first, so that no thread is left with a big one at the end.
  std::vector<internal::FitWorkspace> workspaces(threads);
  std::vector<int> by_size(num_headings);
  std::iota(by_size.begin(), by_size.end(), 0);
  std::stable_sort(by_size.begin(), by_size.end(), [&](int a, int b) {
    return survey.heading_range[a].num_cells() > survey.heading_range[b].num_cells();
  });
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (int j = 0; j < num_headings; ++j) {
    internal::KeepEigenOnThisThread();
    const int h = by_size[j];
    if (survey.heading_range[h].num_cells() > 0) {
      fits[h] = FitHeading(survey, h, options, &workspaces[omp_get_thread_num()]);
      // Once for both passes (it was formed in each: 1.6 % of T's samples).
      if (fits[h].identified) fits[h].within_sd = WithinCellSd(survey, h);
      PrescreenQuietCells(survey, h, options, &fits[h]);
    }
  }
  std::vector<internal::FitWorkspace>().swap(workspaces);  // released before the screen proper
  Eigen::MatrixXd levels = Eigen::MatrixXd::Constant(survey.num_regions(), num_headings, kNaN);
  for (int h = 0; h < num_headings; ++h) {
    if (fits[h].identified) levels.col(h) = fits[h].log_parity;
  }
  const ScreenContext context = MakeContext(fits, levels, threads);
  std::vector<HeadingRows> rows(num_headings);
  std::vector<std::vector<Dispersion>> dispersion(num_headings);
  const int num_with_result = std::min(num_headings, static_cast<int>(result.headings.size()));
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (int h = 0; h < num_headings; ++h) {
    internal::KeepEigenOnThisThread();
    if (fits[h].identified) rows[h] = ScreenHeading(survey, h, fits[h], context, options);
    // A heading whose parities came from the external file (num_cells 0 in
    // the result) has no fit to measure its quotes' dispersion against.
    if (h < num_with_result && result.headings[h].identified && result.headings[h].num_cells > 0 &&
        survey.heading_range[h].num_cells() > 0) {
      dispersion[h] = HeadingDispersion(survey, result.headings[h], rows[h].num_flagged_by_region);
    }
  }
  for (int h = 0; h < num_headings; ++h) {
    HeadingRows& heading = rows[h];
    if (fits[h].identified) {
      report.residual_scale[h] = context.scale[h];
      report.num_iterations[h] = fits[h].num_iterations;
      report.converged[h] = fits[h].converged ? 1 : 0;
    }
    for (const Outlier& o : heading.flagged) report.num_flagged_cells[h] += o.kind == OutlierKind::kCell ? 1 : 0;
    report.num_cells_by_fit += heading.num_by_fit;
    report.num_cells_leave_one_out += heading.num_leave_one_out;
    report.num_cells_not_screenable += static_cast<int64_t>(heading.not_screenable.size());
    report.outliers.insert(report.outliers.end(), std::make_move_iterator(heading.flagged.begin()),
                           std::make_move_iterator(heading.flagged.end()));
    report.not_screenable.insert(report.not_screenable.end(),
                                 std::make_move_iterator(heading.not_screenable.begin()),
                                 std::make_move_iterator(heading.not_screenable.end()));
    report.dispersion.insert(report.dispersion.end(), dispersion[h].begin(), dispersion[h].end());
  }
  std::stable_sort(report.outliers.begin(), report.outliers.end(), [](const Outlier& a, const Outlier& b) {
    return std::abs(a.standardised_residual) > std::abs(b.standardised_residual);
  });
  return report;
}

std::string OutliersCsv(const Survey& survey, const OutlierReport& report) {
  internal::JoinedText text;
  OutliersCsvBlocks(survey, report, text.Sink());
  return text.Take();
}

void OutliersCsvBlocks(const Survey& survey, const OutlierReport& report, const TextBlocks& emit) {
  const int64_t num_flagged = static_cast<int64_t>(report.outliers.size());
  const int64_t num_rows = num_flagged + static_cast<int64_t>(report.not_screenable.size());
  constexpr int64_t kRowsPerBlock = 8192;
  internal::FormatRowBlocks(
      num_rows, kRowsPerBlock, 120,
      [&](int64_t row, std::string* out) {
        const Outlier& o = row < num_flagged ? report.outliers[row] : report.not_screenable[row - num_flagged];
        AppendCsvField(survey.heading_codes[o.heading], out);
        *out += ',';
        AppendCsvField(survey.regions.Code(o.region), out);
        *out += ',';
        AppendCsvField(survey.items.Code(o.item), out);
        *out += ',';
        *out += ToString(o.kind);
        *out += ',';
        AppendShortest(o.observed, out);
        *out += ',';
        AppendShortest(o.predicted, out);
        *out += ',';
        AppendShortest(o.observed / o.predicted, out);
        *out += ',';
        AppendShortest(o.standardised_residual, out);
        *out += ',';
        AppendInteger(o.num_quotes, out);
        *out += ',';
        *out += ToString(o.how, report.fit);
        *out += ',';
        AppendShortest(o.leverage, out);
        *out += ',';
        AppendCsvField(o.note, out);
        *out += '\n';
      },
      "heading,region,item,kind,observed,predicted,ratio,standardised_residual,num_quotes,how,leverage,note\n",
      emit);
}

std::string DispersionCsv(const Survey& survey, const OutlierReport& report) {
  internal::JoinedText text;
  DispersionCsvBlocks(survey, report, text.Sink());
  return text.Take();
}

void DispersionCsvBlocks(const Survey& survey, const OutlierReport& report, const TextBlocks& emit) {
  constexpr int64_t kRowsPerBlock = 16384;
  internal::FormatRowBlocks(
      static_cast<int64_t>(report.dispersion.size()), kRowsPerBlock, 64,
      [&](int64_t row, std::string* out) {
        const Dispersion& d = report.dispersion[row];
        AppendCsvField(survey.heading_codes[d.heading], out);
        *out += ',';
        AppendCsvField(survey.regions.Code(d.region), out);
        *out += ',';
        AppendInteger(d.num_items, out);
        *out += ',';
        AppendShortest(d.rms_log_residual, out);
        *out += ',';
        AppendShortest(d.max_abs_log_residual, out);
        *out += ',';
        AppendInteger(d.num_flagged, out);
        *out += '\n';
      },
      "heading,region,num_items,rms_log_residual,max_abs_log_residual,num_flagged\n", emit);
}

}  // namespace paritas
