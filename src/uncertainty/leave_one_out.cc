// Leave one out: each item, then each heading, is dropped in turn. A thread
// keeps the full-sample ln parities and recomputes only the heading and the
// nodes the dropped unit touches, then puts them back; the changes are reduced
// in item order afterwards, so ties and sums do not depend on the schedule.
#include <algorithm>
#include <cmath>
#include <vector>

#include "uncertainty/sensitivity_parts.h"

namespace paritas::internal {
namespace {

// What is dropped in turn: every item with a cell (heading by heading) and
// every heading that has a parity and sits in an aggregate of two or more.
struct Units {
  std::vector<int> items;
  std::vector<int> headings;
};

Units DroppedUnits(const FullSample& full) {
  const Chain& chain = full.chain;
  Units units;
  for (int h = 0; h < chain.num_headings; ++h) {
    units.items.insert(units.items.end(), chain.heading_items[h].begin(),
                       chain.heading_items[h].end());
  }
  for (int h = 0; h < chain.num_headings; ++h) {
    bool useful = false;
    for (int n : chain.heading_nodes[h]) {
      useful = useful || full.survey->classification.nodes()[n].headings.size() >= 2;
    }
    if (useful && full.heading_log_parity.col(h).array().isFinite().any()) {
      units.headings.push_back(h);
    }
  }
  return units;
}

// One thread's copy of the full-sample state, put back after every unit.
struct Scratch {
  std::vector<double> weight;
  Eigen::MatrixXd heading_lp;
  Eigen::MatrixXd node_lp;
  std::vector<uint8_t> recompute;
};

// Returns ln(without / with) for the nodes of heading `h` (k-th node, region
// r at k * num_regions + r) and restores the scratch to the full sample.
std::vector<double> TakeChanges(const FullSample& full, int h, Scratch* s) {
  const int num_regions = full.chain.num_regions;
  std::vector<double> change;
  change.reserve(full.chain.heading_nodes[h].size() * num_regions);
  for (int n : full.chain.heading_nodes[h]) {
    s->recompute[n] = 0;
    for (int r = 0; r < num_regions; ++r) {
      change.push_back(s->node_lp(n, r) - full.node_log_parity(n, r));
    }
    s->node_lp.row(n) = full.node_log_parity.row(n);
  }
  s->heading_lp.col(h) = full.heading_log_parity.col(h);
  return change;
}

std::vector<double> DropItem(const FullSample& full, int i, Scratch* s) {
  const Chain& chain = full.chain;
  const int h = full.survey->item_heading[i];
  // A heading whose parities come from the external file does not move
  // when one of its (ignored) items is dropped.
  if (HeadingFromFile(chain, h)) return TakeChanges(full, h, s);
  s->weight[i] = 0.0;
  bool unlinked = false;
  s->heading_lp.col(h) = HeadingLogParity(chain, h, s->weight, &unlinked);
  s->weight[i] = 1.0;
  // Regions whose parity a missing_parities rule filled keep the full
  // sample's value (the rule is not re-applied per dropped item).
  for (int r = 0; r < chain.num_regions; ++r) {
    if (!std::isfinite(s->heading_lp(r, h))) s->heading_lp(r, h) = full.heading_log_parity(r, h);
  }
  for (int n : chain.heading_nodes[h]) s->recompute[n] = 1;
  ComputeNodes(chain, full.node_expenditure, s->heading_lp, s->recompute, &s->node_lp);
  return TakeChanges(full, h, s);
}

std::vector<double> DropHeading(const FullSample& full, int h, Scratch* s) {
  const Chain& chain = full.chain;
  s->heading_lp.col(h).setConstant(kNaN);
  for (int n : chain.heading_nodes[h]) {
    s->recompute[n] = !full.survey->classification.nodes()[n].is_leaf;
  }
  ComputeNodes(chain, full.node_expenditure, s->heading_lp, s->recompute, &s->node_lp);
  return TakeChanges(full, h, s);
}

// Changes of every dropped unit, in unit order.
struct Changes {
  std::vector<std::vector<double>> item;
  std::vector<std::vector<double>> heading;
};

Changes DropEachUnit(const FullSample& full, const Units& units,
                     const SensitivityOptions& options) {
  const int num_drop_items = static_cast<int>(units.items.size());
  const int num_drop_headings = static_cast<int>(units.headings.size());
  Changes changes;
  changes.item.resize(num_drop_items);
  changes.heading.resize(num_drop_headings);
  Progress progress{&options, "leave-one-out", num_drop_items + num_drop_headings};
#pragma omp parallel num_threads(full.num_threads)
  {
    KeepChainOnThisThread();
    Scratch scratch{std::vector<double>(full.survey->num_items(), 1.0), full.heading_log_parity,
                    full.node_log_parity, std::vector<uint8_t>(full.chain.num_nodes, 0)};
#pragma omp for schedule(dynamic, 4)
    for (int u = 0; u < num_drop_items; ++u) {
      changes.item[u] = DropItem(full, units.items[u], &scratch);
      progress.Step();
    }
#pragma omp for schedule(dynamic, 1)
    for (int u = 0; u < num_drop_headings; ++u) {
      changes.heading[u] = DropHeading(full, units.headings[u], &scratch);
      progress.Step();
    }
  }
  progress.Finish();
  return changes;
}

// Keeps `d` as the largest change of (n, r) when it moves the parity more
// than the one kept so far (the first wins ties).
void KeepLargest(int n, int r, double d, int unit, Eigen::MatrixXd* largest,
                 Eigen::MatrixXi* which) {
  double& best = (*largest)(n, r);
  if (std::isnan(best) || std::abs(d) > std::abs(best)) {
    best = d;
    (*which)(n, r) = unit;
  }
}

// Adds the items of heading `h` (units first_unit, first_unit + 1, ...) to
// the largest item changes and to the stratified jackknife variance.
void AddHeadingItems(const FullSample& full, int h, int first_unit, const Units& units,
                     const Changes& changes, Eigen::MatrixXd* variance, Eigen::MatrixXi* strata,
                     SensitivityResult* result) {
  const int num_regions = full.chain.num_regions;
  const int num_h = static_cast<int>(full.chain.heading_items[h].size());
  const std::vector<int>& touched = full.chain.heading_nodes[h];
  Eigen::MatrixXd sum = Eigen::MatrixXd::Zero(touched.size(), num_regions);
  Eigen::MatrixXd sum_sq = sum;
  Eigen::MatrixXi count = Eigen::MatrixXi::Zero(touched.size(), num_regions);
  for (int u = first_unit; u < first_unit + num_h; ++u) {
    const std::vector<double>& change = changes.item[u];
    for (size_t k = 0; k < touched.size(); ++k) {
      const int n = touched[k];
      for (int r = 0; r < num_regions; ++r) {
        if (!std::isfinite(full.node_log_parity(n, r))) continue;
        const double d = change[k * num_regions + r];
        if (!std::isfinite(d)) {
          ++result->loo_num_items_lost(n, r);
          continue;
        }
        sum(k, r) += d;
        sum_sq(k, r) += d * d;
        ++count(k, r);
        KeepLargest(n, r, d, units.items[u], &result->loo_item_log_change, &result->loo_item);
      }
    }
  }
  for (size_t k = 0; k < touched.size(); ++k) {
    for (int r = 0; r < num_regions; ++r) {
      const int m = count(k, r);
      if (m < 2) continue;
      // (m - 1) / m x sum (d - mean d)^2; d = theta - theta_full, so the
      // shift cancels and the sums stay small.
      const double centred = std::max(0.0, sum_sq(k, r) - sum(k, r) * sum(k, r) / m);
      (*variance)(touched[k], r) += (m - 1.0) / m * centred;
      ++(*strata)(touched[k], r);
    }
  }
}

void ItemResults(const FullSample& full, const Units& units, const Changes& changes,
                 SensitivityResult* result) {
  const int num_nodes = full.chain.num_nodes, num_regions = full.chain.num_regions;
  Eigen::MatrixXd variance = Eigen::MatrixXd::Zero(num_nodes, num_regions);
  Eigen::MatrixXi strata = Eigen::MatrixXi::Zero(num_nodes, num_regions);
  int first_unit = 0;
  for (int h = 0; h < full.chain.num_headings; ++h) {
    AddHeadingItems(full, h, first_unit, units, changes, &variance, &strata, result);
    first_unit += static_cast<int>(full.chain.heading_items[h].size());
  }
  for (int n = 0; n < num_nodes; ++n) {
    for (int r = 0; r < num_regions; ++r) {
      if (strata(n, r) > 0) result->jackknife_log_se(n, r) = std::sqrt(variance(n, r));
    }
  }
}

void HeadingResults(const FullSample& full, const Units& units, const Changes& changes,
                    SensitivityResult* result) {
  const int num_regions = full.chain.num_regions;
  for (size_t v = 0; v < units.headings.size(); ++v) {
    const int h = units.headings[v];
    const std::vector<double>& change = changes.heading[v];
    for (size_t k = 0; k < full.chain.heading_nodes[h].size(); ++k) {
      const int n = full.chain.heading_nodes[h][k];
      if (full.survey->classification.nodes()[n].headings.size() < 2) continue;
      for (int r = 0; r < num_regions; ++r) {
        const double d = change[k * num_regions + r];
        if (!std::isfinite(d)) continue;
        KeepLargest(n, r, d, h, &result->loo_heading_log_change, &result->loo_heading);
      }
    }
  }
}

}  // namespace

void RunLeaveOneOut(const FullSample& full, const SensitivityOptions& options,
                    SensitivityResult* result, SensitivitySummary* summary) {
  const auto start = std::chrono::steady_clock::now();
  const Units units = DroppedUnits(full);
  const Changes changes = DropEachUnit(full, units, options);
  const int num_nodes = full.chain.num_nodes, num_regions = full.chain.num_regions;
  result->jackknife_log_se = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
  result->loo_item_log_change = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
  result->loo_item = Eigen::MatrixXi::Constant(num_nodes, num_regions, -1);
  result->loo_num_items_lost = Eigen::MatrixXi::Zero(num_nodes, num_regions);
  result->loo_heading_log_change = Eigen::MatrixXd::Constant(num_nodes, num_regions, kNaN);
  result->loo_heading = Eigen::MatrixXi::Constant(num_nodes, num_regions, -1);
  ItemResults(full, units, changes, result);
  HeadingResults(full, units, changes, result);
  summary->num_items_dropped = static_cast<int>(units.items.size());
  summary->num_headings_dropped = static_cast<int>(units.headings.size());
  summary->leave_one_out_seconds = SecondsSince(start);
}

}  // namespace paritas::internal
