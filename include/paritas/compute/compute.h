// The main job: from a loaded survey to normalised parities for every basic
// heading and every aggregate of the classification, with real expenditure.
#ifndef PARITAS_COMPUTE_COMPUTE_H_
#define PARITAS_COMPUTE_COMPUTE_H_

#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/aggregation/aggregation.h"
#include "paritas/aggregation/normalisation.h"
#include "paritas/compute/imputation.h"
#include "paritas/survey/config.h"
#include "paritas/elementary/elementary.h"
#include "paritas/survey/survey.h"

namespace paritas {

struct ComputeOptions {
  ElementaryOptions elementary;
  // Registry name of the aggregation method (aggregation_method.h).
  std::string aggregation = "geks-fisher";
  Reference reference;
  // Worker threads for the headings, the aggregates and the nodes' finish;
  // 0 = all cores.
  int num_threads = 0;
  // Aggregate nodes whose bilateral matrices are kept in the result (for
  // bilateral tables and spreads); the root's too unless
  // keep_root_bilaterals is false.
  std::vector<int> keep_bilaterals;
  // Keeps the root's full bilateral matrices. When false (and the root is
  // not in keep_bilaterals) the root computes only what its method needs and
  // ParityResult::root_spreads holds the spread summaries instead, computed
  // by row blocks (AllPairsSpreads): no region x region matrix beyond the
  // method's own. Default true.
  bool keep_root_bilaterals = true;
  // With keep_root_bilaterals false: keep every pair's spread (the report's
  // cards and histogram; SpreadOptions::keep_pair_spreads). Default true.
  bool keep_pair_spreads = true;
  // With keep_root_bilaterals false: form each region's median spread (the
  // report's table; SpreadOptions::region_medians). Default true.
  bool spread_medians = true;
  // Rules for regions that spend on a heading without a parity there
  // (compute/imputation.h); default: leave every one missing.
  MissingParitiesSettings missing_parities;

  bool IsValid(std::string* error) const;
  // The options a run configuration asks for.
  static ComputeOptions FromConfig(const RunConfig& config);
};

// Parities of one node (basic heading or aggregate) for every region.
struct NodeResult {
  int node = -1;          // classification node index
  bool is_heading = false;
  int heading = -1;       // heading index when is_heading
  // Parity (price level index), reference = 100; NaN where the region has none.
  Eigen::VectorXd parity;
  // Standard error of ln parity relative to the reference (CPD headings).
  Eigen::VectorXd log_se;
  Eigen::VectorXd log_se_robust;
  // Nominal expenditure on the node's headings (currency units); NaN where
  // the region has no expenditure row for any of them.
  Eigen::VectorXd expenditure;
  // expenditure / (parity / 100): spending in the reference's prices.
  Eigen::VectorXd real_expenditure;
  // Real expenditure per head as an index, whole country = 100 (total real
  // expenditure / total population over the regions with all three values);
  // NaN without populations.
  Eigen::VectorXd real_per_capita_index;
  // 1 = dearest region of the node; 0 where no parity.
  Eigen::VectorXi rank;
  // Headings: items priced and quotes per region. Aggregates: headings used.
  Eigen::VectorXi num_items;
  Eigen::VectorXi num_quotes;
  Eigen::VectorXi num_headings;
  int num_regions_with_parity = 0;
  bool identified = true;
  std::vector<std::vector<int>> groups;
  // How the node was normalised ("mean", "weighted-mean", a region code, or
  // "mean (reference region absent)").
  std::string reference_used;
  // Aggregates: RMS log distance between bilaterals and GEKS parities.
  double rms_log_residual = 0.0;
  // Aggregates under spanning-tree: the tree's edges (AggregateParities::tree).
  std::vector<TreeEdge> tree;
};

struct ParityResult {
  // One per classification node, in node order.
  std::vector<NodeResult> nodes;
  // Elementary detail (residuals, fits) per basic heading.
  std::vector<HeadingParities> headings;
  // Bilateral matrices per node: filled for the root and the nodes in
  // ComputeOptions::keep_bilaterals that are aggregates, empty otherwise.
  std::vector<BilateralMatrices> bilaterals;
  // The root's spread summaries when its matrices were not kept
  // (ComputeOptions::keep_root_bilaterals false); empty otherwise.
  SpreadSummary root_spreads;
  // Where each heading parity came from, regions x headings (ParitySource
  // as int): priced, external (file), imputed (rule) or none.
  Eigen::MatrixXi heading_source;
  // The rule applied to each heading (ComputeOptions::missing_parities).
  std::vector<HeadingRule> heading_rules;
  // Per heading: regions given a parity by its rule, and regions that spend
  // on it (expenditure > 0) yet have no parity after the rule.
  std::vector<std::vector<int>> imputed_regions;
  std::vector<std::vector<int>> missing_regions;
};

enum class ComputeOutcome {
  kNotRun,
  kOk,
  kInvalidOptions,     // options or reference region invalid (exit 1)
  kComputationFailed,  // e.g. unlinked regions in a heading (exit 2)
};

struct ComputeSummary {
  ComputeOutcome outcome = ComputeOutcome::kNotRun;
  std::string message = "not run";
  // Things the user must know: regions without parities, headings dropped.
  std::vector<std::string> warnings;
  int num_headings_given = 0;
  int num_headings_used = 0;  // headings with parities
  int num_aggregates = 0;     // aggregates of the tree
  int num_groups = 0;         // analytic groups (classification.h)
  // Region x heading parities filled by a missing_parities rule, and those
  // still missing where the region spends on the heading.
  int num_parities_imputed = 0;
  int num_parities_missing = 0;
  // Wall seconds: from the start of ComputeParities to the end of the
  // heading checks (elementary parities, external parities, imputation), and
  // from there to its end (aggregates, normalisation): the two cover the
  // call whole.
  double elementary_seconds = 0.0;
  double aggregation_seconds = 0.0;

  std::string BriefReport() const;
};

// Computes every node's parities. Returns true on success; never aborts on
// data.
bool ComputeParities(const Survey& survey, const ComputeOptions& options, ParityResult* result,
                     ComputeSummary* summary);

// The arrays an aggregate node is computed from (heading parities on the
// ratio scale and expenditure, regions x the node's headings).
NodeArrays NodeInputArrays(const Survey& survey, const ParityResult& result, int node);

// Nominal expenditure of each region on the node's headings (sum of its
// expenditure rows; NaN where it has none). NaN for every region under
// national weights, where regional spending is unknown.
Eigen::VectorXd NodeExpenditure(const Survey& survey, int node);

// National weights (Survey::national_weights): replaces `arrays`'
// expenditure, the national amounts e_h in every row, by the cost of the
// national basket at each region's heading parities,
//   e_rh = e_h p_rh / pbar_h,  pbar_h = geometric mean of p_rh over the
// regions with a parity (NaN where the region has none),
// so every region buys the same quantities e_h / pbar_h. Any index then
// compares regions on one fixed basket (a Lowe index, CPI Manual 2004,
// ch. 15): Laspeyres = Paasche = Fisher = sum_h p_bh q_h / sum_h p_ah q_h,
// transitive by itself. pbar_h does not depend on the reference, so the
// parities are base invariant.
void ValueNationalBasket(NodeArrays* arrays);

// Describes groups of regions by code: "{a, b} and {c}".
std::string DescribeGroups(const Survey& survey, const std::vector<std::vector<int>>& groups);

}  // namespace paritas

#endif  // PARITAS_COMPUTE_COMPUTE_H_
