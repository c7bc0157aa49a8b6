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

#include "base/eigen_threads.h"
#include "paritas/base/text.h"
#include "paritas/compute/imputation.h"

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
    *error = "reference must be mean, weighted-mean, country or a region code";
    return false;
  }
  if (num_threads < 0) {
    *error = "num_threads must be 0 (all cores) or more";
    return false;
  }
  HeadingRule rule;
  if (!HeadingRule::Parse(missing_parities.default_rule, &rule, error)) {
    *error = "missing_parities.default: " + *error;
    return false;
  }
  for (const auto& [heading, text] : missing_parities.headings) {
    if (!HeadingRule::Parse(text, &rule, error)) {
      *error = "missing_parities.headings." + heading + ": " + *error;
      return false;
    }
  }
  return true;
}

ComputeOptions ComputeOptions::FromConfig(const RunConfig& config) {
  ComputeOptions options;
  options.elementary.method = config.elementary;
  options.elementary.representative_weight = config.representative_weight;
  FromString(config.robust_errors, &options.elementary.robust_errors);  // validated by the config
  options.elementary.quote_weighted_cells =
      config.cpd_cell_weights == CpdCellWeights::kQuoteWeights;
  options.aggregation = config.aggregation;
  options.reference = config.reference;
  options.num_threads = config.threads;
  options.missing_parities = config.missing_parities;
  return options;
}

std::string ComputeSummary::BriefReport() const {
  return "parities for " + std::to_string(num_headings_used) + " of " +
         std::to_string(num_headings_given) + " basic headings and " +
         std::to_string(num_aggregates) + " aggregates" +
         (num_groups > 0 ? " and " + std::to_string(num_groups) + " groups" : "");
}

Eigen::VectorXd NodeExpenditure(const Survey& survey, int node) {
  Eigen::VectorXd total = Eigen::VectorXd::Constant(survey.num_regions(), std::nan(""));
  if (survey.national_weights) return total;
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
  if (survey.national_weights) ValueNationalBasket(&arrays);
  return arrays;
}

void ValueNationalBasket(NodeArrays* arrays) {
  for (Eigen::Index k = 0; k < arrays->price.cols(); ++k) {
    double sum = 0.0;
    int count = 0;
    for (Eigen::Index r = 0; r < arrays->price.rows(); ++r) {
      const double p = arrays->price(r, k);
      if (std::isfinite(p) && p > 0) {
        sum += std::log(p);
        ++count;
      }
    }
    const double mean_price = count > 0 ? std::exp(sum / count) : std::nan("");
    for (Eigen::Index r = 0; r < arrays->price.rows(); ++r) {
      const double p = arrays->price(r, k);
      arrays->expenditure(r, k) = std::isfinite(p) && p > 0
                                      ? arrays->expenditure(r, k) * p / mean_price
                                      : std::nan("");
    }
  }
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
  if (survey.national_weights && (options.reference.kind == ReferenceKind::kWeightedMean ||
                                  options.reference.kind == ReferenceKind::kCountry)) {
    summary->outcome = ComputeOutcome::kInvalidOptions;
    summary->message = "reference '" + options.reference.ToString() +
                       "' weighs regions by their expenditure, but the expenditure file gives "
                       "national weights (no region column); use mean or a region code";
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
// CPD standard errors are relative to the final reference (for the country
// reference, to the expenditure-weighted mean). Empty for the
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
  } else if (reference.kind == ReferenceKind::kWeightedMean ||
             reference.kind == ReferenceKind::kCountry) {
    // The country reference's shift depends on the parities; nominal shares
    // are its first-order weights before they are known (the standard errors
    // are relative to this expenditure-weighted mean).
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
    internal::KeepEigenOnThisThread();
    const std::vector<double> weights = HeadingReferenceWeights(survey, options.reference, h);
    result->headings[h] = ComputeHeadingParities(survey, h, options.elementary, weights);
  }
}

// The rule of each heading: its own under missing_parities.headings, else
// the default. Returns false with the summary set when a listed heading is
// not a basic heading of the survey.
bool ResolveRules(const Survey& survey, const MissingParitiesSettings& settings,
                  std::vector<HeadingRule>* rules, ComputeSummary* summary) {
  HeadingRule fallback;
  std::string error;
  HeadingRule::Parse(settings.default_rule, &fallback, &error);  // validated by IsValid
  rules->assign(survey.num_headings(), fallback);
  for (const auto& [code, text] : settings.headings) {
    const int h = survey.classification.FindHeading(code);
    if (h < 0) {
      summary->outcome = ComputeOutcome::kInvalidOptions;
      summary->message =
          "missing_parities.headings: '" + code + "' is not a basic heading of the classification";
      const std::string nearest = NearestName(code, survey.heading_codes);
      if (!nearest.empty()) summary->message += "; did you mean '" + nearest + "'?";
      return false;
    }
    HeadingRule::Parse(text, &(*rules)[h], &error);
  }
  return true;
}

// Stage 1b: a heading the external file gives takes the file's parities in
// place of its quotes' (the quotes are ignored, with a warning), except
// under rule `external`, where the quotes' parities stay and the file only
// fills the regions without one (the imputation stage).
void ExternalStage(const Survey& survey, const std::vector<HeadingRule>& rules,
                   ParityResult* result, ComputeSummary* summary) {
  if (survey.external_log_parity.cols() != survey.num_headings()) return;
  const int num_regions = survey.num_regions();
  for (int h = 0; h < survey.num_headings(); ++h) {
    const Eigen::VectorXd file = survey.external_log_parity.col(h);
    if (!file.array().isFinite().any() || rules[h].rule == ImputationRule::kExternal) continue;
    HeadingParities& heading = result->headings[h];
    if (heading.num_cells > 0) {
      int regions = 0;
      for (int r = 0; r < num_regions; ++r) regions += heading.num_quotes(r) > 0 ? 1 : 0;
      summary->warnings.push_back(
          "heading '" + survey.heading_codes[h] + "': parities taken from " + survey.external_path +
          "; its " + std::to_string(heading.num_quotes.sum()) + " price quotes in " +
          std::to_string(regions) + " region" + (regions == 1 ? "" : "s") +
          " are ignored (give the heading rule 'external' to keep the quotes and fill only the "
          "regions without a parity from the file)");
    }
    HeadingParities external;
    external.heading = h;
    external.log_parity = file;
    external.log_se = survey.external_log_se.col(h);
    external.log_se_robust = Eigen::VectorXd::Constant(num_regions, std::nan(""));
    external.num_items = Eigen::VectorXi::Zero(num_regions);
    external.num_quotes = Eigen::VectorXi::Zero(num_regions);
    external.num_regions_priced = static_cast<int>(file.array().isFinite().count());
    heading = std::move(external);
  }
}

// Stage 1c: marks each heading parity's source and fills the missing ones
// by rule (imputation.h). Returns false with the summary set on a bad rule.
bool ImputationStage(const Survey& survey, const ComputeOptions& options, ParityResult* result,
                     ComputeSummary* summary) {
  const int num_regions = survey.num_regions();
  const int num_headings = survey.num_headings();
  if (!ResolveRules(survey, options.missing_parities, &result->heading_rules, summary)) {
    return false;
  }
  ExternalStage(survey, result->heading_rules, result, summary);
  ImputationInput input;
  input.log_parity.resize(num_regions, num_headings);
  input.source = Eigen::MatrixXi::Zero(num_regions, num_headings);
  for (int h = 0; h < num_headings; ++h) {
    const HeadingParities& heading = result->headings[h];
    const bool from_file = heading.num_cells == 0 && heading.num_regions_priced > 0;
    for (int r = 0; r < num_regions; ++r) {
      const double value = heading.log_parity.size() == num_regions ? heading.log_parity(r)
                                                                    : std::nan("");
      input.log_parity(r, h) = std::isfinite(value) ? value : std::nan("");
      if (std::isfinite(value)) {
        input.source(r, h) =
            static_cast<int>(from_file ? ParitySource::kExternal : ParitySource::kPriced);
      }
    }
  }
  input.expenditure = survey.expenditure;
  input.external_log_parity = survey.external_log_parity;
  input.rules = result->heading_rules;
  ImputationResult imputed;
  std::string error;
  if (!ImputeMissingHeadingParities(input, survey.classification,
                                    *FindAggregationMethod(options.aggregation), &imputed,
                                    &error)) {
    summary->outcome = ComputeOutcome::kInvalidOptions;
    summary->message = error;
    return false;
  }
  for (int h = 0; h < num_headings; ++h) {
    HeadingParities& heading = result->headings[h];
    heading.log_parity = imputed.log_parity.col(h);
    if (heading.log_se.size() != num_regions) {
      heading.log_se = Eigen::VectorXd::Constant(num_regions, std::nan(""));
    }
    if (heading.log_se_robust.size() != num_regions) heading.log_se_robust = heading.log_se;
    for (int r : imputed.imputed[h]) heading.log_se(r) = heading.log_se_robust(r) = std::nan("");
  }
  summary->num_parities_imputed = imputed.num_imputed;
  for (const std::vector<int>& regions : imputed.left_missing) {
    summary->num_parities_missing += static_cast<int>(regions.size());
  }
  result->heading_source = std::move(imputed.source);
  result->imputed_regions = std::move(imputed.imputed);
  result->missing_regions = std::move(imputed.left_missing);
  return true;
}

// Quote weights many powers of ten apart (a weight keyed with extra zeros)
// leave the CPD's normal equations short of digits well before they fail:
// from a span of about 1e12 a heading's parities moved in the third digit
// without a word.
constexpr double kWidestCellWeightSpan = 1e8;

// Per heading, what is wrong with its cells' quote weights ("its cells'
// quote weights span a factor of ..."), or empty: a span beyond
// kWidestCellWeightSpan, when the method weighs cells by them.
std::vector<std::string> WideCellWeightSpans(const Survey& survey, const ComputeOptions& options) {
  std::vector<std::string> spans(survey.num_headings());
  const ElementaryMethod* method = FindElementaryMethod(options.elementary.method);
  if (!options.elementary.quote_weighted_cells || survey.cells.weight.empty() || method == nullptr ||
      !method->Properties().weighs_cells) {
    return spans;
  }
  const std::vector<double>& weight = survey.cells.weight;
  for (int h = 0; h < survey.num_headings(); ++h) {
    const HeadingRange& range = survey.heading_range[h];
    if (range.cell_end <= range.cell_begin) continue;
    const auto [lowest, highest] =
        std::minmax_element(weight.begin() + range.cell_begin, weight.begin() + range.cell_end);
    if (!(*highest > kWidestCellWeightSpan * *lowest)) continue;
    spans[h] = "its cells' quote weights span a factor of " + FormatReadable(*highest / *lowest, 0) + " (from " +
               FormatReadable(*lowest, 2) + " to " + FormatReadable(*highest, 2) +
               "; cpd_cell_weights: quote-weights)";
  }
  return spans;
}

// Warns of headings without quotes, counts the headings used; returns false
// with the summary set when some heading's regions are not linked.
// A heading whose fit failed names its weights' span too (`spans`, from
// WideCellWeightSpans): the failure's message stands alone in the output.
bool CheckHeadings(const Survey& survey, const ParityResult& result, const std::vector<std::string>& spans,
                   ComputeSummary* summary) {
  std::vector<std::string> failures;
  bool any_unlinked = false;
  for (int h = 0; h < survey.num_headings(); ++h) {
    const HeadingParities& heading = result.headings[h];
    if (heading.num_cells == 0) {
      if (heading.log_parity.array().isFinite().any()) {
        ++summary->num_headings_used;  // external or imputed parities
        continue;
      }
      summary->warnings.push_back("heading '" + survey.heading_codes[h] +
                                  "' has no price quotes: left out of every aggregate");
      continue;
    }
    if (!heading.identified && heading.groups.size() > 1) {
      any_unlinked = true;
      failures.push_back("heading '" + survey.heading_codes[h] +
                         "' is not linked: its regions fall into " +
                         std::to_string(heading.groups.size()) +
                         " groups that share no item: " + DescribeGroups(survey, heading.groups));
      continue;
    }
    if (!heading.identified) {  // linked, but the fit failed (e.g. weights many powers of 10 apart)
      failures.push_back("heading '" + survey.heading_codes[h] + "' has no parities: " + heading.message +
                         (spans[h].empty() ? "" : "; " + spans[h]));
      continue;
    }
    ++summary->num_headings_used;
  }
  if (failures.empty()) return true;
  summary->outcome = ComputeOutcome::kComputationFailed;
  summary->message = JoinNames(failures, "\n");
  if (any_unlinked) {
    summary->message +=
        "\nparities between unlinked groups are not identified; price an item common to the "
        "groups, or leave the isolated regions out of the heading";
  }
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
  keep[0] = options.keep_root_bilaterals;
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
  // Without its matrices the root needs its spreads by row blocks; under
  // GEKS-Fisher they come from the products its parities are formed from.
  const bool root_spreads = !keep[0] && !tree.nodes().front().is_leaf;
  SpreadOptions spread_options;
  spread_options.keep_pair_spreads = options.keep_pair_spreads;
  spread_options.region_medians = options.spread_medians;
  spread_options.num_threads = threads;
  const bool spreads_with_root = root_spreads && method.Name() == "geks-fisher";
  bool spreads_done = false;
#pragma omp parallel for schedule(dynamic, 1) num_threads(threads) if (num_aggregates > 1)
  for (int k = 0; k < num_aggregates; ++k) {
    internal::KeepEigenOnThisThread();
    const int index = aggregates[k];
    NodeArrays arrays = NodeInputArrays(survey, *result, index);
    // The compute's count, not OpenMP's (1 here): an aggregate alone, as the
    // root of L or T, spreads its row blocks over every thread; inside an
    // active team the blocks run on this thread anyway.
    arrays.num_threads = threads;
    if (index == 0 && spreads_with_root &&
        GeksFisherWithSpreads(arrays, spread_options, &aggregate_of[0], &result->root_spreads)) {
      spreads_done = true;
      continue;
    }
    BilateralMatrices bilaterals =
        NodeBilaterals(arrays, keep[index] ? BilateralOptions() : method.BilateralsNeeded());
    aggregate_of[index] = AggregateFromBilaterals(arrays, bilaterals, method);
    if (keep[index]) result->bilaterals[index] = std::move(bilaterals);
  }
  if (root_spreads && !spreads_done) {
    // The root's spreads row block by row block, both cores on the blocks.
    const NodeArrays arrays = NodeInputArrays(survey, *result, 0);
    result->root_spreads = AllPairsSpreads(arrays.price, arrays.expenditure, spread_options);
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
    node->num_headings(r) = std::isfinite(heading.log_parity(r)) ? 1 : 0;
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
// plain mean); its parity, real expenditure and rank are derived later
// (FinishNode), from the normalised log parity left in `*finish`.
void Normalise(const Survey& survey, const ComputeOptions& options, const std::string& code,
               Eigen::VectorXd log_parity, NodeResult* node, Eigen::VectorXd* finish,
               ComputeSummary* summary) {
  node->reference_used =
      NormaliseToReference(options.reference, survey.regions.Find(options.reference.region),
                           node->expenditure, &log_parity);
  if (node->reference_used.rfind("mean (", 0) == 0 &&
      options.reference.kind != ReferenceKind::kMean && log_parity.array().isFinite().any()) {
    summary->warnings.push_back("node '" + code + "': normalised to the " + node->reference_used);
  }
  *finish = std::move(log_parity);
}

// "aggregate 'x'" or, for an analytic group, "group 'x'".
std::string NodeNamed(const ClassificationNode& n) {
  return std::string(n.is_group ? "group '" : "aggregate '") + n.code + "'";
}

// Says why an aggregate none of whose headings has price quotes has no
// parities (empty when some heading has quotes); `check` reports the same.
std::string UnpricedAggregate(const Survey& survey, const ParityResult& result,
                              const ClassificationNode& n) {
  std::vector<std::string> codes;
  for (int h : n.headings) {
    if (result.headings[h].log_parity.array().isFinite().any()) return "";
    if (codes.size() < 8) codes.push_back(survey.heading_codes[h]);
  }
  if (n.headings.size() > codes.size()) codes.back() = "...";
  const std::string advice = n.is_group ? ", or take it out of the group"
                                         : ", or take the aggregate out of the classification";
  if (n.headings.size() == 1) {
    return NodeNamed(n) + " has no parities: its only heading (" + codes.front() +
           ") has no price quotes; price it" + advice;
  }
  return NodeNamed(n) + " has no parities: none of its " +
         std::to_string(n.headings.size()) + " headings (" + JoinNames(codes) +
         ") has price quotes; price one of them" + advice;
}

// Stage 2b: every node in classification order; returns false with the
// summary set when some aggregate's regions are not linked. The nodes'
// parities, real expenditure and ranks are derived after the loop, node by
// node on `threads` threads (each node's own arrays: no order enters).
bool FinishNodes(const Survey& survey, const ComputeOptions& options,
                 const std::vector<AggregateParities>& aggregate_of, int threads,
                 ParityResult* result, ComputeSummary* summary) {
  const Classification& tree = survey.classification;
  const int num_regions = survey.num_regions();
  const int num_nodes = static_cast<int>(tree.nodes().size());
  result->nodes.resize(num_nodes);
  // The normalised log parity of each node to finish (empty: none).
  std::vector<Eigen::VectorXd> finish(num_nodes);
  std::vector<std::string> failures;
  for (int index = 0; index < num_nodes; ++index) {
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
      Normalise(survey, options, n.code, FillLeafNode(result->headings[h], h, &node), &node,
                &finish[index], summary);
      continue;
    }
    ++(n.is_group ? summary->num_groups : summary->num_aggregates);
    const AggregateParities& aggregate = aggregate_of[index];
    FillAggregateNode(n, aggregate, *result, &node);
    if (std::string unpriced = UnpricedAggregate(survey, *result, n); !unpriced.empty()) {
      failures.push_back(unpriced);
      continue;
    }
    if (!aggregate.failure.empty()) {
      failures.push_back(NodeNamed(n) + " has no parities: " + aggregate.failure);
      continue;
    }
    if (!aggregate.identified) {
      failures.push_back(
          NodeNamed(n) + " is not linked: its regions fall into " +
          std::to_string(aggregate.groups.size()) +
          " groups with no heading in common: " + DescribeGroups(survey, aggregate.groups));
      continue;
    }
    Normalise(survey, options, n.code, aggregate.log_parity, &node, &finish[index], summary);
  }
#pragma omp parallel for schedule(dynamic, 4) num_threads(threads)
  for (int index = 0; index < num_nodes; ++index) {
    if (finish[index].size() > 0) FinishNode(survey, finish[index], &result->nodes[index]);
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
  auto start = std::chrono::steady_clock::now();
  *summary = ComputeSummary();
  *result = ParityResult();
  if (!CheckInputs(survey, options, summary)) return false;
  internal::FixEigenBlockSizes();
  summary->num_headings_given = survey.num_headings();
  const int threads = options.num_threads > 0 ? options.num_threads : omp_get_max_threads();

  // The two stage timers run back to back, so they cover the call whole.
  ElementaryStage(survey, options, threads, result);
  if (!ImputationStage(survey, options, result, summary)) return false;
  const std::vector<std::string> spans = WideCellWeightSpans(survey, options);
  for (int h = 0; h < survey.num_headings(); ++h) {
    if (spans[h].empty()) continue;
    summary->warnings.push_back("heading '" + survey.heading_codes[h] + "': " + spans[h] +
                                "; beyond 1e8 the CPD loses digits and its parities may be off; check the "
                                "weight column");
  }
  const bool headings_ok = CheckHeadings(survey, *result, spans, summary);
  summary->elementary_seconds = SecondsSince(start);
  if (!headings_ok) return false;

  start = std::chrono::steady_clock::now();
  const std::vector<AggregateParities> aggregate_of =
      AggregateStage(survey, options, threads, result);
  const bool linked = FinishNodes(survey, options, aggregate_of, threads, result, summary);
  if (linked) WarnMissingRegions(survey, *result, summary);
  summary->aggregation_seconds = SecondsSince(start);
  if (!linked) return false;

  summary->outcome = ComputeOutcome::kOk;
  summary->message = "ok";
  return true;
}

}  // namespace paritas
