// Method spread: the whole computation once per combination of elementary
// and aggregation method, in registry order, each run parallel inside as
// ComputeParities is; a failed combination is recorded, not fatal.
#include <algorithm>
#include <cmath>
#include <string>
#include <vector>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/elementary/elementary_method.h"
#include "uncertainty/sensitivity_parts.h"

namespace paritas::internal {
namespace {

// Fills `run` with the parities of one combination; returns false (the
// message in `run`) when the computation failed.
bool RunCombination(const FullSample& full, const ElementaryMethod& elementary,
                    const AggregationMethod& aggregation, MethodRun* run) {
  const std::string e(elementary.Name()), a(aggregation.Name());
  run->elementary = e;
  run->aggregation = a;
  run->name = e + "/" + a;
  run->parity = Eigen::MatrixXd::Constant(full.chain.num_nodes, full.chain.num_regions, kNaN);
  ComputeOptions method_options = full.compute;
  method_options.elementary.method = e;
  method_options.elementary.compute_standard_errors = false;
  method_options.elementary.robust_errors = RobustErrors::kOff;
  method_options.aggregation = a;
  method_options.num_threads = full.num_threads;
  ParityResult parities;
  ComputeSummary method_summary;
  if (!ComputeParities(*full.survey, method_options, &parities, &method_summary)) {
    run->message = method_summary.message;
    return false;
  }
  for (int n = 0; n < full.chain.num_nodes; ++n) {
    run->parity.row(n) = parities.nodes[n].parity.transpose();
  }
  return true;
}

// |ln(max / min)| over the runs that gave (n, r) a parity; NaN below two.
Eigen::MatrixXd LogSpread(const std::vector<MethodRun>& runs, int num_nodes, int num_regions) {
  Eigen::MatrixXd spread = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
  for (int n = 0; n < num_nodes; ++n) {
    for (int r = 0; r < num_regions; ++r) {
      double lo = kNaN, hi = kNaN;
      int found = 0;
      for (const MethodRun& run : runs) {
        const double p = run.parity(n, r);
        if (!std::isfinite(p)) continue;
        lo = found == 0 ? p : std::min(lo, p);
        hi = found == 0 ? p : std::max(hi, p);
        ++found;
      }
      if (found >= 2) spread(n, r) = std::log(hi / lo);
    }
  }
  return spread;
}

}  // namespace

void RunMethodSpread(const FullSample& full, const SensitivityOptions& options,
                     SensitivityResult* result, SensitivitySummary* summary) {
  const auto start = std::chrono::steady_clock::now();
  Progress progress{&options, "methods",
                    static_cast<int>(ElementaryMethods().size() * AggregationMethods().size())};
  for (const ElementaryMethod* elementary : ElementaryMethods()) {
    for (const AggregationMethod* aggregation : AggregationMethods()) {
      MethodRun run;
      if (!RunCombination(full, *elementary, *aggregation, &run)) {
        ++summary->num_method_runs_failed;
      }
      result->methods.push_back(std::move(run));
      progress.Step();
    }
  }
  progress.Finish();
  summary->num_method_runs = static_cast<int>(result->methods.size());
  result->method_log_spread =
      LogSpread(result->methods, full.chain.num_nodes, full.chain.num_regions);
  summary->methods_seconds = SecondsSince(start);
}

}  // namespace paritas::internal
