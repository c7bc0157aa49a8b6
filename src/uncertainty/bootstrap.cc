// Bootstrap over items, stratified by heading: replicate b draws each
// heading's items with replacement (n - 1 of n for the rescaled bootstrap,
// n for the plain one; see BootstrapKind) from its own random stream
// (seed, b) and writes only its own slots, so results do not depend on the
// number of threads or on scheduling.
#include <algorithm>
#include <cmath>
#include <limits>
#include <numeric>
#include <vector>

#include "uncertainty/sensitivity_parts.h"

namespace paritas::internal {
namespace {

// Every replicate's ln parities and ranks, [node][region][replicate], so each
// statistic reads a contiguous run.
struct Replicates {
  int num_replicates = 0;
  std::vector<double> log_parity;
  std::vector<int32_t> rank;
  std::vector<uint8_t> unlinked;  // per replicate: some heading or aggregate unlinked
  // Per replicate: a rule filled more heading parities than in the full sample.
  std::vector<uint8_t> imputed;
  std::vector<uint8_t> lost;      // per replicate: some region lost a full-sample parity
};

// Multiplicities of one resample: per heading with n items, n - 1 draws
// (rescaled; at least one) or n draws (plain).
void DrawItemWeights(const Chain& chain, BootstrapKind kind, Stream* stream,
                     std::vector<double>* weight) {
  std::fill(weight->begin(), weight->end(), 0.0);
  for (int h = 0; h < chain.num_headings; ++h) {
    const std::vector<int>& items = chain.heading_items[h];
    const int n = static_cast<int>(items.size());
    const int draws = kind == BootstrapKind::kRescaled ? std::max(n - 1, std::min(n, 1)) : n;
    for (int k = 0; k < draws; ++k) (*weight)[items[stream->Below(n)]] += 1.0;
  }
}

Replicates RunReplicates(const FullSample& full, const SensitivityOptions& options) {
  const Chain& chain = full.chain;
  const int num_nodes = chain.num_nodes, num_regions = chain.num_regions;
  const int num_b = options.replicates;
  Replicates out;
  out.num_replicates = num_b;
  out.log_parity.assign(static_cast<size_t>(num_nodes) * num_regions * num_b, kNaN);
  out.rank.assign(out.log_parity.size(), 0);
  out.unlinked.assign(num_b, 0);
  out.imputed.assign(num_b, 0);
  out.lost.assign(num_b, 0);
  Progress progress{&options, "bootstrap", num_b};
#pragma omp parallel num_threads(full.num_threads)
  {
    KeepChainOnThisThread();
    std::vector<double> weight(full.survey->num_items());
    Eigen::MatrixXd heading_lp, node_lp;
    Eigen::MatrixXi rank;
#pragma omp for schedule(dynamic, 1)
    for (int b = 0; b < num_b; ++b) {
      // A cancelled run's replicates stay NaN; RunSensitivity discards them.
      if (Cancelled(options)) continue;
      Stream stream(options.seed, kBootstrapStream | static_cast<uint64_t>(b));
      DrawItemWeights(chain, options.bootstrap, &stream, &weight);
      Stream external_draw(options.seed, kExternalStream | static_cast<uint64_t>(b));
      const ReplicateOutcome outcome =
          RunChain(chain, full.node_expenditure, weight, &heading_lp, &node_lp, &external_draw);
      RankRows(node_lp, &rank);
      out.unlinked[b] = outcome.num_unlinked > 0;
      out.imputed[b] = outcome.num_imputed > full.num_imputed;
      for (int n = 0; n < num_nodes; ++n) {
        for (int r = 0; r < num_regions; ++r) {
          const size_t slot = (static_cast<size_t>(n) * num_regions + r) * num_b + b;
          out.log_parity[slot] = node_lp(n, r);
          out.rank[slot] = rank(n, r);
          if (std::isfinite(full.node_log_parity(n, r)) && !std::isfinite(node_lp(n, r))) {
            out.lost[b] = 1;
          }
        }
      }
      progress.Step();
    }
  }
  progress.Finish();
  return out;
}

// The statistics of one node and region from the replicates that gave it a
// parity (`values`: ln parities, `ranks`: their ranks, both in replicate
// order): the interval at quantile levels `p_lower` and 1 - p_lower, the
// ranks at the percentile levels alpha / 2 and 1 - alpha / 2.
void CellStatistics(int n, int r, double p_lower, double alpha, std::vector<double>* values,
                    std::vector<double>* ranks, SensitivityResult* result) {
  result->boot_num_replicates(n, r) = static_cast<int>(values->size());
  if (values->size() < 2) return;
  std::sort(values->begin(), values->end());
  std::sort(ranks->begin(), ranks->end());
  result->boot_median(n, r) = 100.0 * std::exp(PercentileType7(*values, 0.5));
  result->boot_lower(n, r) = 100.0 * std::exp(PercentileType7(*values, p_lower));
  result->boot_upper(n, r) = 100.0 * std::exp(PercentileType7(*values, 1.0 - p_lower));
  // Whole ranks, rounded outwards so the interval never narrows; the
  // small tolerance keeps an exact rank from rounding past itself.
  result->boot_rank_low(n, r) =
      static_cast<int>(std::floor(PercentileType7(*ranks, alpha / 2) + 1e-9));
  result->boot_rank_high(n, r) =
      static_cast<int>(std::ceil(PercentileType7(*ranks, 1.0 - alpha / 2) - 1e-9));
}

// Standard deviation (divisor B - 1) of the finite values among `num_b`
// replicate ln parities starting at `first`; NaN with fewer than two.
double ReplicateLogSe(const double* first, int num_b) {
  double sum = 0.0;
  int count = 0;
  for (int b = 0; b < num_b; ++b) {
    if (std::isfinite(first[b])) sum += first[b], ++count;
  }
  if (count < 2) return kNaN;
  const double mean = sum / count;
  double ss = 0.0;
  for (int b = 0; b < num_b; ++b) {
    if (std::isfinite(first[b])) ss += (first[b] - mean) * (first[b] - mean);
  }
  return std::sqrt(ss / (count - 1.0));
}

}  // namespace

void ExpansionOfCells(const Classification& classification, const Eigen::MatrixXd& expenditure,
                      const std::vector<int>& heading_num_items,
                      const Eigen::MatrixXi& region_num_items,
                      const std::vector<uint8_t>& heading_external, BootstrapKind bootstrap,
                      const Eigen::MatrixXd& log_se, Eigen::MatrixXd* df, Eigen::MatrixXd* scale) {
  const auto& nodes = classification.nodes();
  const int num_nodes = static_cast<int>(nodes.size());
  const int num_regions = static_cast<int>(log_se.cols());
  const bool plain = bootstrap == BootstrapKind::kPlain;
  *df = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
  *scale = Eigen::MatrixXd::Ones(num_nodes, num_regions);
  std::vector<int> leaf_of(heading_num_items.size(), -1);
  for (int n = 0; n < num_nodes; ++n) {
    if (nodes[n].is_leaf) leaf_of[nodes[n].headings.front()] = n;
  }
  // Degrees of freedom of region r's variance in heading h: m - 1 for the
  // m items it priced (its parity and the spread of its replicates rest on
  // them; at most the heading's n - 1); 1 for one item (as for two: its
  // standard error rests on no spread of its own, so the widest expansion);
  // the heading's n - 1 for a parity a rule filled (m = 0: the linking rests
  // on the heading's items); none (0) for a heading of one item; infinite
  // for a heading drawn from a normal.
  auto heading_df = [&](int h, int r) {
    if (!heading_external.empty() && heading_external[h]) {
      return std::numeric_limits<double>::infinity();
    }
    const int n_h = heading_num_items[h], m = region_num_items(r, h);
    if (n_h < 2) return 0.0;
    if (m == 0) return n_h - 1.0;
    return std::max(1.0, std::min(m, n_h) - 1.0);
  };
  for (int n = 0; n < num_nodes; ++n) {
    for (int r = 0; r < num_regions; ++r) {
      if (!std::isfinite(log_se(n, r))) continue;  // no interval to expand
      if (nodes[n].is_leaf) {
        const double nu = heading_df(nodes[n].headings.front(), r);
        if (!std::isfinite(nu) || nu < 1.0) continue;
        (*df)(n, r) = nu < kIntervalDfCap ? nu : kNaN;
        if (plain) (*scale)(n, r) = std::sqrt((nu + 1.0) / nu);
        continue;
      }
      double total = 0.0;
      for (int h : nodes[n].headings) {
        if (std::isfinite(expenditure(r, h)) && expenditure(r, h) > 0) total += expenditure(r, h);
      }
      if (!(total > 0.0)) continue;
      std::vector<double> terms, dfs;
      double raw = 0.0;
      for (int h : nodes[n].headings) {
        const double nu = heading_df(h, r);
        const double se = leaf_of[h] >= 0 ? log_se(leaf_of[h], r) : kNaN;
        if (!std::isfinite(expenditure(r, h)) || !(expenditure(r, h) > 0) || !(nu > 0.0) ||
            !std::isfinite(se) || !(se > 0.0)) {
          continue;
        }
        const double w = expenditure(r, h) / total;
        const double term = w * w * se * se;
        raw += term;
        terms.push_back(plain && std::isfinite(nu) ? term * (nu + 1.0) / nu : term);
        dfs.push_back(nu);
      }
      const double nu = SatterthwaiteDf(terms, dfs);
      if (nu > 0.0 && nu < kIntervalDfCap) (*df)(n, r) = nu;
      if (plain && raw > 0.0) {
        double corrected = 0.0;
        for (double t : terms) corrected += t;
        (*scale)(n, r) = std::sqrt(corrected / raw);
      }
    }
  }
}

namespace {

void Summarise(const Replicates& replicates, const FullSample& full,
               const SensitivityOptions& options, SensitivityResult* result) {
  const int num_b = replicates.num_replicates;
  const int num_nodes = full.chain.num_nodes, num_regions = full.chain.num_regions;
  const int64_t num_cells = static_cast<int64_t>(num_nodes) * num_regions;
  result->boot_median = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
  result->boot_lower = result->boot_median;
  result->boot_upper = result->boot_median;
  result->boot_log_se = result->boot_median;
  result->boot_rank_low = Eigen::MatrixXi::Zero(num_nodes, num_regions);
  result->boot_rank_high = result->boot_rank_low;
  result->boot_num_replicates = result->boot_rank_low;
  // First the standard errors: an aggregate's degrees of freedom rest on
  // its headings' bootstrap variances.
#pragma omp parallel for schedule(dynamic, 16) num_threads(full.num_threads)
  for (int64_t cell = 0; cell < num_cells; ++cell) {
    result->boot_log_se(cell / num_regions, cell % num_regions) =
        ReplicateLogSe(replicates.log_parity.data() + static_cast<size_t>(cell) * num_b, num_b);
  }
  if (options.interval == IntervalKind::kExpanded) {
    ExpansionOfCells(full.survey->classification, full.survey->expenditure,
                     result->heading_num_items, result->region_num_items, result->heading_external,
                     options.bootstrap,
                     result->boot_log_se, &result->boot_interval_df,
                     &result->boot_interval_scale);
  } else {
    result->boot_interval_df = result->boot_median;
    result->boot_interval_scale = Eigen::MatrixXd::Ones(num_nodes, num_regions);
  }
  const double alpha = 1.0 - options.level;
#pragma omp parallel for schedule(dynamic, 16) num_threads(full.num_threads)
  for (int64_t cell = 0; cell < num_cells; ++cell) {
    const int n = static_cast<int>(cell / num_regions), r = static_cast<int>(cell % num_regions);
    std::vector<double> values, ranks;
    for (int b = 0; b < num_b; ++b) {
      const size_t slot = static_cast<size_t>(cell) * num_b + b;
      if (!std::isfinite(replicates.log_parity[slot])) continue;
      values.push_back(replicates.log_parity[slot]);
      ranks.push_back(replicates.rank[slot]);
    }
    const double p_lower = ExpandedLowerLevel(options.level, result->boot_interval_df(n, r),
                                              result->boot_interval_scale(n, r));
    CellStatistics(n, r, p_lower, alpha, &values, &ranks, result);
  }
}

}  // namespace

void RunBootstrap(const FullSample& full, const SensitivityOptions& options,
                  SensitivityResult* result, SensitivitySummary* summary) {
  const auto start = std::chrono::steady_clock::now();
  Replicates replicates = RunReplicates(full, options);
  summary->num_replicates = replicates.num_replicates;
  for (int b = 0; b < replicates.num_replicates; ++b) {
    summary->num_replicates_unlinked += replicates.unlinked[b];
    summary->num_replicates_imputed += replicates.imputed[b];
    summary->num_replicates_region_lost += replicates.lost[b];
  }
  Summarise(replicates, full, options, result);
  ComputePairRatios(replicates.log_parity, full.chain.num_regions, replicates.num_replicates,
                    result->parity, full.survey->classification, options.level,
                    result->boot_interval_df, result->boot_interval_scale, options.all_pairs,
                    full.num_threads, &result->pair_ratios);
  result->boot_log_parity.clear();
  result->boot_num_replicates_kept = 0;
  if (options.write_replicates) {
    result->boot_log_parity = std::move(replicates.log_parity);
    result->boot_num_replicates_kept = replicates.num_replicates;
  }
  summary->bootstrap_seconds = SecondsSince(start);
}

}  // namespace paritas::internal
