// Pair intervals from the bootstrap's replicates: each pair reads the two
// regions' contiguous runs of replicate ln parities (layout of
// SensitivityResult::boot_log_parity), so no replicate is recomputed and the
// interval rests on exactly the replicates of the regions' own intervals.
#include "paritas/uncertainty/pair_ratios.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/uncertainty/expanded_interval.h"
#include "paritas/uncertainty/sensitivity.h"
#include "uncertainty/sensitivity_parts.h"

namespace paritas {

std::string ToString(PairVerdict verdict) {
  switch (verdict) {
    case PairVerdict::kDearer:
      return "dearer";
    case PairVerdict::kCheaper:
      return "cheaper";
    case PairVerdict::kIndistinguishable:
      return "indistinguishable";
    case PairVerdict::kNone:
      break;
  }
  return "none";
}

bool FromString(const std::string& text, PairVerdict* verdict) {
  const std::string lower = ToLower(Trim(text));
  for (PairVerdict candidate : {PairVerdict::kNone, PairVerdict::kDearer, PairVerdict::kCheaper,
                                PairVerdict::kIndistinguishable}) {
    if (lower == ToString(candidate)) {
      *verdict = candidate;
      return true;
    }
  }
  return false;
}

PairRatio PairRatioFromReplicates(const double* log_a, const double* log_b, int num_replicates,
                                  double level, double full_ratio, double interval_df,
                                  double interval_scale) {
  PairRatio out;
  out.ratio = full_ratio;
  out.interval_df = interval_df;
  out.interval_scale = interval_scale;
  std::vector<double> d;
  d.reserve(num_replicates);
  for (int b = 0; b < num_replicates; ++b) {
    if (std::isfinite(log_a[b]) && std::isfinite(log_b[b])) d.push_back(log_a[b] - log_b[b]);
  }
  out.num_replicates = static_cast<int>(d.size());
  if (d.size() < 2) return out;
  std::sort(d.begin(), d.end());
  const double p = ExpandedLowerLevel(level, interval_df, interval_scale);
  out.lower = std::exp(PercentileType7(d, p));
  out.upper = std::exp(PercentileType7(d, 1.0 - p));
  out.verdict = out.lower > 1.0   ? PairVerdict::kDearer
                : out.upper < 1.0 ? PairVerdict::kCheaper
                                  : PairVerdict::kIndistinguishable;
  return out;
}

void PairExpansion(double df_a, double scale_a, double df_b, double scale_b, double* df,
                   double* scale) {
  const double inf = std::numeric_limits<double>::infinity();
  const double nu = std::min(std::isnan(df_a) ? inf : df_a, std::isnan(df_b) ? inf : df_b);
  *df = std::isinf(nu) ? std::numeric_limits<double>::quiet_NaN() : nu;
  *scale = std::max(scale_a, scale_b);
}

std::vector<int> PairRatioNodes(const Classification& classification) {
  std::vector<int> nodes;
  if (classification.empty()) return nodes;
  nodes.push_back(0);
  for (int child : classification.nodes()[0].children) {
    if (!classification.nodes()[child].is_leaf) nodes.push_back(child);
  }
  return nodes;
}

std::string PairRatiosCsv(const Survey& survey, const std::vector<NodePairRatios>& nodes) {
  std::string out =
      "node,region_a,region_b,ratio,lower,upper,num_replicates,excludes_one,verdict,interval_df,"
      "interval_scale\n";
  for (const NodePairRatios& node : nodes) {
    for (const PairRatio& pair : node.pairs) {
      AppendCsvField(survey.classification.nodes()[node.node].code, &out);
      out += ',';
      AppendCsvField(survey.regions.Code(pair.region_a), &out);
      out += ',';
      AppendCsvField(survey.regions.Code(pair.region_b), &out);
      for (double value : {pair.ratio, pair.lower, pair.upper}) {
        out += ',';
        AppendShortest(value, &out);
      }
      out += ',' + std::to_string(pair.num_replicates);
      out += pair.ExcludesOne() ? ",yes," : ",no,";
      out += ToString(pair.verdict) + ',';
      if (!std::isnan(pair.interval_df)) AppendShortest(pair.interval_df, &out);
      out += ',';
      AppendShortest(pair.interval_scale, &out);
      out += '\n';
    }
  }
  return out;
}

namespace internal {

void ComputePairRatios(const std::vector<double>& log_parity, int num_regions, int num_b,
                       const Eigen::MatrixXd& parity, const Classification& classification,
                       double level, const Eigen::MatrixXd& interval_df,
                       const Eigen::MatrixXd& interval_scale, bool all_pairs, int num_threads,
                       std::vector<NodePairRatios>* out) {
  out->clear();
  for (int n : PairRatioNodes(classification)) {
    NodePairRatios node;
    node.node = n;
    for (int r = 0; r < num_regions; ++r) {
      if (std::isfinite(parity(n, r))) node.order.push_back(r);
    }
    std::stable_sort(node.order.begin(), node.order.end(),
                     [&](int a, int b) { return parity(n, a) > parity(n, b); });
    const int count = static_cast<int>(node.order.size());
    node.all_pairs = all_pairs || count <= kAllPairsMaxRegions;
    std::vector<std::pair<int, int>> wanted;
    if (node.all_pairs) {
      std::vector<int> by_survey = node.order;
      std::sort(by_survey.begin(), by_survey.end());
      for (int i = 0; i < count; ++i) {
        for (int j = i + 1; j < count; ++j) wanted.emplace_back(by_survey[i], by_survey[j]);
      }
    } else {
      for (int k = 0; k + 1 < count; ++k) wanted.emplace_back(node.order[k], node.order[k + 1]);
    }
    node.pairs.resize(wanted.size());
    const double* base = log_parity.data() + static_cast<size_t>(n) * num_regions * num_b;
#pragma omp parallel for schedule(dynamic, 64) num_threads(num_threads)
    for (int64_t k = 0; k < static_cast<int64_t>(wanted.size()); ++k) {
      const auto [a, b] = wanted[k];
      double df = kNaN, scale = 1.0;
      PairExpansion(interval_df(n, a), interval_scale(n, a), interval_df(n, b),
                    interval_scale(n, b), &df, &scale);
      PairRatio pair = PairRatioFromReplicates(base + static_cast<size_t>(a) * num_b,
                                               base + static_cast<size_t>(b) * num_b, num_b,
                                               level, parity(n, a) / parity(n, b), df, scale);
      pair.region_a = a;
      pair.region_b = b;
      node.pairs[k] = pair;
    }
    out->push_back(std::move(node));
  }
}

}  // namespace internal
}  // namespace paritas

namespace paritas {

std::string PairRatiosNote(const Survey& survey, const SensitivityResult& result) {
  if (result.pair_ratios.empty()) return "";
  std::string out = "\npairs of regions told apart (interval of the ratio of their parities, from "
                    "the same replicates, excludes 1; sensitivity/pair_ratios.csv):\n";
  bool some_neighbours_only = false;
  for (const NodePairRatios& node : result.pair_ratios) {
    int apart = 0;
    for (const PairRatio& pair : node.pairs) apart += pair.ExcludesOne() ? 1 : 0;
    out += "  " + survey.classification.nodes()[node.node].code + ": " + FormatCount(apart) +
           " of " + FormatCount(static_cast<int64_t>(node.pairs.size())) +
           (node.all_pairs ? " pairs" : " pairs of neighbours in rank") + "\n";
    some_neighbours_only = some_neighbours_only || !node.all_pairs;
  }
  if (some_neighbours_only) {
    out += "  (above " + std::to_string(kAllPairsMaxRegions) +
           " regions only neighbours in rank are computed and written; --all-pairs writes "
           "every pair, R (R - 1) / 2 rows per node)\n";
  }
  return out;
}

}  // namespace paritas
