// "Is region A dearer than region B?": the interval of the ratio of two
// regions' parities taken from the SAME bootstrap replicates. Both parities of
// a replicate rest on the same resampled items, so their shared sampling
// errors move together and partly cancel in the ratio; two separate intervals
// that overlap do not say the regions cannot be told apart.
#ifndef PARITAS_UNCERTAINTY_PAIR_RATIOS_H_
#define PARITAS_UNCERTAINTY_PAIR_RATIOS_H_

#include <limits>
#include <string>
#include <vector>

#include "paritas/survey/classification.h"
#include "paritas/survey/survey.h"

namespace paritas {

// What the interval of P_a / P_b says about region a against region b.
//   kDearer: the whole interval lies above 1 (a's level is higher);
//   kCheaper: the whole interval lies below 1;
//   kIndistinguishable: the interval holds 1;
//   kNone: fewer than two replicates gave both regions a parity.
enum class PairVerdict { kNone, kDearer, kCheaper, kIndistinguishable };
// "none", "dearer", "cheaper", "indistinguishable".
std::string ToString(PairVerdict verdict);
// Case-insensitive; returns false for unknown names.
bool FromString(const std::string& text, PairVerdict* verdict);

// The ratio of two regions' parities at one node.
struct PairRatio {
  int region_a = -1;  // survey region index
  int region_b = -1;
  // Full-sample P_a / P_b (ratio scale, no unit); NaN when either has none.
  double ratio = std::numeric_limits<double>::quiet_NaN();
  // Interval of P_a / P_b at the run's level: exp of the type-7 quantiles
  // (PercentileType7) at p and 1 - p of d_b = ln P_a,b - ln P_b,b over the
  // replicates b in which both regions have a parity, with p =
  // ExpandedLowerLevel(level, interval_df, interval_scale) (expanded_interval.h;
  // the percentile interval of Efron and Tibshirani 1993, ch. 13, applied to
  // the statistic ln(P_a / P_b), when there is no expansion: p = (1 - level)
  // / 2). NaN with fewer than two such replicates. Swapping a and b gives
  // (1 / upper, 1 / lower) exactly, as type-7 quantiles of -d are minus
  // those of d.
  double lower = std::numeric_limits<double>::quiet_NaN();
  double upper = std::numeric_limits<double>::quiet_NaN();
  int num_replicates = 0;  // replicates in which both had a parity
  // Degrees of freedom and scale of the expansion (PairExpansion); NaN and 1
  // when there is none.
  double interval_df = std::numeric_limits<double>::quiet_NaN();
  double interval_scale = 1.0;
  PairVerdict verdict = PairVerdict::kNone;

  // True when the interval lies wholly above or wholly below 1.
  bool ExcludesOne() const {
    return verdict == PairVerdict::kDearer || verdict == PairVerdict::kCheaper;
  }
};

// Returns the interval of P_a / P_b from `num_replicates` replicate ln
// parities of each region (NaN = no parity in that replicate), at `level`
// in (0, 1), expanded with `interval_df` and `interval_scale` (NaN and 1:
// the plain percentile interval); `full_ratio` is copied into
// PairRatio::ratio.
PairRatio PairRatioFromReplicates(const double* log_a, const double* log_b, int num_replicates,
                                  double level, double full_ratio,
                                  double interval_df = std::numeric_limits<double>::quiet_NaN(),
                                  double interval_scale = 1.0);

// The expansion of a pair's interval from its two regions' (degrees of
// freedom, scale) at the node (SensitivityResult::boot_interval_df and
// boot_interval_scale): nu = min(nu_a, nu_b), NaN (no t expansion) counting
// as infinite, and k = max(k_a, k_b). Conservative: the ratio's standard
// error rests on both regions' items, so its degrees of freedom are at
// least the smaller of the two (a Satterthwaite nu of the ratio would need
// the covariance of the two parities, which the replicates share).
void PairExpansion(double df_a, double scale_a, double df_b, double scale_b, double* df,
                   double* scale);

// The pair intervals of one node.
struct NodePairRatios {
  int node = 0;  // classification node index
  // Regions with a full-sample parity at the node, dearest first (ties by
  // survey order).
  std::vector<int> order;
  // True: `pairs` holds every pair of regions with a parity, each once, a
  // before b in survey order (R (R - 1) / 2 pairs). False: only neighbours
  // in rank, (order[k], order[k + 1]) for each k (R - 1 pairs).
  bool all_pairs = false;
  std::vector<PairRatio> pairs;
};

// Every pair is computed and written up to this many regions with a parity
// at the node (1,770 pairs per node); above it only neighbours in rank,
// unless SensitivityOptions::all_pairs asks for every pair.
inline constexpr int kAllPairsMaxRegions = 60;

// The nodes given pair intervals: the root, then the root's children that
// are aggregates (not basic headings), in tree order.
std::vector<int> PairRatioNodes(const Classification& classification);

// sensitivity/pair_ratios.csv: node,region_a,region_b,ratio,lower,upper,
// num_replicates,excludes_one,verdict,interval_df,interval_scale (the
// expansion, PairRatio::interval_df empty where none); ratio, lower and upper are of
// P_a / P_b; excludes_one is "yes" or "no"; verdict as ToString(PairVerdict),
// of a against b. Numbers in the shortest form that reads back exactly.
std::string PairRatiosCsv(const Survey& survey, const std::vector<NodePairRatios>& nodes);

}  // namespace paritas

#endif  // PARITAS_UNCERTAINTY_PAIR_RATIOS_H_
