// Sensitivity of parities to the sample of items and to the method: a
// bootstrap over items, leave-one-out runs, coverage curves and a method
// spread. Every run recomputes the whole chain (elementary -> aggregates ->
// normalisation). Resampling items is expressed as an integer weight per item
// (its multiplicity, 0 = dropped) applied to the survey's cells as loaded, so
// no replicate copies the survey.
#ifndef PARITAS_UNCERTAINTY_SENSITIVITY_H_
#define PARITAS_UNCERTAINTY_SENSITIVITY_H_

#include <atomic>
#include <cstdint>
#include <functional>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/compute/compute.h"
#include "paritas/survey/config.h"
#include "paritas/output/report.h"
#include "paritas/output/run_folder.h"
#include "paritas/survey/survey.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/uncertainty/expanded_interval.h"
#include "paritas/uncertainty/pair_ratios.h"

namespace paritas {

// How the bootstrap draws each heading's n items (n = items with prices).
//   kRescaled (default): n - 1 draws with replacement, the rescaled
//     bootstrap of Rao and Wu (1988, "Resampling inference with complex
//     survey data", JASA 83, 231-241) with m_h = n_h - 1. Rao and Wu
//     rescale each drawn value's deviation from its stratum mean by
//     sqrt(m_h / (n_h - 1)) (for a linear statistic, the same as rescaling
//     the replicate's deviation from the full-sample estimate); the factor
//     is 1 for m_h = n_h - 1 in every heading, so the replicate's ln
//     parities (headings and aggregates) are used as computed,
//       ln p~*_b = ln p^ + sqrt((n - 1)/(n - 1)) (ln p*_b - ln p^) = ln p*_b.
//     For a mean over items the replicate variance is then s^2 / n, which
//     is unbiased (the jackknife's (n - 1)/n sum (theta_(i) - mean)^2 gives
//     the same); n draws give (n - 1)/n s^2 / n, biased low. A heading with
//     one item keeps it (n - 1 = 0 draws would leave no parity); it adds no
//     variance, as in the jackknife.
//   kPlain: n draws with replacement (Efron 1979), biased low by a factor
//     sqrt((n - 1)/n) in standard error for a mean over items.
enum class BootstrapKind { kRescaled, kPlain };
// "rescaled", "plain".
std::string ToString(BootstrapKind kind);
// Case-insensitive; returns false for unknown names.
bool FromString(const std::string& text, BootstrapKind* kind);

// Largest interval level (99.9 %). The ends are read from the replicates'
// tails: beyond 99.9 % even 100,000 replicates put fewer than 50 in each.
// Near 1 the levels themselves fail: at 1 - 2^-53 the upper quantile level
// (1 + level) / 2 rounds to 1 and the interval collapsed onto the largest
// replicate.
inline constexpr double kMaxIntervalLevel = 0.999;
// Smallest interval level (1 %): below it a level is more likely a slip
// (a share typed for a percentage) than an interval anyone wants.
inline constexpr double kMinIntervalLevel = 0.01;

// Smallest target standard error of ln parity (1e-6 log points, 0.0001 %).
// The items-needed factor (SE / target)^2 stays finite below it for any
// standard error a ln parity of doubles can have (under 1,500 log points),
// where 1e-300 made it infinite; and no price survey plans for a finer one.
inline constexpr double kMinTargetLogSe = 1e-6;

struct SensitivityOptions {
  // Bootstrap replicates B, a whole number from 2 to 100,000 (default 500).
  int replicates = 500;
  // Seed of the resampling; any value (default 1). Replicate b draws from
  // its own stream derived from (seed, b), so output does not depend on the
  // number of threads.
  uint64_t seed = 1;
  // Draws of the bootstrap (default rescaled; see BootstrapKind).
  BootstrapKind bootstrap = BootstrapKind::kRescaled;
  // Keeps every replicate's ln parities in SensitivityResult::boot_log_parity
  // and writes them (replicates.bin, replicates_key.csv; see
  // ReplicatesBinary). Default false.
  bool write_replicates = false;
  // Writes the interval of every pair of regions in pair_ratios.csv (and
  // draws the full pairwise chart) even above kAllPairsMaxRegions regions;
  // there only neighbours in rank are computed by default, as R regions
  // make R (R - 1) / 2 pairs per node. Default false.
  bool all_pairs = false;
  // Level of the percentile intervals, above 0 and at most
  // kMaxIntervalLevel (default 0.95).
  double level = 0.95;
  // Which interval the bootstrap reports (default expanded; see
  // IntervalKind). Expanded: percentiles at p = Phi(-k t_(nu, (1 + level) /
  // 2)) and 1 - p (Hesterberg 2015), with nu the degrees of freedom of the
  // parity's standard error: m - 1 for a region that priced m >= 2 of a
  // heading's items, 1 for one item, the heading's n_h - 1 for a parity a
  // rule filled (none for an external heading or a heading of one item), the
  // Welch-Satterthwaite nu of its headings for an aggregate or group
  // (SensitivityResult::boot_interval_df); k = 1 for the rescaled bootstrap,
  // sqrt((nu + 1) / nu) for the plain one (SensitivityResult::boot_interval_scale). Percentile: (1 - level) / 2
  // and (1 + level) / 2. Rank intervals stay at the percentile levels.
  IntervalKind interval = IntervalKind::kExpanded;
  // Shares of each heading's items kept in the coverage curve, each in
  // (0, 1], no repeats (default 90, 75, 50 and 25 %).
  std::vector<double> coverage_levels = {0.9, 0.75, 0.5, 0.25};
  // Random subsamples per coverage level, 2 to 10,000 (default 20).
  int coverage_repetitions = 20;
  // Target standard error of ln parity for the items-needed table
  // (items_needed.h), in log points (0.01 is about 1 %); from
  // kMinTargetLogSe up to below 1 (default 0.01). Used only when the
  // bootstrap runs.
  double target_log_se = 0.01;
  // Parts to run (all by default); at least one must be on.
  bool run_bootstrap = true;
  bool run_leave_one_out = true;
  bool run_coverage = true;
  bool run_methods = true;
  // Worker threads over replicates; 0 = all cores (default). Each replicate
  // runs the chain on one thread.
  int num_threads = 0;
  // Called now and then from one thread with the part running ("bootstrap",
  // "leave-one-out", "coverage", "methods"), units done and units in the
  // part; may be empty. For progress display only.
  std::function<void(const std::string& part, int64_t done, int64_t total)> progress;
  // Cancellation: when set and it becomes true, the bootstrap skips its
  // remaining replicates, no later part starts, and RunSensitivity returns
  // false with outcome kCancelled and message "cancelled" (the Python module
  // sets it on Ctrl-C). Default none; read with relaxed ordering.
  const std::atomic<bool>* cancel = nullptr;
  // Node whose results the terminal table shows: a code of the
  // classification or of a group (default empty = the root). Every node is
  // in the CSV files whatever this says.
  std::string node;

  // Returns false and sets `error` for a field out of range, e.g.
  // "replicates must be a whole number from 2 to 100000, found 0".
  bool IsValid(std::string* error) const;
};

// Names of the parts, as --parts takes them: "bootstrap", "leave-one-out",
// "coverage", "methods".
std::vector<std::string> SensitivityPartNames();
// Sets the run_* flags of `options` from a list of part names
// (case-insensitive); returns false with a message naming an unknown part.
bool SetSensitivityParts(const std::vector<std::string>& parts, SensitivityOptions* options,
                         std::string* error);

// The spread of parities when a random share of the items is kept, one per
// coverage level. Matrices are nodes x regions (classification node order,
// survey region order).
struct CoverageLevel {
  double coverage = 0.0;  // share of each heading's items kept, (0, 1]
  int num_repetitions = 0;
  // Standard deviation over repetitions of ln parity (divisor n - 1), in log
  // points; NaN with fewer than two repetitions giving the region a parity.
  Eigen::MatrixXd log_sd;
  // Median and largest |ln(parity of the subsample / full-sample parity)|
  // over the repetitions, in log points; NaN when no repetition gave one.
  Eigen::MatrixXd median_abs_log_change;
  Eigen::MatrixXd max_abs_log_change;
  // Repetitions in which the region had no parity (it lost all its items).
  Eigen::MatrixXi num_missing;
};

// Parities of one combination of elementary and aggregation method.
struct MethodRun {
  // Registry names of the two methods.
  std::string elementary;
  std::string aggregation;
  // "<elementary>/<aggregation>", e.g. "cpd/geks-fisher".
  std::string name;
  // Parity (reference = 100), nodes x regions; NaN where none or the run
  // failed.
  Eigen::MatrixXd parity;
  // Empty when the run succeeded, else why it failed.
  std::string message;
};

// Results per node x region: every matrix has one row per classification
// node (node order) and one column per region (survey order). Parts not run
// leave their matrices empty.
struct SensitivityResult {
  // Items with prices in each heading (the n the bootstrap draws from), and
  // 1 for headings taken from the external parities file; per heading.
  std::vector<int> heading_num_items;
  std::vector<uint8_t> heading_external;
  // Items each region priced in each heading (regions x headings; 0 where
  // none): the m that bounds the expanded interval's degrees of freedom.
  Eigen::MatrixXi region_num_items;

  // Full-sample parity (reference = 100) and rank (1 = dearest, 0 = none).
  Eigen::MatrixXd parity;
  Eigen::MatrixXi rank;

  // Bootstrap: median and percentile interval of the replicates' parities
  // (type-7 quantiles, see PercentileType7), standard deviation of their ln
  // parities (divisor B - 1; Efron and Tibshirani 1993, eq. 6.6), the rank
  // interval (type-7 quantiles of the ranks, rounded outwards to whole
  // ranks: rank_low is the dearest end) and the replicates in which the
  // region had a parity.
  Eigen::MatrixXd boot_median;
  Eigen::MatrixXd boot_lower;
  Eigen::MatrixXd boot_upper;
  Eigen::MatrixXd boot_log_se;
  Eigen::MatrixXi boot_rank_low;
  Eigen::MatrixXi boot_rank_high;
  Eigen::MatrixXi boot_num_replicates;
  // Degrees of freedom nu and scale k of the expanded interval (see
  // SensitivityOptions::interval); boot_lower and boot_upper are the type-7
  // percentiles at ExpandedLowerLevel(level, nu, k) and 1 minus it. nu is NaN
  // where there is no t expansion (percentile interval, external heading,
  // a heading of one item, nu >= kIntervalDfCap); k is 1 unless the plain
  // bootstrap's variance is corrected. For a heading h and a region r that
  // priced m_rh >= 2 of its items (m = min(m_rh, n_h), not external):
  // nu = m - 1; the region's parity and the spread of its replicates rest on
  // its own m items, so the standard error has about m - 1 degrees of
  // freedom (n_h - 1 when it priced all). One item: nu = 1 (as for two, the
  // widest expansion: its standard error rests on no spread of its own); a
  // parity a rule filled (m_rh = 0): nu = n_h - 1. k = sqrt((nu + 1) / nu)
  // under the plain bootstrap.
  // For an aggregate or group and region r, with w_h r's expenditure share
  // of heading h within the node, v_h the bootstrap variance of h's ln
  // parity for r (boot_log_se^2 of h's leaf), nu_h as above and
  // c_h = (nu_h + 1) / nu_h under the plain bootstrap (else 1):
  //   nu = (sum_h w_h^2 c_h v_h)^2 / sum_h (w_h^2 c_h v_h)^2 / nu_h
  // (Satterthwaite 1946; SatterthwaiteDf), headings drawn from a normal
  // (external with log_se) counting with infinite df, headings with v_h = 0
  // adding nothing; k = sqrt(sum_h w_h^2 c_h v_h / sum_h w_h^2 v_h).
  Eigen::MatrixXd boot_interval_df;
  Eigen::MatrixXd boot_interval_scale;
  // Every replicate's ln parity (normalised like the full sample; NaN where
  // the region had none), index (node x num_regions + region) x B +
  // replicate; empty unless SensitivityOptions::write_replicates.
  std::vector<double> boot_log_parity;
  int boot_num_replicates_kept = 0;  // B when boot_log_parity is filled
  // Intervals of parity ratios of pairs of regions (pair_ratios.h) for the
  // root and each top-level aggregate (PairRatioNodes), from the same
  // replicates; empty unless the bootstrap ran.
  std::vector<NodePairRatios> pair_ratios;

  // Leave one out. Jackknife standard error of ln parity, stratified by
  // heading: var = sum over the node's headings h of (n_h - 1) / n_h x
  // sum over items i of h of (theta_(i) - mean_h theta)^2, with theta_(i)
  // the ln parity without item i and n_h the items of h whose removal left
  // the region a parity (Quenouille 1956, Tukey 1958; stratified form as in
  // Wolter 2007, ch. 4). For a heading it is the plain delete-one jackknife.
  Eigen::MatrixXd jackknife_log_se;
  // Largest |ln(parity without / parity with)| over the items of the node,
  // signed (ln(without / with)), and the item (survey item index, -1 when
  // none). Dropping an item that leaves the region no parity is counted in
  // loo_num_items_lost instead.
  Eigen::MatrixXd loo_item_log_change;
  Eigen::MatrixXi loo_item;
  Eigen::MatrixXi loo_num_items_lost;
  // The same over the node's headings (aggregates with two or more
  // headings only; NaN and -1 elsewhere): heading index whose removal moved
  // the region most.
  Eigen::MatrixXd loo_heading_log_change;
  Eigen::MatrixXi loo_heading;

  // Coverage curve, one entry per coverage level in the order given.
  std::vector<CoverageLevel> coverage;

  // Method spread: one run per combination of elementary {cpd, jevons-geks,
  // robust-cpd} x aggregation {geks-fisher, geks-tornqvist}, and
  // |ln(max parity / min parity)| over the combinations that gave the region
  // a parity, in log points.
  std::vector<MethodRun> methods;
  Eigen::MatrixXd method_log_spread;
};

enum class SensitivityOutcome {
  kNotRun,
  kOk,
  kInvalidOptions,     // options invalid (exit 1)
  kComputationFailed,  // the full-sample computation failed (exit 2)
  kCancelled,          // SensitivityOptions::cancel became true (exit 2)
};

struct SensitivitySummary {
  SensitivityOutcome outcome = SensitivityOutcome::kNotRun;
  std::string message = "not run";
  // The full-sample computation (its warnings apply to every part).
  ComputeSummary full_sample;
  // Replicates run, and those in which some heading's resampled items left
  // its regions unlinked (only the largest linked group kept a parity there)
  // or some region priced nothing in a heading.
  int num_replicates = 0;
  int num_replicates_unlinked = 0;
  int num_replicates_region_lost = 0;
  // Replicates in which a region lost a heading's parity and its
  // missing_parities rule filled it (more imputed parities than the full
  // sample has).
  int num_replicates_imputed = 0;
  // Items and headings dropped in turn by leave-one-out.
  int num_items_dropped = 0;
  int num_headings_dropped = 0;
  // Subsamples computed for the coverage curve; method runs that failed.
  int num_coverage_runs = 0;
  int num_method_runs = 0;
  int num_method_runs_failed = 0;
  double full_sample_seconds = 0.0;
  double bootstrap_seconds = 0.0;
  double leave_one_out_seconds = 0.0;
  double coverage_seconds = 0.0;
  double methods_seconds = 0.0;

  // One line, e.g. "500 bootstrap replicates, 200 items and 29 headings
  // left out, 80 coverage runs, 6 method runs in 12.3 s".
  std::string BriefReport() const;
};

// Runs the parts asked for. `compute` gives the methods and reference of the
// full-sample run (its standard errors are not recomputed in replicates).
// Never aborts on data; returns false with the summary's message set when
// options are invalid or the full-sample computation fails.
bool RunSensitivity(const Survey& survey, const ComputeOptions& compute,
                    const SensitivityOptions& options, SensitivityResult* result,
                    SensitivitySummary* summary);

// Recomputes the chain with weight `item_multiplicity[i]` (a whole number
// >= 0, one per survey item; 0 drops the item) on every cell of item i, as
// if the item had been priced that many times over. Fills
// `node_log_parity` (nodes x regions, normalised like ComputeParities, NaN
// where a region has no parity). A heading whose weighted items leave its
// regions unlinked keeps only the largest linked group (ties: the group with
// the smallest region index); `num_unlinked_headings` counts them when
// non-null. Returns false with `error` when the options are invalid.
bool ReplicateParities(const Survey& survey, const ComputeOptions& compute,
                       const std::vector<double>& item_multiplicity,
                       Eigen::MatrixXd* node_log_parity, int* num_unlinked_headings,
                       std::string* error);

// Returns the p-quantile (0 <= p <= 1) of `values` (sorted ascending, not
// empty) by linear interpolation between order statistics, Hyndman and Fan
// (1996) type 7: h = (n - 1) p, x[floor h] + (h - floor h)(x[floor h + 1] -
// x[floor h]). The default of numpy.percentile and R's quantile (common
// practice).
double PercentileType7(const std::vector<double>& sorted_values, double p);

// sensitivity/bootstrap.csv: node,region,parity,median,lower,upper,log_se,
// rank_low,rank_high,num_replicates,interval_df,interval_scale (the last two
// as SensitivityResult::boot_interval_df and boot_interval_scale; interval_df
// empty where there is no t expansion).
std::string BootstrapCsv(const Survey& survey, const SensitivityResult& result);
// sensitivity/replicates.bin: every bootstrap replicate's ln parities,
// little-endian. A 24-byte header: the 8 bytes "PRTSREP1", then four
// uint32: num_nodes, num_regions, num_replicates, and 0 (reserved); then
// num_nodes x num_regions x num_replicates IEEE-754 binary64 values, ln
// parity of (node n, region r, replicate b) at index
// (n x num_regions + r) x num_replicates + b, NaN where the region had no
// parity. Nodes in classification order, regions in survey order, as
// ReplicatesKeyCsv lists them. Empty when no replicates were kept.
std::string ReplicatesBinary(const SensitivityResult& result);
// sensitivity/replicates_key.csv: kind,index,code with one row per node
// (kind "node") and per region (kind "region"), giving the codes of the
// indices of replicates.bin.
std::string ReplicatesKeyCsv(const Survey& survey);
// The terminal's lines on the pair intervals: per node, how many pairs
// were computed and how many are told apart, and, when only neighbours in
// rank were computed, that --all-pairs writes every pair.
std::string PairRatiosNote(const Survey& survey, const SensitivityResult& result);
// sensitivity/leave_one_out.csv: node,region,parity,jackknife_log_se,
// item_log_change,item,num_items_lost,heading_log_change,heading.
std::string LeaveOneOutCsv(const Survey& survey, const SensitivityResult& result);
// sensitivity/coverage_curve.csv: node,coverage,repetitions,region,log_sd,
// median_abs_log_change,max_abs_log_change,num_missing.
std::string CoverageCurveCsv(const Survey& survey, const SensitivityResult& result);
// sensitivity/method_spread.csv: node,region, one parity column per method
// run (named as MethodRun::name), spread.
std::string MethodSpreadCsv(const Survey& survey, const SensitivityResult& result);
// The terminal table: the root node per region, dearest first, with the
// parts that were run.
std::string SensitivityTable(const Survey& survey, const SensitivityResult& result,
                             const SensitivityOptions& options);
// The `sensitivity` section of run.json (JSON text): settings, counts,
// seconds per part, per coverage level the median over regions of the
// root's log_sd, and per node of pair_ratios.csv the pairs computed and told
// apart (node codes from `survey` when given, else node indices).
std::string SensitivityRecordSection(const SensitivityOptions& options,
                                     const SensitivitySummary& summary,
                                     const SensitivityResult& result,
                                     const Survey* survey = nullptr);

// The folder a sensitivity run writes: `<output>/sensitivity`, a run folder
// of its own (run_folder.h) holding its tables, its report (parities with
// intervals) and its run.json; the compute run beside it is never touched.
std::string SensitivityFolder(const RunConfig& config);

// The `paritas sensitivity` job: load, run, write SensitivityFolder(config)
// whole or not at all.
struct SensitivityJobSummary {
  int exit_code = 1;
  std::string message = "not run";
  LoadSummary load;
  Survey survey;
  SensitivitySummary sensitivity;
  SensitivityResult result;
  // Identifies the run in its run.json (NewRunId()).
  std::string run_id;
  std::vector<std::string> outputs;  // relative to SensitivityFolder(config)
  // Every warning: compute's on the full sample (plausibility checks and
  // gross outliers included), then the parts' (kind "sensitivity").
  std::vector<RunWarning> warnings;
  // Every output file with its text, run.json last, whether written or not
  // (JobOutputOptions::write_files); empty when the run failed.
  std::vector<OutputFile> files;

  // What the command prints: counts, the root table, notes.
  std::string FullReport(const SensitivityOptions& options) const;
};

// The root node's intervals, coverage curve and method runs as the report
// draws them.
ReportSensitivity ToReportSensitivity(const SensitivityResult& result, const SensitivityOptions& options);

// Returns the exit code (0 ok, 1 invalid input or options, 2 computation
// failed or cancelled). With output.write_files false nothing is written:
// the files are in summary->files only.
int RunSensitivityJob(const RunConfig& config, const SensitivityOptions& options,
                      SensitivityJobSummary* summary, const JobOutputOptions& output = {});

}  // namespace paritas

#endif  // PARITAS_UNCERTAINTY_SENSITIVITY_H_
