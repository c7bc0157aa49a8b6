// The pipeline: elementary parities per heading (in parallel), then every
// aggregate from its headings, then normalisation and real expenditure per
// node. Each stage reads the survey's arrays as loaded; nothing is copied per
// pair of regions.
#include "paritas/compute/compute.h"

#include <omp.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <numeric>

#include "paritas/base/text.h"

namespace paritas {
namespace {

double SecondsSince(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

// Parity, real expenditure, per-capita index and rank from a normalised log parity.
void FinishNode(const Survey& survey, const Eigen::VectorXd& log_parity, NodeResult* node) {
  const int n = survey.num_regions();
  const double nan = std::nan("");
  node->parity = (100.0 * log_parity.array().exp()).matrix();
  node->real_expenditure = Eigen::VectorXd::Constant(n, nan);
  node->real_per_capita_index = Eigen::VectorXd::Constant(n, nan);
  node->rank = Eigen::VectorXi::Zero(n);
  node->num_regions_with_parity = 0;
  double total_real = 0.0, total_population = 0.0;
  for (int r = 0; r < n; ++r) {
    if (!std::isfinite(node->parity(r))) {
      node->parity(r) = nan;
      continue;
    }
    ++node->num_regions_with_parity;
    const double e = node->expenditure(r);
    if (std::isfinite(e)) node->real_expenditure(r) = e / (node->parity(r) / 100.0);
    const double population = survey.region_population[r];
    if (std::isfinite(node->real_expenditure(r)) && std::isfinite(population) && population > 0) {
      total_real += node->real_expenditure(r);
      total_population += population;
    }
  }
  if (total_population > 0 && total_real > 0) {
    const double country = total_real / total_population;
    for (int r = 0; r < n; ++r) {
      const double population = survey.region_population[r];
      if (std::isfinite(node->real_expenditure(r)) && std::isfinite(population) && population > 0) {
        node->real_per_capita_index(r) = 100.0 * node->real_expenditure(r) / population / country;
      }
    }
  }
  std::vector<int> order;
  for (int r = 0; r < n; ++r) {
    if (std::isfinite(node->parity(r))) order.push_back(r);
  }
  std::stable_sort(order.begin(), order.end(),
                   [&](int a, int b) { return node->parity(a) > node->parity(b); });
  for (size_t k = 0; k < order.size(); ++k) node->rank(order[k]) = static_cast<int>(k) + 1;
}

std::string RegionList(const Survey& survey, const std::vector<int>& regions, size_t limit = 10) {
  std::vector<std::string> codes;
  for (size_t k = 0; k < regions.size() && k < limit; ++k) {
    codes.emplace_back(survey.regions.Code(regions[k]));
  }
  std::string text = JoinNames(codes);
  if (regions.size() > limit) text += ", ... (" + std::to_string(regions.size()) + " in all)";
  return text;
}

}  // namespace

bool ComputeOptions::IsValid(std::string* error) const {
  if (!elementary.IsValid(error)) return false;
  if (FindAggregationMethod(aggregation) == nullptr) {
    *error = "aggregation method '" + aggregation +
             "' is not one of: " + JoinNames(AggregationMethodNames());
    return false;
  }
  if (reference.kind == ReferenceKind::kRegion && reference.region.empty()) {
    *error = "reference must be mean, weighted-mean or a region code";
    return false;
  }
  if (num_threads < 0) {
    *error = "num_threads must be 0 (all cores) or more";
    return false;
  }
  return true;
}

ComputeOptions ComputeOptions::FromConfig(const RunConfig& config) {
  ComputeOptions options;
  options.elementary.method = config.elementary;
  options.elementary.representative_weight = config.representative_weight;
  options.elementary.quote_weighted_cells =
      config.cpd_cell_weights == CpdCellWeights::kQuoteWeights;
  options.elementary.compute_robust_standard_errors = config.robust_standard_errors;
  options.aggregation = config.aggregation;
  options.reference = config.reference;
  options.num_threads = config.threads;
  return options;
}

std::string ComputeSummary::BriefReport() const {
  return "parities for " + std::to_string(num_headings_used) + " of " +
         std::to_string(num_headings_given) + " basic headings and " +
         std::to_string(num_aggregates) + " aggregates";
}

Eigen::VectorXd NodeExpenditure(const Survey& survey, int node) {
  Eigen::VectorXd total = Eigen::VectorXd::Constant(survey.num_regions(), std::nan(""));
  for (int h : survey.classification.nodes()[node].headings) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      const double e = survey.expenditure(r, h);
      if (std::isnan(e)) continue;
      total(r) = std::isnan(total(r)) ? e : total(r) + e;
    }
  }
  return total;
}

std::string DescribeGroups(const Survey& survey, const std::vector<std::vector<int>>& groups) {
  std::string text;
  for (size_t g = 0; g < groups.size(); ++g) {
    if (g > 0) text += g + 1 == groups.size() ? " and " : ", ";
    text += "{" + RegionList(survey, groups[g]) + "}";
  }
  return text;
}

NodeArrays NodeInputArrays(const Survey& survey, const ParityResult& result, int node) {
  const ClassificationNode& n = survey.classification.nodes()[node];
  NodeArrays arrays;
  const int num_regions = survey.num_regions();
  const int num_headings = static_cast<int>(n.headings.size());
  arrays.price.resize(num_regions, num_headings);
  arrays.expenditure.resize(num_regions, num_headings);
  for (int k = 0; k < num_headings; ++k) {
    const int h = n.headings[k];
    arrays.price.col(k) = result.headings[h].log_parity.array().exp();
    arrays.expenditure.col(k) = survey.expenditure.col(h);
  }
  return arrays;
}

namespace {

// Returns false with the summary set when the options are invalid or the
// reference region is not in the survey.
bool CheckInputs(const Survey& survey, const ComputeOptions& options, ComputeSummary* summary) {
  std::string error;
  if (!options.IsValid(&error)) {
    summary->outcome = ComputeOutcome::kInvalidOptions;
    summary->message = error;
    return false;
  }
  if (options.reference.kind == ReferenceKind::kRegion &&
      survey.regions.Find(options.reference.region) < 0) {
    summary->outcome = ComputeOutcome::kInvalidOptions;
    summary->message = "reference region '" + options.reference.region + "' is not in the survey";
    const std::string nearest = NearestName(options.reference.region, survey.regions.Codes());
    if (!nearest.empty()) summary->message += "; did you mean '" + nearest + "'?";
    return false;
  }
  return true;
}

// The weights heading `h` is normalised with: those the node stage uses, so
// CPD standard errors are relative to the final reference. Empty for the
// plain mean, or when the reference region has no cell or no region has
// positive expenditure in the heading.
std::vector<double> HeadingReferenceWeights(const Survey& survey, const Reference& reference,
                                            int h) {
  const int num_regions = survey.num_regions();
  std::vector<double> weights;
  const Eigen::VectorXd expenditure = survey.expenditure.col(h);
  if (reference.kind == ReferenceKind::kRegion) {
    const int r = survey.regions.Find(reference.region);
    weights.assign(num_regions, 0.0);
    bool present = false;
    for (int64_t k = survey.heading_range[h].cell_begin; k < survey.heading_range[h].cell_end;
         ++k) {
      present = present || survey.cells.region[k] == r;
    }
    if (present) {
      weights[r] = 1.0;
    } else {
      weights.clear();
    }
  } else if (reference.kind == ReferenceKind::kWeightedMean) {
    weights.assign(num_regions, 0.0);
    double total = 0.0;
    for (int r = 0; r < num_regions; ++r) {
      if (std::isfinite(expenditure(r)) && expenditure(r) > 0) {
        weights[r] = expenditure(r);
        total += expenditure(r);
      }
    }
    if (total <= 0) weights.clear();
  }
  return weights;
}

// Stage 1: elementary parities, headings in parallel.
void ElementaryStage(const Survey& survey, const ComputeOptions& options, int threads,
                     ParityResult* result) {
  const int num_headings = survey.num_headings();
  result->headings.resize(num_headings);
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads)
  for (int h = 0; h < num_headings; ++h) {
    const std::vector<double> weights = HeadingReferenceWeights(survey, options.reference, h);
    result->headings[h] = ComputeHeadingParities(survey, h, options.elementary, weights);
  }
}

// Warns of headings without quotes, counts the headings used; returns false
// with the summary set when some heading's regions are not linked.
bool CheckHeadings(const Survey& survey, const ParityResult& result, ComputeSummary* summary) {
  std::vector<std::string> failures;
  for (int h = 0; h < survey.num_headings(); ++h) {
    const HeadingParities& heading = result.headings[h];
    if (heading.num_cells == 0) {
      summary->warnings.push_back("heading '" + survey.heading_codes[h] +
                                  "' has no price quotes: left out of every aggregate");
      continue;
    }
    if (!heading.identified) {
      failures.push_back("heading '" + survey.heading_codes[h] +
                         "' is not linked: its regions fall into " +
                         std::to_string(heading.groups.size()) +
                         " groups that share no item: " + DescribeGroups(survey, heading.groups));
      continue;
    }
    ++summary->num_headings_used;
  }
  if (failures.empty()) return true;
  summary->outcome = ComputeOutcome::kComputationFailed;
  summary->message = JoinNames(failures, "\n") +
                     "\nparities between unlinked groups are not identified; price an item "
                     "common to the groups, or leave the isolated regions out of the heading";
  return false;
}

// Stage 2a: every aggregate from its headings' parities (indexed by node,
// empty for leaves); keeps the bilateral matrices of the root and of
// `options.keep_bilaterals` in `result`.
std::vector<AggregateParities> AggregateStage(const Survey& survey, const ComputeOptions& options,
                                              int threads, ParityResult* result) {
  const Classification& tree = survey.classification;
  const int num_nodes = static_cast<int>(tree.nodes().size());
  result->bilaterals.resize(num_nodes);
  std::vector<bool> keep(num_nodes, false);
  keep[0] = true;
  for (int node : options.keep_bilaterals) {
    if (node >= 0 && node < num_nodes) keep[node] = true;
  }
  // Aggregates in parallel over nodes: each is one GEMM-sized job and an
  // aggregate's elementwise passes are serial, so one node per thread keeps
  // both cores busy where Eigen's own threading would leave the elementwise
  // work on one. Inside the region Eigen runs single-threaded (nested
  // parallelism is off), and no entry depends on the thread count. Nodes
  // whose bilaterals are not kept compute only the chosen index.
  std::vector<int> aggregates;
  for (int index = 0; index < num_nodes; ++index) {
    if (!tree.nodes()[index].is_leaf) aggregates.push_back(index);
  }
  // Largest first, so the root does not start last and run alone.
  std::stable_sort(aggregates.begin(), aggregates.end(), [&](int a, int b) {
    return tree.nodes()[a].headings.size() > tree.nodes()[b].headings.size();
  });
  std::vector<AggregateParities> aggregate_of(num_nodes);
  const AggregationMethod& method = *FindAggregationMethod(options.aggregation);
  const int num_aggregates = static_cast<int>(aggregates.size());
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads) if (num_aggregates > 1)
  for (int k = 0; k < num_aggregates; ++k) {
    const int index = aggregates[k];
    const NodeArrays arrays = NodeInputArrays(survey, *result, index);
    BilateralMatrices bilaterals =
        NodeBilaterals(arrays, keep[index] ? BilateralOptions() : method.BilateralsNeeded());
    aggregate_of[index] = AggregateFromBilaterals(arrays, bilaterals, method);
    if (keep[index]) result->bilaterals[index] = std::move(bilaterals);
  }
  return aggregate_of;
}

// A basic heading's node: its parities and counts as the elementary stage gave them.
Eigen::VectorXd FillLeafNode(const HeadingParities& heading, int h, NodeResult* node) {
  node->heading = h;
  node->log_se = heading.log_se;
  node->log_se_robust = heading.log_se_robust;
  node->num_items = heading.num_items;
  node->num_quotes = heading.num_quotes;
  for (int r = 0; r < node->num_headings.size(); ++r) {
    node->num_headings(r) = heading.num_items(r) > 0 ? 1 : 0;
  }
  return heading.log_parity;
}

// An aggregate's node: its linking and, when linked, its items and quotes
// summed over its headings.
void FillAggregateNode(const ClassificationNode& n, const AggregateParities& aggregate,
                       const ParityResult& result, NodeResult* node) {
  node->num_headings = aggregate.num_headings;
  node->identified = aggregate.identified;
  node->groups = aggregate.groups;
  node->rms_log_residual = aggregate.rms_log_residual;
  node->tree = aggregate.tree;
  if (!aggregate.identified) return;
  for (int k = 0; k < static_cast<int>(n.headings.size()); ++k) {
    for (int r = 0; r < node->num_items.size(); ++r) {
      node->num_items(r) += result.headings[n.headings[k]].num_items(r);
      node->num_quotes(r) += result.headings[n.headings[k]].num_quotes(r);
    }
  }
}

// Normalises a node to the reference (warning when it falls back to the
// plain mean) and derives parity, real expenditure and rank.
void NormaliseAndFinish(const Survey& survey, const ComputeOptions& options,
                        const std::string& code, Eigen::VectorXd log_parity, NodeResult* node,
                        ComputeSummary* summary) {
  std::vector<double> weights;
  node->reference_used =
      ReferenceWeights(options.reference, survey.regions.Find(options.reference.region), log_parity,
                       node->expenditure, &weights);
  if (node->reference_used.rfind("mean (", 0) == 0 &&
      options.reference.kind != ReferenceKind::kMean && log_parity.array().isFinite().any()) {
    summary->warnings.push_back("node '" + code + "': normalised to the " + node->reference_used);
  }
  NormaliseLogParities(weights, &log_parity);
  FinishNode(survey, log_parity, node);
}

// Says why an aggregate none of whose headings has price quotes has no
// parities (empty when some heading has quotes); `check` reports the same.
std::string UnpricedAggregate(const Survey& survey, const ParityResult& result,
                              const ClassificationNode& n) {
  std::vector<std::string> codes;
  for (int h : n.headings) {
    if (result.headings[h].num_cells > 0) return "";
    if (codes.size() < 8) codes.push_back(survey.heading_codes[h]);
  }
  if (n.headings.size() > codes.size()) codes.back() = "...";
  const std::string advice = ", or take the aggregate out of the classification";
  if (n.headings.size() == 1) {
    return "aggregate '" + n.code + "' has no parities: its only heading (" + codes.front() +
           ") has no price quotes; price it" + advice;
  }
  return "aggregate '" + n.code + "' has no parities: none of its " +
         std::to_string(n.headings.size()) + " headings (" + JoinNames(codes) +
         ") has price quotes; price one of them" + advice;
}

// Stage 2b: every node in classification order; returns false with the
// summary set when some aggregate's regions are not linked.
bool FinishNodes(const Survey& survey, const ComputeOptions& options,
                 const std::vector<AggregateParities>& aggregate_of, ParityResult* result,
                 ComputeSummary* summary) {
  const Classification& tree = survey.classification;
  const int num_regions = survey.num_regions();
  result->nodes.resize(tree.nodes().size());
  std::vector<std::string> failures;
  for (int index = 0; index < static_cast<int>(tree.nodes().size()); ++index) {
    const ClassificationNode& n = tree.nodes()[index];
    NodeResult& node = result->nodes[index];
    node.node = index;
    node.is_heading = n.is_leaf;
    node.expenditure = NodeExpenditure(survey, index);
    node.log_se = Eigen::VectorXd::Constant(num_regions, std::nan(""));
    node.log_se_robust = node.log_se;
    node.num_items = Eigen::VectorXi::Zero(num_regions);
    node.num_quotes = Eigen::VectorXi::Zero(num_regions);
    node.num_headings = Eigen::VectorXi::Zero(num_regions);
    if (n.is_leaf) {
      const int h = n.headings.front();
      NormaliseAndFinish(survey, options, n.code, FillLeafNode(result->headings[h], h, &node),
                         &node, summary);
      continue;
    }
    ++summary->num_aggregates;
    const AggregateParities& aggregate = aggregate_of[index];
    FillAggregateNode(n, aggregate, *result, &node);
    if (std::string unpriced = UnpricedAggregate(survey, *result, n); !unpriced.empty()) {
      failures.push_back(unpriced);
      continue;
    }
    if (!aggregate.failure.empty()) {
      failures.push_back("aggregate '" + n.code + "' has no parities: " + aggregate.failure);
      continue;
    }
    if (!aggregate.identified) {
      failures.push_back(
          "aggregate '" + n.code + "' is not linked: its regions fall into " +
          std::to_string(aggregate.groups.size()) +
          " groups with no heading in common: " + DescribeGroups(survey, aggregate.groups));
      continue;
    }
    NormaliseAndFinish(survey, options, n.code, aggregate.log_parity, &node, summary);
  }
  if (failures.empty()) return true;
  summary->outcome = ComputeOutcome::kComputationFailed;
  summary->message = JoinNames(failures, "\n");
  return false;
}

// Warns of the regions the root gives no parity.
void WarnMissingRegions(const Survey& survey, const ParityResult& result, ComputeSummary* summary) {
  const NodeResult& root = result.nodes.front();
  std::vector<int> missing;
  for (int r = 0; r < survey.num_regions(); ++r) {
    if (!std::isfinite(root.parity(r))) missing.push_back(r);
  }
  if (missing.empty()) return;
  summary->warnings.push_back(std::to_string(missing.size()) + " region" +
                              (missing.size() == 1 ? " has" : "s have") + " no parity for '" +
                              survey.classification.nodes().front().code +
                              "' (no heading with both prices and positive "
                              "expenditure): " +
                              RegionList(survey, missing));
}

}  // namespace

bool ComputeParities(const Survey& survey, const ComputeOptions& options, ParityResult* result,
                     ComputeSummary* summary) {
  *summary = ComputeSummary();
  *result = ParityResult();
  if (!CheckInputs(survey, options, summary)) return false;
  summary->num_headings_given = survey.num_headings();
  const int threads = options.num_threads > 0 ? options.num_threads : omp_get_max_threads();

  auto start = std::chrono::steady_clock::now();
  ElementaryStage(survey, options, threads, result);
  summary->elementary_seconds = SecondsSince(start);
  if (!CheckHeadings(survey, *result, summary)) return false;

  start = std::chrono::steady_clock::now();
  const std::vector<AggregateParities> aggregate_of =
      AggregateStage(survey, options, threads, result);
  const bool linked = FinishNodes(survey, options, aggregate_of, result, summary);
  summary->aggregation_seconds = SecondsSince(start);
  if (!linked) return false;

  WarnMissingRegions(survey, *result, summary);
  summary->outcome = ComputeOutcome::kOk;
  summary->message = "ok";
  return true;
}

}  // namespace paritas
