// The parts of a sensitivity run, one file each (bootstrap.cc,
// leave_one_out.cc, coverage_curve.cc, method_spread.cc). Each starts from the
// full sample and fills only its own matrices of the result and its own counts
// and seconds of the summary.
#ifndef PARITAS_INTERNAL_UNCERTAINTY_SENSITIVITY_PARTS_H_
#define PARITAS_INTERNAL_UNCERTAINTY_SENSITIVITY_PARTS_H_

#include <omp.h>

#include <atomic>
#include <chrono>
#include <cstdint>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "base/eigen_threads.h"
#include "paritas/compute/compute.h"
#include "paritas/uncertainty/sensitivity.h"
#include "uncertainty/replicate_chain.h"

namespace paritas::internal {

inline double SecondsSince(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

inline int ThreadsFor(int requested) { return requested > 0 ? requested : omp_get_max_threads(); }

// Called first in every replicate worker: the chain then runs on this thread
// alone (base/eigen_threads.h says why; five times faster in the bootstrap
// benchmark with --threads 1, and byte-identical for any thread count).
inline void KeepChainOnThisThread() { KeepEigenOnThisThread(); }

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

// True once the caller asked to stop (SensitivityOptions::cancel).
inline bool Cancelled(const SensitivityOptions& options) {
  return options.cancel != nullptr && options.cancel->load(std::memory_order_relaxed);
}

// The full-sample run every part starts from and is compared with.
struct FullSample {
  const Survey* survey = nullptr;
  // The options of the full-sample ComputeParities run (threads as asked for).
  ComputeOptions compute;
  Chain chain;
  Eigen::MatrixXd node_expenditure;  // nodes x regions
  // The chain's own full-sample run: changes are measured against it so an
  // unchanged region shows exactly 0 rather than rounding noise.
  Eigen::MatrixXd heading_log_parity;  // regions x headings
  // The same before the external file and the missing_parities rules
  // (CompleteHeadings) were applied: what the quotes alone give.
  Eigen::MatrixXd priced_log_parity;  // regions x headings
  // Heading parities the missing_parities rules filled in the full sample,
  // and per heading whether it has a region to fill (filled or left
  // missing) and the highest node whose aggregate its rule consulted
  // (ImputationResult::highest_proxy_node).
  int num_imputed = 0;
  std::vector<uint8_t> heading_to_fill;
  std::vector<int> highest_proxy_node;
  Eigen::MatrixXd node_log_parity;     // nodes x regions
  int num_threads = 1;                 // worker threads over replicates
};

// Bootstrap over items, stratified by heading.
void RunBootstrap(const FullSample& full, const SensitivityOptions& options,
                  SensitivityResult* result, SensitivitySummary* summary);

// Leave one out: each item, then each heading.
void RunLeaveOneOut(const FullSample& full, const SensitivityOptions& options,
                    SensitivityResult* result, SensitivitySummary* summary);

// Coverage curve: keep a random share of every heading's items.
void RunCoverageCurve(const FullSample& full, const SensitivityOptions& options,
                      SensitivityResult* result, SensitivitySummary* summary);

// Method spread: every elementary x aggregation combination.
void RunMethodSpread(const FullSample& full, const SensitivityOptions& options,
                     SensitivityResult* result, SensitivitySummary* summary);

// Degrees of freedom and scale of the expanded interval of every node and
// region (SensitivityResult::boot_interval_df and boot_interval_scale say
// how), from the bootstrap standard errors `log_se` (nodes x regions), the
// survey's expenditure (regions x headings), the headings' items and the
// items each region priced (regions x headings).
void ExpansionOfCells(const Classification& classification, const Eigen::MatrixXd& expenditure,
                      const std::vector<int>& heading_num_items,
                      const Eigen::MatrixXi& region_num_items,
                      const std::vector<uint8_t>& heading_external, BootstrapKind bootstrap,
                      const Eigen::MatrixXd& log_se, Eigen::MatrixXd* df, Eigen::MatrixXd* scale);

// Pair intervals (pair_ratios.cc) from replicate ln parities laid out as
// SensitivityResult::boot_log_parity, for PairRatioNodes: every pair when
// `all_pairs` or the node has at most kAllPairsMaxRegions regions with a
// parity, else neighbours in rank. `parity` is the full sample's. Each pair
// is expanded with nu = min(nu_a, nu_b) and k = max(k_a, k_b) of the two
// regions' cells in `interval_df` and `interval_scale` (PairExpansion).
void ComputePairRatios(const std::vector<double>& log_parity, int num_regions, int num_b,
                       const Eigen::MatrixXd& parity, const Classification& classification,
                       double level, const Eigen::MatrixXd& interval_df,
                       const Eigen::MatrixXd& interval_scale, bool all_pairs, int num_threads,
                       std::vector<NodePairRatios>* out);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_UNCERTAINTY_SENSITIVITY_PARTS_H_
