// Every sensitivity run is the chain recomputed with one weight per item:
// the bootstrap draws multiplicities, leave-one-out sets one weight to 0,
// the coverage curve keeps a random share at 1. Weights are applied to the
// survey's cell arrays as loaded (CPD cell weights, or weighted all-pairs
// Jevons sums), so a replicate costs one pass over the cells plus the
// aggregates. Replicate b draws from its own random stream, derived from
// (seed, b), and writes only its own slots, so results do not depend on the
// number of threads or on scheduling.
#include "paritas/uncertainty/sensitivity.h"

#include <omp.h>

#include <algorithm>
#include <atomic>
#include <cassert>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <limits>
#include <numeric>

#include <nlohmann/json.hpp>

#include "paritas/aggregation/aggregation.h"
#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/base/csv.h"
#include "paritas/elementary/elementary.h"
#include "paritas/aggregation/geks.h"
#include "paritas/uncertainty/outliers.h"
#include "paritas/output/output_writers.h"
#include "paritas/output/report.h"
#include "paritas/output/run_folder.h"
#include "paritas/output/run_record.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

// Tags separating the random streams of the parts (high bits of the stream
// number), so the coverage draws never repeat the bootstrap's.
constexpr uint64_t kBootstrapStream = 1ull << 56;
constexpr uint64_t kCoverageStream = 2ull << 56;

double SecondsSince(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

// splitmix64 (Steele, Lea and Flood 2014; Vigna's reference code): a small
// generator with good statistical quality, enough for resampling indices.
uint64_t SplitMix64(uint64_t* state) {
  uint64_t z = (*state += 0x9E3779B97F4A7C15ull);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  return z ^ (z >> 31);
}

// One stream per (seed, stream number): the two are mixed through
// splitmix64 so neighbouring seeds and streams give unrelated sequences.
class Stream {
 public:
  Stream(uint64_t seed, uint64_t stream) {
    uint64_t s = seed;
    uint64_t t = SplitMix64(&s) ^ stream;
    state_ = SplitMix64(&t);
  }
  // Uniform integer in [0, n): Lemire's multiply-shift (2019) on the top 32
  // bits, whose bias (below n / 2^32, 1e-8 for 50 items) is far under
  // anything a replicate could show.
  int Below(int n) {
    const uint64_t bits = SplitMix64(&state_) >> 32;
    return static_cast<int>((bits * static_cast<uint64_t>(n)) >> 32);
  }

 private:
  uint64_t state_ = 0;
};

bool IsWhole(double value) { return std::isfinite(value) && value == std::floor(value); }

// What the chain needs, computed once and shared read-only by replicates.
struct Chain {
  const Survey* survey = nullptr;
  ComputeOptions options;
  int num_nodes = 0;
  int num_regions = 0;
  int num_headings = 0;
  // Items with at least one cell, per heading (survey item indices).
  std::vector<std::vector<int>> heading_items;
  // Aggregate nodes and the nodes (leaf included) that contain each heading.
  std::vector<std::vector<int>> heading_nodes;
  int reference_region = -1;
};

Chain MakeChain(const Survey& survey, const ComputeOptions& options) {
  Chain chain;
  chain.survey = &survey;
  chain.options = options;
  chain.options.elementary.compute_standard_errors = false;
  chain.options.elementary.compute_robust_standard_errors = false;
  chain.num_nodes = static_cast<int>(survey.classification.nodes().size());
  chain.num_regions = survey.num_regions();
  chain.num_headings = survey.num_headings();
  chain.heading_items.resize(chain.num_headings);
  chain.heading_nodes.resize(chain.num_headings);
  for (int h = 0; h < chain.num_headings; ++h) {
    const HeadingRange& range = survey.heading_range[h];
    std::vector<uint8_t> seen(range.num_items(), 0);
    for (int64_t k = range.cell_begin; k < range.cell_end; ++k) seen[survey.cells.item[k] - range.item_begin] = 1;
    for (int i = 0; i < range.num_items(); ++i) {
      if (seen[i]) chain.heading_items[h].push_back(range.item_begin + i);
    }
  }
  const auto& nodes = survey.classification.nodes();
  for (int n = 0; n < chain.num_nodes; ++n) {
    for (int h : nodes[n].headings) chain.heading_nodes[h].push_back(n);
  }
  if (options.reference.kind == ReferenceKind::kRegion) {
    chain.reference_region = survey.regions.Find(options.reference.region);
  }
  return chain;
}

// Keeps, among `groups` (largest first), only the first group's regions.
void KeepLargestGroup(const std::vector<std::vector<int>>& groups, Eigen::VectorXd* log_parity) {
  std::vector<uint8_t> keep(log_parity->size(), 0);
  for (int r : groups.front()) keep[r] = 1;
  for (int r = 0; r < log_parity->size(); ++r) {
    if (!keep[r]) (*log_parity)(r) = kNaN;
  }
}

// ln parity of every region in heading `h` with item weights
// `item_weight` (survey item index -> multiplicity), as the elementary method
// gives it (the node stage normalises). Sets *unlinked when only the largest
// linked group could be kept.
Eigen::VectorXd HeadingLogParity(const Chain& chain, int h, const std::vector<double>& item_weight,
                                 bool* unlinked) {
  HeadingInput input;
  input.survey = chain.survey;
  input.heading = h;
  input.options = &chain.options.elementary;
  input.item_weight = item_weight;
  input.keep_largest_group = true;
  input.normalise = false;
  const HeadingParities heading = ComputeHeadingParities(input);
  *unlinked = heading.kept_largest_group;
  return heading.log_parity;
}

// Normalises a node as the compute stage does.
void NormaliseNode(const Chain& chain, const Eigen::VectorXd& expenditure, Eigen::VectorXd* log_parity) {
  std::vector<double> weights;
  ReferenceWeights(chain.options.reference, chain.reference_region, *log_parity, expenditure, &weights);
  NormaliseLogParities(weights, log_parity);
  for (int r = 0; r < log_parity->size(); ++r) {
    if (!std::isfinite((*log_parity)(r))) (*log_parity)(r) = kNaN;
  }
}

// Expenditure of every node per region (NaN where no row); used only by the
// weighted-mean reference.
Eigen::MatrixXd NodeExpenditures(const Survey& survey) {
  const int num_nodes = static_cast<int>(survey.classification.nodes().size());
  Eigen::MatrixXd total(num_nodes, survey.num_regions());
  for (int n = 0; n < num_nodes; ++n) total.row(n) = NodeExpenditure(survey, n).transpose();
  return total;
}

// Runs the node stage from heading ln parities (regions x headings, NaN
// where none) into rows of `node_log_parity`. Only nodes with
// `recompute[n]` set are touched (all when `recompute` is empty). Returns
// the number of aggregates that were unlinked (largest group kept).
int ComputeNodes(const Chain& chain, const Eigen::MatrixXd& node_expenditure,
                 const Eigen::MatrixXd& heading_log_parity, const std::vector<uint8_t>& recompute,
                 Eigen::MatrixXd* node_log_parity) {
  const Survey& survey = *chain.survey;
  const auto& nodes = survey.classification.nodes();
  int num_unlinked = 0;
  for (int n = 0; n < chain.num_nodes; ++n) {
    if (!recompute.empty() && !recompute[n]) continue;
    const ClassificationNode& node = nodes[n];
    Eigen::VectorXd log_parity;
    if (node.is_leaf) {
      log_parity = heading_log_parity.col(node.headings.front());
    } else {
      NodeArrays arrays;
      const int k_headings = static_cast<int>(node.headings.size());
      arrays.price.resize(chain.num_regions, k_headings);
      arrays.expenditure.resize(chain.num_regions, k_headings);
      for (int k = 0; k < k_headings; ++k) {
        const int h = node.headings[k];
        arrays.price.col(k) = heading_log_parity.col(h).array().exp();
        arrays.expenditure.col(k) = survey.expenditure.col(h);
      }
      // Only the chosen index, with the same entries the compute stage gives.
      const AggregationMethod& method = *FindAggregationMethod(chain.options.aggregation);
      const AggregateParities aggregate =
          AggregateFromBilaterals(arrays, NodeBilaterals(arrays, method.BilateralsNeeded()), method);
      log_parity = aggregate.log_parity;
      if (!aggregate.identified && !aggregate.groups.empty()) {
        KeepLargestGroup(aggregate.groups, &log_parity);
        ++num_unlinked;
      }
    }
    NormaliseNode(chain, node_expenditure.row(n).transpose(), &log_parity);
    node_log_parity->row(n) = log_parity.transpose();
  }
  return num_unlinked;
}

// The whole chain for one set of item weights.
struct ReplicateOutcome {
  int num_unlinked = 0;  // headings and aggregates where only the largest group was kept
};

ReplicateOutcome RunChain(const Chain& chain, const Eigen::MatrixXd& node_expenditure,
                          const std::vector<double>& item_weight,
                          Eigen::MatrixXd* heading_log_parity, Eigen::MatrixXd* node_log_parity) {
  ReplicateOutcome outcome;
  heading_log_parity->resize(chain.num_regions, chain.num_headings);
  node_log_parity->resize(chain.num_nodes, chain.num_regions);
  for (int h = 0; h < chain.num_headings; ++h) {
    bool unlinked = false;
    heading_log_parity->col(h) = HeadingLogParity(chain, h, item_weight, &unlinked);
    outcome.num_unlinked += unlinked ? 1 : 0;
  }
  outcome.num_unlinked += ComputeNodes(chain, node_expenditure, *heading_log_parity, {}, node_log_parity);
  return outcome;
}

// Ranks (1 = dearest) within each node of a replicate; 0 where no parity.
void RankRows(const Eigen::MatrixXd& node_log_parity, Eigen::MatrixXi* rank) {
  rank->setZero(node_log_parity.rows(), node_log_parity.cols());
  std::vector<int> order;
  for (Eigen::Index n = 0; n < node_log_parity.rows(); ++n) {
    order.clear();
    for (Eigen::Index r = 0; r < node_log_parity.cols(); ++r) {
      if (std::isfinite(node_log_parity(n, r))) order.push_back(static_cast<int>(r));
    }
    std::stable_sort(order.begin(), order.end(),
                     [&](int a, int b) { return node_log_parity(n, a) > node_log_parity(n, b); });
    for (size_t k = 0; k < order.size(); ++k) (*rank)(n, order[k]) = static_cast<int>(k) + 1;
  }
}

int ThreadsFor(int requested) { return requested > 0 ? requested : omp_get_max_threads(); }

// Reports progress from thread 0 only, so the callback never runs twice at once.
struct Progress {
  const SensitivityOptions* options;
  std::string part;
  int64_t total;
  std::atomic<int64_t> done{0};
  void Step() {
    const int64_t now = ++done;
    if (options->progress && omp_get_thread_num() == 0) options->progress(part, now, total);
  }
  void Finish() {
    if (options->progress) options->progress(part, total, total);
  }
};

std::string Plural(int64_t n, const std::string& word) {
  return std::to_string(n) + " " + word + (n == 1 ? "" : "s");
}

}  // namespace

double PercentileType7(const std::vector<double>& sorted_values, double p) {
  assert(!sorted_values.empty());
  const double h = (static_cast<double>(sorted_values.size()) - 1.0) * p;
  const size_t lo = static_cast<size_t>(std::floor(h));
  if (lo + 1 >= sorted_values.size()) return sorted_values.back();
  return sorted_values[lo] + (h - static_cast<double>(lo)) * (sorted_values[lo + 1] - sorted_values[lo]);
}

bool SensitivityOptions::IsValid(std::string* error) const {
  if (replicates < 2 || replicates > 100000) {
    *error = "replicates must be a whole number from 2 to 100000, found " + std::to_string(replicates);
    return false;
  }
  if (!(level > 0.0 && level < 1.0)) {
    *error = "level must be a share between 0 and 1 (exclusive), e.g. 0.95, found " + FormatFixed(level, 6);
    return false;
  }
  if (coverage_levels.empty() && run_coverage) {
    *error = "coverage needs at least one level, e.g. 90,75,50,25";
    return false;
  }
  for (size_t k = 0; k < coverage_levels.size(); ++k) {
    const double c = coverage_levels[k];
    if (!(c > 0.0 && c <= 1.0)) {
      *error = "coverage levels must be shares of items in (0, 1], i.e. percentages above 0 and up to 100, found " +
               FormatFixed(100.0 * c, 4) + " %";
      return false;
    }
    for (size_t j = 0; j < k; ++j) {
      if (coverage_levels[j] == c) {
        *error = "coverage level " + FormatFixed(100.0 * c, 4) + " % is given twice";
        return false;
      }
    }
  }
  if (coverage_repetitions < 2 || coverage_repetitions > 10000) {
    *error = "repetitions must be a whole number from 2 to 10000, found " + std::to_string(coverage_repetitions);
    return false;
  }
  if (!run_bootstrap && !run_leave_one_out && !run_coverage && !run_methods) {
    *error = "no part to run; parts must name at least one of: " + JoinNames(SensitivityPartNames());
    return false;
  }
  if (num_threads < 0) {
    *error = "threads must be 0 (all cores) or more, found " + std::to_string(num_threads);
    return false;
  }
  return true;
}

std::vector<std::string> SensitivityPartNames() {
  return {"bootstrap", "leave-one-out", "coverage", "methods"};
}

bool SetSensitivityParts(const std::vector<std::string>& parts, SensitivityOptions* options,
                         std::string* error) {
  SensitivityOptions chosen = *options;
  chosen.run_bootstrap = chosen.run_leave_one_out = chosen.run_coverage = chosen.run_methods = false;
  for (const std::string& part : parts) {
    const std::string name = ToLower(Trim(part));
    if (name == "bootstrap") {
      chosen.run_bootstrap = true;
    } else if (name == "leave-one-out") {
      chosen.run_leave_one_out = true;
    } else if (name == "coverage") {
      chosen.run_coverage = true;
    } else if (name == "methods") {
      chosen.run_methods = true;
    } else {
      *error = "part '" + part + "' is not one of: " + JoinNames(SensitivityPartNames());
      const std::string nearest = NearestName(name, SensitivityPartNames());
      if (!nearest.empty()) *error += "; did you mean '" + nearest + "'?";
      return false;
    }
  }
  if (parts.empty()) {
    *error = "parts must name at least one of: " + JoinNames(SensitivityPartNames());
    return false;
  }
  options->run_bootstrap = chosen.run_bootstrap;
  options->run_leave_one_out = chosen.run_leave_one_out;
  options->run_coverage = chosen.run_coverage;
  options->run_methods = chosen.run_methods;
  return true;
}

std::string SensitivitySummary::BriefReport() const {
  std::vector<std::string> parts;
  if (num_replicates > 0) parts.push_back(Plural(num_replicates, "bootstrap replicate"));
  if (num_items_dropped > 0 || num_headings_dropped > 0) {
    parts.push_back(Plural(num_items_dropped, "item") + " and " + Plural(num_headings_dropped, "heading") +
                    " left out in turn");
  }
  if (num_coverage_runs > 0) parts.push_back(Plural(num_coverage_runs, "coverage run"));
  if (num_method_runs > 0) {
    parts.push_back(Plural(num_method_runs, "method run") +
                    (num_method_runs_failed > 0 ? " (" + std::to_string(num_method_runs_failed) + " failed)" : ""));
  }
  const double seconds =
      full_sample_seconds + bootstrap_seconds + leave_one_out_seconds + coverage_seconds + methods_seconds;
  return (parts.empty() ? std::string("nothing run") : JoinNames(parts)) + " in " + FormatFixed(seconds, 1) + " s";
}

bool ReplicateParities(const Survey& survey, const ComputeOptions& compute,
                       const std::vector<double>& item_multiplicity,
                       Eigen::MatrixXd* node_log_parity, int* num_unlinked_headings,
                       std::string* error) {
  if (!compute.IsValid(error)) return false;
  if (static_cast<int>(item_multiplicity.size()) != survey.num_items()) {
    *error = "item_multiplicity has " + std::to_string(item_multiplicity.size()) + " entries; the survey has " +
             std::to_string(survey.num_items()) + " items";
    return false;
  }
  for (size_t i = 0; i < item_multiplicity.size(); ++i) {
    if (!IsWhole(item_multiplicity[i]) || item_multiplicity[i] < 0) {
      *error = "item_multiplicity[" + std::to_string(i) + "] is " + FormatFixed(item_multiplicity[i], 6) +
               "; multiplicities must be whole numbers >= 0";
      return false;
    }
  }
  const Chain chain = MakeChain(survey, compute);
  const Eigen::MatrixXd node_expenditure = NodeExpenditures(survey);
  Eigen::MatrixXd heading_log_parity;
  const ReplicateOutcome outcome =
      RunChain(chain, node_expenditure, item_multiplicity, &heading_log_parity, node_log_parity);
  if (num_unlinked_headings != nullptr) *num_unlinked_headings = outcome.num_unlinked;
  return true;
}

bool RunSensitivity(const Survey& survey, const ComputeOptions& compute,
                    const SensitivityOptions& options, SensitivityResult* result,
                    SensitivitySummary* summary) {
  *summary = SensitivitySummary();
  *result = SensitivityResult();
  std::string error;
  if (!options.IsValid(&error)) {
    summary->outcome = SensitivityOutcome::kInvalidOptions;
    summary->message = error;
    return false;
  }

  // Full sample: the values every part is compared with.
  auto start = std::chrono::steady_clock::now();
  ComputeOptions full_options = compute;
  if (options.num_threads > 0) full_options.num_threads = options.num_threads;
  ParityResult full;
  if (!ComputeParities(survey, full_options, &full, &summary->full_sample)) {
    summary->outcome = summary->full_sample.outcome == ComputeOutcome::kInvalidOptions
                           ? SensitivityOutcome::kInvalidOptions
                           : SensitivityOutcome::kComputationFailed;
    summary->message = summary->full_sample.message;
    return false;
  }
  const int num_nodes = static_cast<int>(full.nodes.size());
  const int num_regions = survey.num_regions();
  const int num_items = survey.num_items();
  result->parity.resize(num_nodes, num_regions);
  result->rank.resize(num_nodes, num_regions);
  for (int n = 0; n < num_nodes; ++n) {
    result->parity.row(n) = full.nodes[n].parity.transpose();
    result->rank.row(n) = full.nodes[n].rank.transpose();
  }
  const Chain chain = MakeChain(survey, compute);
  const Eigen::MatrixXd node_expenditure = NodeExpenditures(survey);
  // The chain's own full-sample run: changes are measured against it so an
  // unchanged region shows exactly 0 rather than rounding noise.
  const std::vector<double> ones(num_items, 1.0);
  Eigen::MatrixXd base_heading, base_node;
  {
    RunChain(chain, node_expenditure, ones, &base_heading, &base_node);
  }
  summary->full_sample_seconds = SecondsSince(start);
  const int threads = ThreadsFor(options.num_threads);

  // Bootstrap over items, stratified by heading.
  if (options.run_bootstrap) {
    start = std::chrono::steady_clock::now();
    const int num_b = options.replicates;
    // [node][region][replicate], so each statistic reads a contiguous run.
    std::vector<double> boot_log(static_cast<size_t>(num_nodes) * num_regions * num_b, kNaN);
    std::vector<int32_t> boot_rank(boot_log.size(), 0);
    std::vector<uint8_t> unlinked(num_b, 0), lost(num_b, 0);
    Progress progress{&options, "bootstrap", num_b};
#pragma omp parallel num_threads(threads)
    {
      std::vector<double> weight(num_items);
      Eigen::MatrixXd heading_lp, node_lp;
      Eigen::MatrixXi rank;
#pragma omp for schedule(dynamic, 1)
      for (int b = 0; b < num_b; ++b) {
        Stream stream(options.seed, kBootstrapStream | static_cast<uint64_t>(b));
        std::fill(weight.begin(), weight.end(), 0.0);
        for (int h = 0; h < chain.num_headings; ++h) {
          const std::vector<int>& items = chain.heading_items[h];
          const int n = static_cast<int>(items.size());
          for (int k = 0; k < n; ++k) weight[items[stream.Below(n)]] += 1.0;
        }
        const ReplicateOutcome outcome = RunChain(chain, node_expenditure, weight, &heading_lp, &node_lp);
        RankRows(node_lp, &rank);
        unlinked[b] = outcome.num_unlinked > 0;
        for (int n = 0; n < num_nodes; ++n) {
          for (int r = 0; r < num_regions; ++r) {
            const size_t slot = (static_cast<size_t>(n) * num_regions + r) * num_b + b;
            boot_log[slot] = node_lp(n, r);
            boot_rank[slot] = rank(n, r);
            if (std::isfinite(base_node(n, r)) && !std::isfinite(node_lp(n, r))) lost[b] = 1;
          }
        }
        progress.Step();
      }
    }
    progress.Finish();
    summary->num_replicates = num_b;
    for (int b = 0; b < num_b; ++b) {
      summary->num_replicates_unlinked += unlinked[b];
      summary->num_replicates_region_lost += lost[b];
    }
    result->boot_median = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
    result->boot_lower = result->boot_median;
    result->boot_upper = result->boot_median;
    result->boot_log_se = result->boot_median;
    result->boot_rank_low = Eigen::MatrixXi::Zero(num_nodes, num_regions);
    result->boot_rank_high = result->boot_rank_low;
    result->boot_num_replicates = result->boot_rank_low;
    const double alpha = 1.0 - options.level;
#pragma omp parallel for schedule(dynamic, 16) num_threads(threads)
    for (int64_t cell = 0; cell < static_cast<int64_t>(num_nodes) * num_regions; ++cell) {
      const int n = static_cast<int>(cell / num_regions), r = static_cast<int>(cell % num_regions);
      std::vector<double> values, ranks;
      for (int b = 0; b < num_b; ++b) {
        const size_t slot = static_cast<size_t>(cell) * num_b + b;
        if (!std::isfinite(boot_log[slot])) continue;
        values.push_back(boot_log[slot]);
        ranks.push_back(boot_rank[slot]);
      }
      result->boot_num_replicates(n, r) = static_cast<int>(values.size());
      if (values.size() < 2) continue;
      const double mean = std::accumulate(values.begin(), values.end(), 0.0) / values.size();
      double ss = 0.0;
      for (double v : values) ss += (v - mean) * (v - mean);
      result->boot_log_se(n, r) = std::sqrt(ss / (values.size() - 1.0));
      std::sort(values.begin(), values.end());
      std::sort(ranks.begin(), ranks.end());
      result->boot_median(n, r) = 100.0 * std::exp(PercentileType7(values, 0.5));
      result->boot_lower(n, r) = 100.0 * std::exp(PercentileType7(values, alpha / 2));
      result->boot_upper(n, r) = 100.0 * std::exp(PercentileType7(values, 1.0 - alpha / 2));
      // Whole ranks, rounded outwards so the interval never narrows; the
      // small tolerance keeps an exact rank from rounding past itself.
      result->boot_rank_low(n, r) = static_cast<int>(std::floor(PercentileType7(ranks, alpha / 2) + 1e-9));
      result->boot_rank_high(n, r) = static_cast<int>(std::ceil(PercentileType7(ranks, 1.0 - alpha / 2) - 1e-9));
    }
    summary->bootstrap_seconds = SecondsSince(start);
  }

  // Leave one out: each item, then each heading.
  if (options.run_leave_one_out) {
    start = std::chrono::steady_clock::now();
    std::vector<int> all_items;
    for (int h = 0; h < chain.num_headings; ++h) {
      all_items.insert(all_items.end(), chain.heading_items[h].begin(), chain.heading_items[h].end());
    }
    std::vector<int> drop_headings;
    for (int h = 0; h < chain.num_headings; ++h) {
      bool useful = false;
      for (int n : chain.heading_nodes[h]) {
        useful = useful || survey.classification.nodes()[n].headings.size() >= 2;
      }
      if (useful && base_heading.col(h).array().isFinite().any()) drop_headings.push_back(h);
    }
    const int num_drop_items = static_cast<int>(all_items.size());
    const int num_drop_headings = static_cast<int>(drop_headings.size());
    // Changes ln(without / with) of each dropped unit for the nodes it
    // touches: unit u, k-th node of its heading, region r.
    std::vector<std::vector<double>> item_change(num_drop_items), heading_change(num_drop_headings);
    Progress progress{&options, "leave-one-out", num_drop_items + num_drop_headings};
#pragma omp parallel num_threads(threads)
    {
      std::vector<double> weight(num_items, 1.0);
      Eigen::MatrixXd heading_lp = base_heading;
      Eigen::MatrixXd node_lp = base_node;
      std::vector<uint8_t> recompute(num_nodes, 0);
#pragma omp for schedule(dynamic, 4)
      for (int u = 0; u < num_drop_items; ++u) {
        const int i = all_items[u];
        const int h = survey.item_heading[i];
        weight[i] = 0.0;
        bool unlinked = false;
        heading_lp.col(h) = HeadingLogParity(chain, h, weight, &unlinked);
        weight[i] = 1.0;
        for (int n : chain.heading_nodes[h]) recompute[n] = 1;
        ComputeNodes(chain, node_expenditure, heading_lp, recompute, &node_lp);
        std::vector<double>& change = item_change[u];
        change.reserve(chain.heading_nodes[h].size() * num_regions);
        for (int n : chain.heading_nodes[h]) {
          recompute[n] = 0;
          for (int r = 0; r < num_regions; ++r) change.push_back(node_lp(n, r) - base_node(n, r));
          node_lp.row(n) = base_node.row(n);
        }
        heading_lp.col(h) = base_heading.col(h);
        progress.Step();
      }
#pragma omp for schedule(dynamic, 1)
      for (int u = 0; u < num_drop_headings; ++u) {
        const int h = drop_headings[u];
        heading_lp.col(h).setConstant(kNaN);
        for (int n : chain.heading_nodes[h]) recompute[n] = !survey.classification.nodes()[n].is_leaf;
        ComputeNodes(chain, node_expenditure, heading_lp, recompute, &node_lp);
        std::vector<double>& change = heading_change[u];
        for (int n : chain.heading_nodes[h]) {
          recompute[n] = 0;
          for (int r = 0; r < num_regions; ++r) change.push_back(node_lp(n, r) - base_node(n, r));
          node_lp.row(n) = base_node.row(n);
        }
        heading_lp.col(h) = base_heading.col(h);
        progress.Step();
      }
    }
    progress.Finish();
    // Reduction in item order, so ties go to the first item and the sums do
    // not depend on the schedule.
    result->jackknife_log_se = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
    result->loo_item_log_change = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
    result->loo_item = Eigen::MatrixXi::Constant(num_nodes, num_regions, -1);
    result->loo_num_items_lost = Eigen::MatrixXi::Zero(num_nodes, num_regions);
    result->loo_heading_log_change = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
    result->loo_heading = Eigen::MatrixXi::Constant(num_nodes, num_regions, -1);
    Eigen::MatrixXd variance = Eigen::MatrixXd::Zero(num_nodes, num_regions);
    Eigen::MatrixXi strata = Eigen::MatrixXi::Zero(num_nodes, num_regions);
    int u = 0;
    for (int h = 0; h < chain.num_headings; ++h) {
      const int num_h = static_cast<int>(chain.heading_items[h].size());
      const std::vector<int>& touched = chain.heading_nodes[h];
      Eigen::MatrixXd sum = Eigen::MatrixXd::Zero(touched.size(), num_regions);
      Eigen::MatrixXd sum_sq = sum;
      Eigen::MatrixXi count = Eigen::MatrixXi::Zero(touched.size(), num_regions);
      for (int j = 0; j < num_h; ++j, ++u) {
        const int i = all_items[u];
        const std::vector<double>& change = item_change[u];
        for (size_t k = 0; k < touched.size(); ++k) {
          const int n = touched[k];
          for (int r = 0; r < num_regions; ++r) {
            if (!std::isfinite(base_node(n, r))) continue;
            const double d = change[k * num_regions + r];
            if (!std::isfinite(d)) {
              ++result->loo_num_items_lost(n, r);
              continue;
            }
            sum(k, r) += d;
            sum_sq(k, r) += d * d;
            ++count(k, r);
            double& best = result->loo_item_log_change(n, r);
            if (std::isnan(best) || std::abs(d) > std::abs(best)) {
              best = d;
              result->loo_item(n, r) = i;
            }
          }
        }
      }
      for (size_t k = 0; k < touched.size(); ++k) {
        for (int r = 0; r < num_regions; ++r) {
          const int m = count(k, r);
          if (m < 2) continue;
          // (m - 1) / m x sum (d - mean d)^2; d = theta - theta_full, so the
          // shift cancels and the sums stay small.
          const double centred = std::max(0.0, sum_sq(k, r) - sum(k, r) * sum(k, r) / m);
          variance(touched[k], r) += (m - 1.0) / m * centred;
          ++strata(touched[k], r);
        }
      }
    }
    for (int n = 0; n < num_nodes; ++n) {
      for (int r = 0; r < num_regions; ++r) {
        if (strata(n, r) > 0) result->jackknife_log_se(n, r) = std::sqrt(variance(n, r));
      }
    }
    for (int v = 0; v < num_drop_headings; ++v) {
      const int h = drop_headings[v];
      const std::vector<double>& change = heading_change[v];
      for (size_t k = 0; k < chain.heading_nodes[h].size(); ++k) {
        const int n = chain.heading_nodes[h][k];
        if (survey.classification.nodes()[n].headings.size() < 2) continue;
        for (int r = 0; r < num_regions; ++r) {
          const double d = change[k * num_regions + r];
          if (!std::isfinite(d)) continue;
          double& best = result->loo_heading_log_change(n, r);
          if (std::isnan(best) || std::abs(d) > std::abs(best)) {
            best = d;
            result->loo_heading(n, r) = h;
          }
        }
      }
    }
    summary->num_items_dropped = num_drop_items;
    summary->num_headings_dropped = num_drop_headings;
    summary->leave_one_out_seconds = SecondsSince(start);
  }

  // Coverage curve: keep a random share of every heading's items.
  if (options.run_coverage) {
    start = std::chrono::steady_clock::now();
    const int num_levels = static_cast<int>(options.coverage_levels.size());
    const int num_rep = options.coverage_repetitions;
    const int num_runs = num_levels * num_rep;
    std::vector<Eigen::MatrixXd> runs(num_runs);
    Progress progress{&options, "coverage", num_runs};
#pragma omp parallel num_threads(threads)
    {
      std::vector<double> weight(num_items);
      std::vector<int> pool;
      Eigen::MatrixXd heading_lp;
#pragma omp for schedule(dynamic, 1)
      for (int run = 0; run < num_runs; ++run) {
        const double share = options.coverage_levels[run / num_rep];
        Stream stream(options.seed, kCoverageStream | static_cast<uint64_t>(run));
        std::fill(weight.begin(), weight.end(), 0.0);
        for (int h = 0; h < chain.num_headings; ++h) {
          pool = chain.heading_items[h];
          const int n = static_cast<int>(pool.size());
          if (n == 0) continue;
          const int keep = std::clamp(static_cast<int>(std::lround(share * n)), 1, n);
          // Partial Fisher-Yates: the first `keep` entries are a uniform sample.
          for (int k = 0; k < keep; ++k) {
            std::swap(pool[k], pool[k + stream.Below(n - k)]);
            weight[pool[k]] = 1.0;
          }
        }
        RunChain(chain, node_expenditure, weight, &heading_lp, &runs[run]);
        progress.Step();
      }
    }
    progress.Finish();
    for (int level = 0; level < num_levels; ++level) {
      CoverageLevel out;
      out.coverage = options.coverage_levels[level];
      out.num_repetitions = num_rep;
      out.log_sd = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
      out.median_abs_log_change = out.log_sd;
      out.max_abs_log_change = out.log_sd;
      out.num_missing = Eigen::MatrixXi::Zero(num_nodes, num_regions);
      std::vector<double> values, changes;
      for (int n = 0; n < num_nodes; ++n) {
        for (int r = 0; r < num_regions; ++r) {
          if (!std::isfinite(base_node(n, r))) continue;
          values.clear();
          changes.clear();
          for (int rep = 0; rep < num_rep; ++rep) {
            const double v = runs[level * num_rep + rep](n, r);
            if (!std::isfinite(v)) {
              ++out.num_missing(n, r);
              continue;
            }
            values.push_back(v);
            changes.push_back(std::abs(v - base_node(n, r)));
          }
          if (values.empty()) continue;
          std::sort(changes.begin(), changes.end());
          out.median_abs_log_change(n, r) = PercentileType7(changes, 0.5);
          out.max_abs_log_change(n, r) = changes.back();
          if (values.size() < 2) continue;
          const double mean = std::accumulate(values.begin(), values.end(), 0.0) / values.size();
          double ss = 0.0;
          for (double v : values) ss += (v - mean) * (v - mean);
          out.log_sd(n, r) = std::sqrt(ss / (values.size() - 1.0));
        }
      }
      result->coverage.push_back(std::move(out));
    }
    summary->num_coverage_runs = num_runs;
    summary->coverage_seconds = SecondsSince(start);
  }

  // Method spread: every elementary x aggregation combination.
  if (options.run_methods) {
    start = std::chrono::steady_clock::now();
    Progress progress{&options, "methods",
                      static_cast<int>(ElementaryMethods().size() * AggregationMethods().size())};
    for (const ElementaryMethod* elementary : ElementaryMethods()) {
      for (const AggregationMethod* aggregation : AggregationMethods()) {
        const std::string e(elementary->Name()), a(aggregation->Name());
        MethodRun run;
        run.elementary = e;
        run.aggregation = a;
        run.name = e + "/" + a;
        run.parity = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
        ComputeOptions method_options = full_options;
        method_options.elementary.method = e;
        method_options.elementary.compute_standard_errors = false;
        method_options.elementary.compute_robust_standard_errors = false;
        method_options.aggregation = a;
        method_options.num_threads = threads;
        ParityResult parities;
        ComputeSummary method_summary;
        if (ComputeParities(survey, method_options, &parities, &method_summary)) {
          for (int n = 0; n < num_nodes; ++n) run.parity.row(n) = parities.nodes[n].parity.transpose();
        } else {
          run.message = method_summary.message;
          ++summary->num_method_runs_failed;
        }
        result->methods.push_back(std::move(run));
        progress.Step();
      }
    }
    progress.Finish();
    summary->num_method_runs = static_cast<int>(result->methods.size());
    result->method_log_spread = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
    for (int n = 0; n < num_nodes; ++n) {
      for (int r = 0; r < num_regions; ++r) {
        double lo = kNaN, hi = kNaN;
        int found = 0;
        for (const MethodRun& run : result->methods) {
          const double p = run.parity(n, r);
          if (!std::isfinite(p)) continue;
          lo = found == 0 ? p : std::min(lo, p);
          hi = found == 0 ? p : std::max(hi, p);
          ++found;
        }
        if (found >= 2) result->method_log_spread(n, r) = std::log(hi / lo);
      }
    }
    summary->methods_seconds = SecondsSince(start);
  }

  summary->outcome = SensitivityOutcome::kOk;
  summary->message = summary->BriefReport();
  return true;
}

// ---------------------------------------------------------------------------
// Writers

namespace {

void AppendNodeRegion(const Survey& survey, int n, int r, std::string* out) {
  AppendCsvField(survey.classification.nodes()[n].code, out);
  *out += ',';
  AppendCsvField(survey.regions.Code(r), out);
}

void AppendValue(double value, int decimals, std::string* out) {
  *out += ',';
  AppendFixed(value, decimals, out);
}

void AppendCount(int64_t value, std::string* out) {
  *out += ',';
  *out += std::to_string(value);
}

}  // namespace

std::string BootstrapCsv(const Survey& survey, const SensitivityResult& result) {
  std::string out = "node,region,parity,median,lower,upper,log_se,rank_low,rank_high,num_replicates\n";
  if (result.boot_median.size() == 0) return out;
  for (Eigen::Index n = 0; n < result.parity.rows(); ++n) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      AppendNodeRegion(survey, static_cast<int>(n), r, &out);
      AppendValue(result.parity(n, r), kIndexDecimals, &out);
      AppendValue(result.boot_median(n, r), kIndexDecimals, &out);
      AppendValue(result.boot_lower(n, r), kIndexDecimals, &out);
      AppendValue(result.boot_upper(n, r), kIndexDecimals, &out);
      AppendValue(result.boot_log_se(n, r), kLogDecimals, &out);
      out += ',';
      if (result.boot_rank_low(n, r) > 0) out += std::to_string(result.boot_rank_low(n, r));
      out += ',';
      if (result.boot_rank_high(n, r) > 0) out += std::to_string(result.boot_rank_high(n, r));
      AppendCount(result.boot_num_replicates(n, r), &out);
      out += '\n';
    }
  }
  return out;
}

std::string LeaveOneOutCsv(const Survey& survey, const SensitivityResult& result) {
  std::string out =
      "node,region,parity,jackknife_log_se,item_log_change,item,num_items_lost,heading_log_change,heading\n";
  if (result.jackknife_log_se.size() == 0) return out;
  for (Eigen::Index n = 0; n < result.parity.rows(); ++n) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      AppendNodeRegion(survey, static_cast<int>(n), r, &out);
      AppendValue(result.parity(n, r), kIndexDecimals, &out);
      AppendValue(result.jackknife_log_se(n, r), kLogDecimals, &out);
      AppendValue(result.loo_item_log_change(n, r), kLogDecimals, &out);
      out += ',';
      if (result.loo_item(n, r) >= 0) AppendCsvField(survey.items.Code(result.loo_item(n, r)), &out);
      AppendCount(result.loo_num_items_lost(n, r), &out);
      AppendValue(result.loo_heading_log_change(n, r), kLogDecimals, &out);
      out += ',';
      if (result.loo_heading(n, r) >= 0) AppendCsvField(survey.heading_codes[result.loo_heading(n, r)], &out);
      out += '\n';
    }
  }
  return out;
}

std::string CoverageCurveCsv(const Survey& survey, const SensitivityResult& result) {
  std::string out =
      "node,coverage,repetitions,region,log_sd,median_abs_log_change,max_abs_log_change,num_missing\n";
  for (Eigen::Index n = 0; n < result.parity.rows(); ++n) {
    for (const CoverageLevel& level : result.coverage) {
      for (int r = 0; r < survey.num_regions(); ++r) {
        AppendCsvField(survey.classification.nodes()[n].code, &out);
        AppendValue(100.0 * level.coverage, 2, &out);
        AppendCount(level.num_repetitions, &out);
        out += ',';
        AppendCsvField(survey.regions.Code(r), &out);
        AppendValue(level.log_sd(n, r), kLogDecimals, &out);
        AppendValue(level.median_abs_log_change(n, r), kLogDecimals, &out);
        AppendValue(level.max_abs_log_change(n, r), kLogDecimals, &out);
        AppendCount(level.num_missing(n, r), &out);
        out += '\n';
      }
    }
  }
  return out;
}

std::string MethodSpreadCsv(const Survey& survey, const SensitivityResult& result) {
  std::string out = "node,region";
  for (const MethodRun& run : result.methods) {
    out += ',';
    AppendCsvField(run.name, &out);
  }
  out += ",spread\n";
  if (result.methods.empty()) return out;
  for (Eigen::Index n = 0; n < result.parity.rows(); ++n) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      AppendNodeRegion(survey, static_cast<int>(n), r, &out);
      for (const MethodRun& run : result.methods) AppendValue(run.parity(n, r), kIndexDecimals, &out);
      AppendValue(result.method_log_spread(n, r), kLogDecimals, &out);
      out += '\n';
    }
  }
  return out;
}

std::string SensitivityTable(const Survey& survey, const SensitivityResult& result,
                             const SensitivityOptions& options) {
  if (result.parity.rows() == 0) return "";
  auto pad = [](const std::string& text, size_t width, bool right) {
    if (text.size() >= width) return text;
    return right ? std::string(width - text.size(), ' ') + text : text + std::string(width - text.size(), ' ');
  };
  const bool boot = result.boot_median.size() > 0;
  const bool loo = result.jackknife_log_se.size() > 0;
  const bool methods = result.method_log_spread.size() > 0;
  size_t width = 6;
  for (int r = 0; r < survey.num_regions(); ++r) width = std::max(width, survey.regions.Code(r).size());
  std::string out = "  " + pad("region", width, false) + pad("parity", 10, true);
  const std::string level = FormatFixed(100.0 * options.level, 0) + " % interval";
  if (boot) out += pad(level, 20, true) + pad("ranks", 9, true) + pad("boot se", 9, true);
  if (loo) out += pad("jk se", 9, true) + pad("largest change", 16, true) + "  " + pad("cause", 18, false);
  if (methods) out += pad("method spread", 15, true);
  out += "\n";
  std::vector<int> order;
  for (int r = 0; r < survey.num_regions(); ++r) {
    if (std::isfinite(result.parity(0, r))) order.push_back(r);
  }
  std::stable_sort(order.begin(), order.end(), [&](int a, int b) { return result.parity(0, a) > result.parity(0, b); });
  for (int r : order) {
    out += "  " + pad(std::string(survey.regions.Code(r)), width, false) + pad(FormatFixed(result.parity(0, r), 2), 10, true);
    if (boot) {
      const std::string interval = std::isfinite(result.boot_lower(0, r))
                                       ? FormatFixed(result.boot_lower(0, r), 2) + " - " + FormatFixed(result.boot_upper(0, r), 2)
                                       : "-";
      const std::string ranks = result.boot_rank_low(0, r) > 0
                                    ? std::to_string(result.boot_rank_low(0, r)) + "-" + std::to_string(result.boot_rank_high(0, r))
                                    : "-";
      out += pad(interval, 20, true) + pad(ranks, 9, true) + pad(FormatFixed(result.boot_log_se(0, r), 4), 9, true);
    }
    if (loo) {
      const double item = result.loo_item_log_change(0, r), heading = result.loo_heading_log_change(0, r);
      std::string change = "-", cause;
      const bool use_heading = std::isfinite(heading) && !(std::abs(item) >= std::abs(heading));
      if (use_heading) {
        change = FormatFixed(100.0 * heading, 2) + " %";
        cause = "heading " + survey.heading_codes[result.loo_heading(0, r)];
      } else if (std::isfinite(item)) {
        change = FormatFixed(100.0 * item, 2) + " %";
        cause = "item " + std::string(survey.items.Code(result.loo_item(0, r)));
      }
      out += pad(FormatFixed(result.jackknife_log_se(0, r), 4), 9, true) + pad(change, 16, true) + "  " +
             pad(cause, 18, false);
    }
    if (methods) out += pad(FormatFixed(100.0 * result.method_log_spread(0, r), 2) + " %", 15, true);
    out += "\n";
  }
  return out;
}

std::string SensitivityRecordSection(const SensitivityOptions& options, const SensitivitySummary& summary,
                                     const SensitivityResult& result) {
  nlohmann::ordered_json j;
  nlohmann::ordered_json settings;
  std::vector<std::string> parts;
  if (options.run_bootstrap) parts.push_back("bootstrap");
  if (options.run_leave_one_out) parts.push_back("leave-one-out");
  if (options.run_coverage) parts.push_back("coverage");
  if (options.run_methods) parts.push_back("methods");
  settings["parts"] = parts;
  settings["replicates"] = options.replicates;
  settings["seed"] = options.seed;
  settings["level"] = options.level;
  settings["coverage_levels"] = options.coverage_levels;
  settings["coverage_repetitions"] = options.coverage_repetitions;
  settings["threads"] = options.num_threads;
  j["settings"] = settings;
  nlohmann::ordered_json counts;
  counts["num_replicates"] = summary.num_replicates;
  counts["num_replicates_unlinked"] = summary.num_replicates_unlinked;
  counts["num_replicates_region_lost"] = summary.num_replicates_region_lost;
  counts["num_items_dropped"] = summary.num_items_dropped;
  counts["num_headings_dropped"] = summary.num_headings_dropped;
  counts["num_coverage_runs"] = summary.num_coverage_runs;
  counts["num_method_runs"] = summary.num_method_runs;
  counts["num_method_runs_failed"] = summary.num_method_runs_failed;
  j["counts"] = counts;
  nlohmann::ordered_json seconds;
  seconds["full_sample"] = summary.full_sample_seconds;
  seconds["bootstrap"] = summary.bootstrap_seconds;
  seconds["leave_one_out"] = summary.leave_one_out_seconds;
  seconds["coverage"] = summary.coverage_seconds;
  seconds["methods"] = summary.methods_seconds;
  j["seconds"] = seconds;
  // The curve in one line per level: median over regions of the root's spread.
  nlohmann::ordered_json curve = nlohmann::ordered_json::array();
  for (const CoverageLevel& level : result.coverage) {
    std::vector<double> sd;
    for (Eigen::Index r = 0; r < level.log_sd.cols(); ++r) {
      if (std::isfinite(level.log_sd(0, r))) sd.push_back(level.log_sd(0, r));
    }
    std::sort(sd.begin(), sd.end());
    nlohmann::ordered_json row;
    row["coverage"] = level.coverage;
    row["root_median_log_sd"] = sd.empty() ? nlohmann::ordered_json(nullptr) : nlohmann::ordered_json(PercentileType7(sd, 0.5));
    curve.push_back(row);
  }
  j["coverage_curve"] = curve;
  nlohmann::ordered_json failed = nlohmann::ordered_json::array();
  for (const MethodRun& run : result.methods) {
    if (!run.message.empty()) failed.push_back({{"method", run.name}, {"message", run.message}});
  }
  j["failed_method_runs"] = failed;
  return j.dump(2);
}

// ---------------------------------------------------------------------------
// The job

std::string SensitivityJobSummary::FullReport(const SensitivityOptions& options) const {
  std::string out = "survey: " + std::to_string(survey.num_regions()) + " regions, " +
                    std::to_string(survey.num_items()) + " items, " + std::to_string(survey.num_headings()) +
                    " basic headings\n";
  out += sensitivity.BriefReport() + "\n";
  if (result.parity.rows() == 0) return out;
  const std::string& root = survey.classification.nodes().front().code;
  out += "\nsensitivity of '" + root + "', dearest first:\n";
  out += SensitivityTable(survey, result, options);
  std::string notes;
  if (result.boot_median.size() > 0) {
    notes += "(interval: bootstrap percentile interval of the parity over " + std::to_string(sensitivity.num_replicates) +
             " resamples of the items of every heading; ranks: the same interval for the rank, 1 = dearest; "
             "boot se and jk se: bootstrap and jackknife standard errors of ln parity.)\n";
  }
  if (result.jackknife_log_se.size() > 0) {
    notes += "(largest change: the largest move of the parity when one item or one basic heading is left out.)\n";
  }
  if (result.method_log_spread.size() > 0) {
    notes += "(method spread: ln(largest / smallest parity) over the " + std::to_string(result.methods.size()) +
             " combinations of elementary and aggregation method.)\n";
  }
  if (!result.coverage.empty()) {
    notes += "\ncoverage curve for '" + root + "' (median over regions of the sd of ln parity):\n";
    for (const CoverageLevel& level : result.coverage) {
      std::vector<double> sd;
      for (Eigen::Index r = 0; r < level.log_sd.cols(); ++r) {
        if (std::isfinite(level.log_sd(0, r))) sd.push_back(level.log_sd(0, r));
      }
      std::sort(sd.begin(), sd.end());
      notes += "  " + FormatFixed(100.0 * level.coverage, 0) + " % of items: " +
               (sd.empty() ? std::string("-") : FormatFixed(PercentileType7(sd, 0.5), 4)) + "\n";
    }
  }
  out += notes;
  if (!warnings.empty()) {
    out += "\nwarnings:\n";
    for (const std::string& warning : warnings) out += "  " + warning + "\n";
  }
  out += "\nThe bootstrap and leave-one-out runs show how much the parities depend on which items were "
         "priced; they do not measure errors shared by all items (unit or quality mismatches).\n";
  return out;
}

ReportSensitivity ToReportSensitivity(const SensitivityResult& result, const SensitivityOptions& options) {
  ReportSensitivity out;
  if (result.boot_lower.rows() > 0) {
    for (Eigen::Index r = 0; r < result.boot_lower.cols(); ++r) {
      out.parity_lower.push_back(result.boot_lower(0, r));
      out.parity_upper.push_back(result.boot_upper(0, r));
    }
    out.interval_label = FormatFixed(100.0 * options.level, 0) + " % interval over item resamples";
  }
  for (const CoverageLevel& level : result.coverage) {
    std::vector<double> changes;
    for (Eigen::Index r = 0; r < level.median_abs_log_change.cols(); ++r) {
      if (std::isfinite(level.median_abs_log_change(0, r))) changes.push_back(level.median_abs_log_change(0, r));
    }
    if (changes.empty()) continue;
    std::sort(changes.begin(), changes.end());
    ReportSensitivity::CoveragePoint point;
    point.coverage_share = level.coverage;
    point.median_spread_pct = 100.0 * PercentileType7(changes, 0.5);
    out.coverage_curve.push_back(point);
  }
  for (const MethodRun& run : result.methods) {
    if (run.parity.rows() == 0) continue;
    out.method_names.push_back(run.name);
    out.method_parity.emplace_back();
    for (Eigen::Index r = 0; r < run.parity.cols(); ++r) out.method_parity.back().push_back(run.parity(0, r));
  }
  return out;
}

std::string SensitivityFolder(const RunConfig& config) {
  return (std::filesystem::path(config.output) / "sensitivity").string();
}

int RunSensitivityJob(const RunConfig& config, const SensitivityOptions& options, SensitivityJobSummary* summary) {
  *summary = SensitivityJobSummary();
  auto fail = [&](int code, const std::string& message) {
    summary->exit_code = code;
    summary->message = message;
    return code;
  };
  std::string error;
  if (!options.IsValid(&error)) return fail(1, error);
  LoadOptions load_options;
  load_options.invalid_rows = config.invalid_rows;
  load_options.num_threads = config.threads;
  if (!LoadSurvey(config, load_options, &summary->survey, &summary->load)) return fail(1, summary->load.message);
  const Survey& survey = summary->survey;
  ComputeOptions compute = ComputeOptions::FromConfig(config);
  SensitivityOptions run_options = options;
  if (run_options.num_threads == 0) run_options.num_threads = config.threads;
  if (!RunSensitivity(survey, compute, run_options, &summary->result, &summary->sensitivity)) {
    return fail(summary->sensitivity.outcome == SensitivityOutcome::kComputationFailed ? 2 : 1,
                summary->sensitivity.message);
  }
  summary->warnings = summary->sensitivity.full_sample.warnings;
  if (summary->load.num_rows_rejected > 0) {
    summary->warnings.insert(summary->warnings.begin(),
                             std::to_string(summary->load.num_rows_rejected) + " invalid rows left out");
  }
  const SensitivitySummary& s = summary->sensitivity;
  if (s.num_replicates_unlinked > 0) {
    summary->warnings.push_back(std::to_string(s.num_replicates_unlinked) + " of " + std::to_string(s.num_replicates) +
                                " bootstrap replicates left some heading's regions unlinked; only the largest "
                                "linked group had parities there");
  }
  if (s.num_replicates_region_lost > 0) {
    summary->warnings.push_back("in " + std::to_string(s.num_replicates_region_lost) + " of " +
                                std::to_string(s.num_replicates) +
                                " bootstrap replicates some region priced none of the items drawn in some "
                                "heading and had no parity there; column num_replicates of bootstrap.csv "
                                "says how many replicates each interval rests on");
  }
  for (const MethodRun& run : summary->result.methods) {
    if (!run.message.empty()) summary->warnings.push_back("method " + run.name + " failed: " + run.message);
  }

  std::vector<OutputFile> files;
  if (run_options.run_bootstrap) files.push_back({"bootstrap.csv", BootstrapCsv(survey, summary->result)});
  if (run_options.run_leave_one_out) {
    files.push_back({"leave_one_out.csv", LeaveOneOutCsv(survey, summary->result)});
  }
  if (run_options.run_coverage) {
    files.push_back({"coverage_curve.csv", CoverageCurveCsv(survey, summary->result)});
  }
  if (run_options.run_methods) {
    files.push_back({"method_spread.csv", MethodSpreadCsv(survey, summary->result)});
  }
  if (config.report) {
    // The report of compute, redrawn with the intervals, the coverage curve
    // and the method spread.
    ParityResult full;
    ComputeSummary full_summary;
    if (ComputeParities(survey, compute, &full, &full_summary)) {
      OutlierOptions outlier_options;
      outlier_options.threshold = config.outlier_threshold;
      const std::vector<ReportOutlier> outliers =
          ToReportOutliers(survey, FindOutliers(survey, full, outlier_options));
      const ReportSensitivity sensitivity = ToReportSensitivity(summary->result, run_options);
      ReportInputs report;
      report.config = &config;
      report.survey = &survey;
      report.load = &summary->load;
      report.result = &full;
      report.compute = &full_summary;
      report.warnings = summary->warnings;
      report.outliers = &outliers;
      report.sensitivity = &sensitivity;
      files.push_back({"report.html", ReportHtml(report)});
    }
  }
  for (const OutputFile& file : files) summary->outputs.push_back(file.relative_path);
  summary->outputs.push_back("run.json");

  RunRecord record;
  record.command = "sensitivity";
  record.run_id = NewRunId();
  record.config = &config;
  record.load = &summary->load;
  record.survey = &survey;
  record.compute = &summary->sensitivity.full_sample;
  record.outcome = "ok";
  record.message = s.BriefReport();
  record.exit_code = 0;
  record.warnings = summary->warnings;
  record.outputs = summary->outputs;
  record.stages = {{"read", summary->load.read_seconds},
                   {"cells", summary->load.cells_seconds},
                   {"full sample", s.full_sample_seconds},
                   {"bootstrap", s.bootstrap_seconds},
                   {"leave-one-out", s.leave_one_out_seconds},
                   {"coverage", s.coverage_seconds},
                   {"methods", s.methods_seconds}};
  record.sections.push_back({"sensitivity", SensitivityRecordSection(run_options, s, summary->result)});
  record.output_digests = DigestOutputs(files);
  files.push_back({"run.json", RunRecordJson(record)});
  RunFolderSummary written;
  if (!WriteRunFolder(SensitivityFolder(config), files, &written, &error)) return fail(1, error);
  summary->exit_code = 0;
  summary->message = "ok";
  return 0;
}

}  // namespace paritas
