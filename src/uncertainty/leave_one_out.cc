// Leave one out: each item, then each heading, is dropped in turn. A thread
// keeps the full-sample ln parities and recomputes only the headings and the
// nodes the dropped unit touches (a dropped item's heading goes through the
// missing_parities rules again, as a run without the item would), then puts
// them back; the changes are reduced in item order afterwards, so ties and
// sums do not depend on the schedule.
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

// What dropping one unit changed: ln(without / with) of `nodes` (ascending),
// node k's region r at change[k * num_regions + r].
struct UnitChange {
  std::vector<int> nodes;
  std::vector<double> change;
};

// One thread's copy of the full-sample state, put back after every unit.
struct Scratch {
  std::vector<double> weight;
  Eigen::MatrixXd priced_lp;
  Eigen::MatrixXd heading_lp;
  Eigen::MatrixXd node_lp;
  std::vector<uint8_t> recompute;
  std::vector<int> changed_headings;
};

// What the missing_parities rules fill and what each fill rests on, for
// redoing only the fills a dropped item can move.
struct RuleLinks {
  bool may_fill = false;          // some heading's rule is not `leave`
  std::vector<int> like_heading;  // per heading: the heading its like: rule names, or -1
};

RuleLinks MakeRuleLinks(const Chain& chain) {
  RuleLinks links;
  links.like_heading.assign(chain.num_headings, -1);
  for (size_t g = 0; g < chain.rules.size(); ++g) {
    const HeadingRule& rule = chain.rules[g];
    links.may_fill = links.may_fill || rule.rule != ImputationRule::kLeave;
    if (rule.rule == ImputationRule::kLike) {
      links.like_heading[g] = chain.survey->classification.FindHeading(rule.like);
    }
  }
  return links;
}

// True when heading g's fills may move when heading h's parities do (g's
// own priced parities staying as they are): g has a region to fill and
// fills it like:h, or from an aggregate that holds h (the highest one its
// rule consulted holds every lower one; dropping an item can change which
// linked group an aggregate keeps, so a region left unfilled counts too).
// A fill from the external file, or from aggregates without h, is linked
// over g's own parities and stays.
bool FillRestsOn(const FullSample& full, const RuleLinks& links, int g, int h) {
  if (g >= static_cast<int>(full.heading_to_fill.size()) || !full.heading_to_fill[g]) return false;
  if (links.like_heading[g] == h) return true;
  const int node = full.highest_proxy_node[g];
  if (node < 0) return false;
  const std::vector<int>& nodes_of_h = full.chain.heading_nodes[h];
  return std::find(nodes_of_h.begin(), nodes_of_h.end(), node) != nodes_of_h.end();
}

bool SameValues(const Eigen::Ref<const Eigen::VectorXd>& a, const Eigen::Ref<const Eigen::VectorXd>& b) {
  return ((a.array() == b.array()) || (a.array().isNaN() && b.array().isNaN())).all();
}

// Recomputes the nodes of the headings in s->changed_headings (their columns
// of s->heading_lp already changed; the leaf of `dropped_heading`, -1 when
// none, is not: the heading has no parities left) and returns ln(without /
// with) of those nodes and of `always` (the dropped unit's own nodes); puts
// the scratch back to the full sample.
UnitChange TakeChanges(const FullSample& full, const std::vector<int>& always, int dropped_heading, Scratch* s) {
  const Chain& chain = full.chain;
  const auto& nodes = full.survey->classification.nodes();
  UnitChange unit;
  unit.nodes = always;
  for (int g : s->changed_headings) {
    for (int n : chain.heading_nodes[g]) {
      s->recompute[n] = g != dropped_heading || !nodes[n].is_leaf;
      unit.nodes.push_back(n);
    }
  }
  std::sort(unit.nodes.begin(), unit.nodes.end());
  unit.nodes.erase(std::unique(unit.nodes.begin(), unit.nodes.end()), unit.nodes.end());
  ComputeNodes(chain, full.node_expenditure, s->heading_lp, s->recompute, &s->node_lp);
  const int num_regions = chain.num_regions;
  unit.change.reserve(unit.nodes.size() * num_regions);
  for (int n : unit.nodes) {
    s->recompute[n] = 0;
    for (int r = 0; r < num_regions; ++r) unit.change.push_back(s->node_lp(n, r) - full.node_log_parity(n, r));
    s->node_lp.row(n) = full.node_log_parity.row(n);
  }
  for (int g : s->changed_headings) s->heading_lp.col(g) = full.heading_log_parity.col(g);
  s->changed_headings.clear();
  return unit;
}

// Heading h's parities from the quotes without one item (`priced`) go
// through the missing_parities rules again when a rule may fill a parity and
// either some heading had a region to fill in the full sample or a region
// lost its parity: a filled parity is linked over the regions the heading
// prices, and may rest on h's parities (rule like:<h>, or h inside the
// parent's aggregate).
bool NeedsCompletion(const FullSample& full, const RuleLinks& links, int h, const Eigen::VectorXd& priced) {
  if (!links.may_fill) return false;
  for (uint8_t to_fill : full.heading_to_fill) {
    if (to_fill) return true;
  }
  for (Eigen::Index r = 0; r < priced.size(); ++r) {
    if (std::isfinite(full.priced_log_parity(r, h)) && !std::isfinite(priced[r])) return true;
  }
  return false;
}

// Completes the headings with heading h's column of s->priced_lp changed:
// the rules run again for the headings whose fills rest on h (FillRestsOn)
// and, unless h is dropped whole (`h_dropped`: it stays unfilled), for h;
// every other heading keeps the full sample's column. Lists the headings
// whose column changed in s->changed_headings.
void CompleteAgain(const FullSample& full, const RuleLinks& links, int h, bool h_dropped, Scratch* s) {
  const Chain& chain = full.chain;
  std::vector<HeadingRule> rules = chain.rules;
  std::vector<uint8_t> redo(chain.num_headings, 0);
  for (int g = 0; g < chain.num_headings; ++g) {
    redo[g] = g == h ? !h_dropped : FillRestsOn(full, links, g, h);
    if (!redo[g]) rules[g] = HeadingRule();  // leave: kept from the full sample below
  }
  Eigen::MatrixXd completed = s->priced_lp;
  CompleteHeadings(chain, nullptr, &completed, &rules);
  for (int g = 0; g < chain.num_headings; ++g) {
    if (!redo[g] || SameValues(completed.col(g), full.heading_log_parity.col(g))) continue;
    s->heading_lp.col(g) = completed.col(g);
    s->changed_headings.push_back(g);
  }
}

// As ReplicateParities with item i's weight 0: heading h from the quotes
// without it, the missing_parities rules applied again, then the nodes.
UnitChange DropItem(const FullSample& full, const RuleLinks& links, int i, Scratch* s) {
  const Chain& chain = full.chain;
  const int h = full.survey->item_heading[i];
  // A heading whose parities come from the external file does not move
  // when one of its (ignored) items is dropped.
  if (HeadingFromFile(chain, h)) return TakeChanges(full, chain.heading_nodes[h], -1, s);
  s->weight[i] = 0.0;
  bool unlinked = false;
  const Eigen::VectorXd priced = HeadingLogParity(chain, h, s->weight, &unlinked);
  s->weight[i] = 1.0;
  if (!NeedsCompletion(full, links, h, priced)) {
    // Nothing to fill: a region that lost its parity has none, as in compute.
    s->heading_lp.col(h) = priced;
    s->changed_headings.push_back(h);
    return TakeChanges(full, chain.heading_nodes[h], -1, s);
  }
  s->priced_lp.col(h) = priced;
  CompleteAgain(full, links, h, /*h_dropped=*/false, s);
  s->priced_lp.col(h) = full.priced_log_parity.col(h);
  return TakeChanges(full, chain.heading_nodes[h], -1, s);
}

// As a run without heading h: it leaves its aggregates unfilled, and the
// fills of other headings that rest on it are made again without it.
UnitChange DropHeading(const FullSample& full, const RuleLinks& links, int h, Scratch* s) {
  bool fills_rest_on_h = false;
  for (int g = 0; g < full.chain.num_headings && !fills_rest_on_h; ++g) {
    fills_rest_on_h = g != h && FillRestsOn(full, links, g, h);
  }
  if (fills_rest_on_h) {
    s->priced_lp.col(h).setConstant(kNaN);
    CompleteAgain(full, links, h, /*h_dropped=*/true, s);
    s->priced_lp.col(h) = full.priced_log_parity.col(h);
  }
  s->heading_lp.col(h).setConstant(kNaN);
  s->changed_headings.push_back(h);
  return TakeChanges(full, full.chain.heading_nodes[h], h, s);
}

// Changes of every dropped unit, in unit order.
struct Changes {
  std::vector<UnitChange> item;
  std::vector<UnitChange> heading;
};

Changes DropEachUnit(const FullSample& full, const Units& units,
                     const SensitivityOptions& options) {
  const int num_drop_items = static_cast<int>(units.items.size());
  const int num_drop_headings = static_cast<int>(units.headings.size());
  Changes changes;
  changes.item.resize(num_drop_items);
  changes.heading.resize(num_drop_headings);
  Progress progress{&options, "leave-one-out", num_drop_items + num_drop_headings};
  const RuleLinks links = MakeRuleLinks(full.chain);
#pragma omp parallel num_threads(full.num_threads)
  {
    KeepChainOnThisThread();
    Scratch scratch{std::vector<double>(full.survey->num_items(), 1.0), full.priced_log_parity,
                    full.heading_log_parity, full.node_log_parity,
                    std::vector<uint8_t>(full.chain.num_nodes, 0), {}};
#pragma omp for schedule(dynamic, 4)
    for (int u = 0; u < num_drop_items; ++u) {
      changes.item[u] = DropItem(full, links, units.items[u], &scratch);
      progress.Step();
    }
#pragma omp for schedule(dynamic, 1)
    for (int u = 0; u < num_drop_headings; ++u) {
      changes.heading[u] = DropHeading(full, links, units.headings[u], &scratch);
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
// the largest item changes and to the stratified jackknife variance, over
// the nodes any of them changed (a node a drop left alone changed by 0).
void AddHeadingItems(const FullSample& full, int h, int first_unit, const Units& units,
                     const Changes& changes, Eigen::MatrixXd* variance, Eigen::MatrixXi* strata,
                     SensitivityResult* result) {
  const int num_regions = full.chain.num_regions;
  const int num_h = static_cast<int>(full.chain.heading_items[h].size());
  std::vector<int> touched = full.chain.heading_nodes[h];
  for (int u = first_unit; u < first_unit + num_h; ++u) {
    touched.insert(touched.end(), changes.item[u].nodes.begin(), changes.item[u].nodes.end());
  }
  std::sort(touched.begin(), touched.end());
  touched.erase(std::unique(touched.begin(), touched.end()), touched.end());
  Eigen::MatrixXd sum = Eigen::MatrixXd::Zero(touched.size(), num_regions);
  Eigen::MatrixXd sum_sq = sum;
  Eigen::MatrixXi count = Eigen::MatrixXi::Zero(touched.size(), num_regions);
  for (int u = first_unit; u < first_unit + num_h; ++u) {
    const UnitChange& unit = changes.item[u];
    for (size_t k = 0; k < touched.size(); ++k) {
      const int n = touched[k];
      const auto at = std::lower_bound(unit.nodes.begin(), unit.nodes.end(), n);
      const bool listed = at != unit.nodes.end() && *at == n;
      const double* change = listed ? unit.change.data() + (at - unit.nodes.begin()) * num_regions : nullptr;
      for (int r = 0; r < num_regions; ++r) {
        if (!std::isfinite(full.node_log_parity(n, r))) continue;
        const double d = listed ? change[r] : 0.0;
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
    const std::vector<double>& change = changes.heading[v].change;
    const std::vector<int>& nodes = changes.heading[v].nodes;
    for (size_t k = 0; k < nodes.size(); ++k) {
      const int n = nodes[k];
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
