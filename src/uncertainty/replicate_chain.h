// The chain recomputed for one set of item weights, shared by every part of
// the sensitivity run: what it reads is built once (Chain) and then only read,
// so replicates can run side by side on different threads.
#ifndef PARITAS_INTERNAL_UNCERTAINTY_REPLICATE_CHAIN_H_
#define PARITAS_INTERNAL_UNCERTAINTY_REPLICATE_CHAIN_H_

#include <cmath>
#include <cstdint>
#include <limits>
#include <vector>

#include <Eigen/Core>

#include "paritas/compute/compute.h"
#include "base/not_a_number.h"
#include "paritas/survey/survey.h"

namespace paritas::internal {

// Tags separating the random streams of the parts (high bits of the stream
// number), so the coverage draws never repeat the bootstrap's.
inline constexpr uint64_t kBootstrapStream = 1ull << 56;
inline constexpr uint64_t kCoverageStream = 2ull << 56;
// Draws of external heading parities with a standard error, per replicate.
inline constexpr uint64_t kExternalStream = 3ull << 56;

// splitmix64 (Steele, Lea and Flood 2014; Vigna's reference code): a small
// generator with good statistical quality, enough for resampling indices.
inline uint64_t SplitMix64(uint64_t* state) {
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
  // Uniform in (0, 1): the top 53 bits, offset by half a step so 0 never
  // comes out.
  double Uniform() { return ((SplitMix64(&state_) >> 11) + 0.5) * 0x1.0p-53; }
  // Standard normal by Box and Muller (1958, Annals of Mathematical
  // Statistics 29(2)), one of the pair used.
  double Normal() {
    const double u = Uniform(), v = Uniform();
    return std::sqrt(-2.0 * std::log(u)) * std::cos(6.283185307179586 * v);
  }

 private:
  uint64_t state_ = 0;
};

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
  // The missing_parities rule of each heading, resolved as compute does
  // (empty when a listed heading is unknown: compute refuses such a run).
  std::vector<HeadingRule> rules;
};

// Returns the chain of `survey` under `options`, without standard errors
// (replicates never report them).
Chain MakeChain(const Survey& survey, const ComputeOptions& options);

// Returns the ln parity of every region in heading `h` with item weights
// `item_weight` (survey item index -> multiplicity), as the elementary method
// gives it (the node stage normalises). Sets *unlinked when only the largest
// linked group could be kept.
Eigen::VectorXd HeadingLogParity(const Chain& chain, int h, const std::vector<double>& item_weight,
                                 bool* unlinked);

// Returns the expenditure of every node per region (nodes x regions, NaN
// where no row); used only by the weighted-mean reference.
Eigen::MatrixXd NodeExpenditures(const Survey& survey);

// Runs the node stage from heading ln parities (regions x headings, NaN
// where none) into rows of `node_log_parity`. Only nodes with
// `recompute[n]` set are touched (all when `recompute` is empty). Returns
// the number of aggregates that were unlinked (largest group kept).
int ComputeNodes(const Chain& chain, const Eigen::MatrixXd& node_expenditure,
                 const Eigen::MatrixXd& heading_log_parity, const std::vector<uint8_t>& recompute,
                 Eigen::MatrixXd* node_log_parity);

// The whole chain for one set of item weights.
struct ReplicateOutcome {
  int num_unlinked = 0;  // headings and aggregates where only the largest group was kept
  // Region x heading parities filled by a missing_parities rule.
  int num_imputed = 0;
};

// True when heading h takes its parities from the external file in place of
// its quotes (the file gives it and its rule is not `external`).
bool HeadingFromFile(const Chain& chain, int h);

// Completes a replicate's heading ln parities as the compute stage does:
// headings the external file gives take its parities (each region's ln
// parity drawn from Normal(ln p, log_se) when `draw` is given and the file
// has a log_se), then the missing ones are filled by each heading's rule
// (compute/imputation.h), the file's parities of headings with rule
// `external` drawn likewise before they fill. Returns the number of entries
// imputed. `rules`, when given, replaces chain.rules (a heading under
// `leave` is left as it is); `details`, when given, receives the rest of
// the ImputationResult (its log_parity is moved into heading_log_parity).
int CompleteHeadings(const Chain& chain, Stream* draw, Eigen::MatrixXd* heading_log_parity,
                     const std::vector<HeadingRule>* rules = nullptr,
                     ImputationResult* details = nullptr);

// Runs every heading and every node with `item_weight`; fills heading ln
// parities (regions x headings) and normalised node ln parities (nodes x
// regions).
// `draw`, when given, draws the external parities (CompleteHeadings).
// `priced_log_parity`, when given, receives the heading ln parities as the
// quotes alone give them, before CompleteHeadings, and `imputation` what
// CompleteHeadings filled (leave-one-out completes them again after each
// dropped item).
ReplicateOutcome RunChain(const Chain& chain, const Eigen::MatrixXd& node_expenditure,
                          const std::vector<double>& item_weight,
                          Eigen::MatrixXd* heading_log_parity, Eigen::MatrixXd* node_log_parity,
                          Stream* draw = nullptr, Eigen::MatrixXd* priced_log_parity = nullptr,
                          ImputationResult* imputation = nullptr);

// Ranks (1 = dearest) within each node of a replicate; 0 where no parity.
void RankRows(const Eigen::MatrixXd& node_log_parity, Eigen::MatrixXi* rank);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_UNCERTAINTY_REPLICATE_CHAIN_H_
