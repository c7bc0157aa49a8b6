// Coverage curve: every run keeps a random share of each heading's items,
// drawn from its own random stream (seed, run), and the spread of the runs
// of one level shows how much fewer items would move the parities.
#include <algorithm>
#include <cmath>
#include <numeric>
#include <vector>

#include "uncertainty/sensitivity_parts.h"

namespace paritas::internal {
namespace {

// Weight 1 on a uniform sample of round(share x items) of each heading's
// items (at least one), 0 elsewhere.
void DrawKeptItems(const Chain& chain, double share, Stream* stream, std::vector<int>* pool,
                   std::vector<double>* weight) {
  std::fill(weight->begin(), weight->end(), 0.0);
  for (int h = 0; h < chain.num_headings; ++h) {
    *pool = chain.heading_items[h];
    const int n = static_cast<int>(pool->size());
    if (n == 0) continue;
    const int keep = std::clamp(static_cast<int>(std::lround(share * n)), 1, n);
    // Partial Fisher-Yates: the first `keep` entries are a uniform sample.
    for (int k = 0; k < keep; ++k) {
      std::swap((*pool)[k], (*pool)[k + stream->Below(n - k)]);
      (*weight)[(*pool)[k]] = 1.0;
    }
  }
}

// Node ln parities of every run, run = level x repetitions + repetition.
std::vector<Eigen::MatrixXd> RunSubsamples(const FullSample& full,
                                           const SensitivityOptions& options) {
  const int num_rep = options.coverage_repetitions;
  const int num_runs = static_cast<int>(options.coverage_levels.size()) * num_rep;
  std::vector<Eigen::MatrixXd> runs(num_runs);
  Progress progress{&options, "coverage", num_runs};
#pragma omp parallel num_threads(full.num_threads)
  {
    KeepChainOnThisThread();
    std::vector<double> weight(full.survey->num_items());
    std::vector<int> pool;
    Eigen::MatrixXd heading_lp;
#pragma omp for schedule(dynamic, 1)
    for (int run = 0; run < num_runs; ++run) {
      const double share = options.coverage_levels[run / num_rep];
      Stream stream(options.seed, kCoverageStream | static_cast<uint64_t>(run));
      DrawKeptItems(full.chain, share, &stream, &pool, &weight);
      RunChain(full.chain, full.node_expenditure, weight, &heading_lp, &runs[run]);
      progress.Step();
    }
  }
  progress.Finish();
  return runs;
}

// The spread over the repetitions of one level (runs first_run, first_run + 1, ...).
CoverageLevel SummariseLevel(const FullSample& full, const std::vector<Eigen::MatrixXd>& runs,
                             int first_run, double coverage, int num_rep) {
  const int num_nodes = full.chain.num_nodes, num_regions = full.chain.num_regions;
  const Eigen::MatrixXd& base = full.node_log_parity;
  CoverageLevel out;
  out.coverage = coverage;
  out.num_repetitions = num_rep;
  out.log_sd = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
  out.median_abs_log_change = out.log_sd;
  out.max_abs_log_change = out.log_sd;
  out.num_missing = Eigen::MatrixXi::Zero(num_nodes, num_regions);
  std::vector<double> values, changes;
  for (int n = 0; n < num_nodes; ++n) {
    for (int r = 0; r < num_regions; ++r) {
      if (!std::isfinite(base(n, r))) continue;
      values.clear();
      changes.clear();
      for (int rep = 0; rep < num_rep; ++rep) {
        const double v = runs[first_run + rep](n, r);
        if (!std::isfinite(v)) {
          ++out.num_missing(n, r);
          continue;
        }
        values.push_back(v);
        changes.push_back(std::abs(v - base(n, r)));
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
  return out;
}

}  // namespace

void RunCoverageCurve(const FullSample& full, const SensitivityOptions& options,
                      SensitivityResult* result, SensitivitySummary* summary) {
  const auto start = std::chrono::steady_clock::now();
  const int num_levels = static_cast<int>(options.coverage_levels.size());
  const int num_rep = options.coverage_repetitions;
  const std::vector<Eigen::MatrixXd> runs = RunSubsamples(full, options);
  for (int level = 0; level < num_levels; ++level) {
    result->coverage.push_back(
        SummariseLevel(full, runs, level * num_rep, options.coverage_levels[level], num_rep));
  }
  summary->num_coverage_runs = num_levels * num_rep;
  summary->coverage_seconds = SecondsSince(start);
}

}  // namespace paritas::internal
