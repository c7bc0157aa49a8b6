// Every sensitivity run is the chain recomputed with one weight per item:
// the bootstrap draws multiplicities, leave-one-out sets one weight to 0,
// the coverage curve keeps a random share at 1. Weights are applied to the
// survey's cell arrays as loaded (CPD cell weights, or weighted all-pairs
// Jevons sums), so a replicate costs one pass over the cells plus the
// aggregates.
#include "uncertainty/replicate_chain.h"

#include <algorithm>
#include <cmath>
#include <string>

#include "paritas/aggregation/aggregation.h"
#include "paritas/aggregation/aggregation_method.h"
#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/aggregation/normalisation.h"
#include "paritas/base/text.h"
#include "paritas/compute/imputation.h"
#include "paritas/elementary/elementary.h"
#include "paritas/uncertainty/sensitivity.h"

namespace paritas {
namespace internal {
namespace {

// Keeps, among `groups` (largest first), only the first group's regions.
void KeepLargestGroup(const std::vector<std::vector<int>>& groups, Eigen::VectorXd* log_parity) {
  std::vector<uint8_t> keep(log_parity->size(), 0);
  for (int r : groups.front()) keep[r] = 1;
  for (int r = 0; r < log_parity->size(); ++r) {
    if (!keep[r]) (*log_parity)(r) = kNaN;
  }
}

// Normalises a node as the compute stage does.
void NormaliseNode(const Chain& chain, const Eigen::VectorXd& expenditure,
                   Eigen::VectorXd* log_parity) {
  NormaliseToReference(chain.options.reference, chain.reference_region, expenditure, log_parity);
  for (int r = 0; r < log_parity->size(); ++r) {
    if (!std::isfinite((*log_parity)(r))) (*log_parity)(r) = kNaN;
  }
}

// ln parity of aggregate `node` from its headings' ln parities, with only the
// chosen index and the same entries the compute stage gives. Adds one to
// *num_unlinked when only the largest linked group was kept.
Eigen::VectorXd AggregateLogParity(const Chain& chain, const ClassificationNode& node,
                                   const Eigen::MatrixXd& heading_log_parity, int* num_unlinked) {
  const Survey& survey = *chain.survey;
  NodeArrays arrays;
  const int k_headings = static_cast<int>(node.headings.size());
  arrays.price.resize(chain.num_regions, k_headings);
  arrays.expenditure.resize(chain.num_regions, k_headings);
  for (int k = 0; k < k_headings; ++k) {
    const int h = node.headings[k];
    arrays.price.col(k) = heading_log_parity.col(h).array().exp();
    arrays.expenditure.col(k) = survey.expenditure.col(h);
  }
  if (survey.national_weights) ValueNationalBasket(&arrays);
  const AggregationMethod& method = *FindAggregationMethod(chain.options.aggregation);
  const AggregateParities aggregate =
      AggregateFromBilaterals(arrays, NodeBilaterals(arrays, method.BilateralsNeeded()), method);
  Eigen::VectorXd log_parity = aggregate.log_parity;
  if (!aggregate.identified && !aggregate.groups.empty()) {
    KeepLargestGroup(aggregate.groups, &log_parity);
    ++*num_unlinked;
  }
  return log_parity;
}

}  // namespace

Chain MakeChain(const Survey& survey, const ComputeOptions& options) {
  Chain chain;
  chain.survey = &survey;
  chain.options = options;
  chain.options.elementary.compute_standard_errors = false;
  chain.options.elementary.robust_errors = RobustErrors::kOff;
  chain.num_nodes = static_cast<int>(survey.classification.nodes().size());
  chain.num_regions = survey.num_regions();
  chain.num_headings = survey.num_headings();
  chain.heading_items.resize(chain.num_headings);
  chain.heading_nodes.resize(chain.num_headings);
  for (int h = 0; h < chain.num_headings; ++h) {
    const HeadingRange& range = survey.heading_range[h];
    std::vector<uint8_t> seen(range.num_items(), 0);
    for (int64_t k = range.cell_begin; k < range.cell_end; ++k) {
      seen[survey.cells.item[k] - range.item_begin] = 1;
    }
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
  HeadingRule fallback;
  std::string error;
  if (HeadingRule::Parse(options.missing_parities.default_rule, &fallback, &error)) {
    chain.rules.assign(chain.num_headings, fallback);
    for (const auto& [code, text] : options.missing_parities.headings) {
      const int h = survey.classification.FindHeading(code);
      if (h < 0 || !HeadingRule::Parse(text, &chain.rules[h], &error)) {
        chain.rules.clear();
        break;
      }
    }
  }
  return chain;
}

bool HeadingFromFile(const Chain& chain, int h) {
  const Survey& survey = *chain.survey;
  return survey.external_log_parity.cols() == chain.num_headings &&
         static_cast<int>(chain.rules.size()) == chain.num_headings &&
         chain.rules[h].rule != ImputationRule::kExternal &&
         survey.external_log_parity.col(h).array().isFinite().any();
}

int CompleteHeadings(const Chain& chain, Stream* draw, Eigen::MatrixXd* heading_log_parity,
                     const std::vector<HeadingRule>* rules, ImputationResult* details) {
  const Survey& survey = *chain.survey;
  if (static_cast<int>(chain.rules.size()) != chain.num_headings) return 0;
  ImputationInput input;
  input.log_parity = *heading_log_parity;
  input.source = Eigen::MatrixXi::Zero(chain.num_regions, chain.num_headings);
  const bool has_file = survey.external_log_parity.cols() == chain.num_headings;
  for (int h = 0; h < chain.num_headings; ++h) {
    ParitySource source = ParitySource::kPriced;
    if (HeadingFromFile(chain, h)) {
      // As the compute stage: the file's parities replace the quotes'.
      source = ParitySource::kExternal;
      for (int r = 0; r < chain.num_regions; ++r) {
        double value = survey.external_log_parity(r, h);
        const double se = survey.external_log_se(r, h);
        if (draw != nullptr && std::isfinite(value) && std::isfinite(se) && se > 0) {
          value += se * draw->Normal();
        }
        input.log_parity(r, h) = value;
      }
    }
    for (int r = 0; r < chain.num_regions; ++r) {
      if (std::isfinite(input.log_parity(r, h))) {
        input.source(r, h) = static_cast<int>(source);
      } else {
        input.log_parity(r, h) = kNaN;
      }
    }
  }
  input.expenditure = survey.expenditure;
  if (has_file) {
    input.external_log_parity = survey.external_log_parity;
    // Parities that rule `external` fills are drawn too, like the file's own
    // headings (after them, so their draws are unchanged).
    for (int h = 0; draw != nullptr && h < chain.num_headings; ++h) {
      if (chain.rules[h].rule != ImputationRule::kExternal) continue;
      for (int r = 0; r < chain.num_regions; ++r) {
        const double se = survey.external_log_se(r, h);
        if (std::isfinite(input.external_log_parity(r, h)) && std::isfinite(se) && se > 0) {
          input.external_log_parity(r, h) += se * draw->Normal();
        }
      }
    }
  }
  input.rules = rules != nullptr ? *rules : chain.rules;
  ImputationResult result;
  std::string error;
  if (!ImputeMissingHeadingParities(input, survey.classification,
                                    *FindAggregationMethod(chain.options.aggregation), &result,
                                    &error)) {
    return 0;  // a bad like: rule; the compute stage reports it
  }
  const int num_imputed = result.num_imputed;
  *heading_log_parity = std::move(result.log_parity);
  if (details != nullptr) *details = std::move(result);
  return num_imputed;
}

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

Eigen::MatrixXd NodeExpenditures(const Survey& survey) {
  const int num_nodes = static_cast<int>(survey.classification.nodes().size());
  Eigen::MatrixXd total(num_nodes, survey.num_regions());
  for (int n = 0; n < num_nodes; ++n) total.row(n) = NodeExpenditure(survey, n).transpose();
  return total;
}

int ComputeNodes(const Chain& chain, const Eigen::MatrixXd& node_expenditure,
                 const Eigen::MatrixXd& heading_log_parity, const std::vector<uint8_t>& recompute,
                 Eigen::MatrixXd* node_log_parity) {
  const auto& nodes = chain.survey->classification.nodes();
  int num_unlinked = 0;
  for (int n = 0; n < chain.num_nodes; ++n) {
    if (!recompute.empty() && !recompute[n]) continue;
    const ClassificationNode& node = nodes[n];
    Eigen::VectorXd log_parity;
    if (node.is_leaf) {
      log_parity = heading_log_parity.col(node.headings.front());
    } else {
      log_parity = AggregateLogParity(chain, node, heading_log_parity, &num_unlinked);
    }
    NormaliseNode(chain, node_expenditure.row(n).transpose(), &log_parity);
    node_log_parity->row(n) = log_parity.transpose();
  }
  return num_unlinked;
}

ReplicateOutcome RunChain(const Chain& chain, const Eigen::MatrixXd& node_expenditure,
                          const std::vector<double>& item_weight,
                          Eigen::MatrixXd* heading_log_parity, Eigen::MatrixXd* node_log_parity,
                          Stream* draw, Eigen::MatrixXd* priced_log_parity,
                          ImputationResult* imputation) {
  ReplicateOutcome outcome;
  heading_log_parity->resize(chain.num_regions, chain.num_headings);
  node_log_parity->resize(chain.num_nodes, chain.num_regions);
  for (int h = 0; h < chain.num_headings; ++h) {
    bool unlinked = false;
    heading_log_parity->col(h) = HeadingLogParity(chain, h, item_weight, &unlinked);
    outcome.num_unlinked += unlinked ? 1 : 0;
  }
  if (priced_log_parity != nullptr) *priced_log_parity = *heading_log_parity;
  outcome.num_imputed = CompleteHeadings(chain, draw, heading_log_parity, nullptr, imputation);
  outcome.num_unlinked +=
      ComputeNodes(chain, node_expenditure, *heading_log_parity, {}, node_log_parity);
  return outcome;
}

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

}  // namespace internal

namespace {

bool IsWhole(double value) { return std::isfinite(value) && value == std::floor(value); }

}  // namespace

bool ReplicateParities(const Survey& survey, const ComputeOptions& compute,
                       const std::vector<double>& item_multiplicity,
                       Eigen::MatrixXd* node_log_parity, int* num_unlinked_headings,
                       std::string* error) {
  if (!compute.IsValid(error)) return false;
  if (static_cast<int>(item_multiplicity.size()) != survey.num_items()) {
    *error = "item_multiplicity has " + std::to_string(item_multiplicity.size()) +
             " entries; the survey has " + std::to_string(survey.num_items()) + " items";
    return false;
  }
  for (size_t i = 0; i < item_multiplicity.size(); ++i) {
    if (!IsWhole(item_multiplicity[i]) || item_multiplicity[i] < 0) {
      *error = "item_multiplicity[" + std::to_string(i) + "] is " +
               FormatFixed(item_multiplicity[i], 6) + "; multiplicities must be whole numbers >= 0";
      return false;
    }
  }
  const internal::Chain chain = internal::MakeChain(survey, compute);
  const Eigen::MatrixXd node_expenditure = internal::NodeExpenditures(survey);
  Eigen::MatrixXd heading_log_parity;
  const internal::ReplicateOutcome outcome = internal::RunChain(
      chain, node_expenditure, item_multiplicity, &heading_log_parity, node_log_parity);
  if (num_unlinked_headings != nullptr) *num_unlinked_headings = outcome.num_unlinked;
  return true;
}

}  // namespace paritas
