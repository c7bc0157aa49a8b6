// Missing heading parities by rule. Every proxy is read from the parities
// the heading stage gave (priced or external), never from another imputed
// entry, so the headings can be taken in any order and a replicate applies
// the same rule to the same inputs.
#include "paritas/compute/imputation.h"

#include <algorithm>
#include <cmath>
#include <functional>
#include <limits>

#include "base/not_a_number.h"
#include "paritas/aggregation/aggregation.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

bool Spends(double e) { return std::isfinite(e) && e > 0; }

// ln parities of the aggregate over `headings` (classification heading
// indices) for every region, with the run's method; NaN where a region has
// none. Regions not linked to the others' largest group get NaN too.
Eigen::VectorXd AggregateOver(const ImputationInput& input, const std::vector<int>& headings,
                              const AggregationMethod& method) {
  const int num_regions = static_cast<int>(input.log_parity.rows());
  NodeArrays arrays;
  arrays.price.resize(num_regions, static_cast<int>(headings.size()));
  arrays.expenditure.resize(num_regions, static_cast<int>(headings.size()));
  for (int k = 0; k < static_cast<int>(headings.size()); ++k) {
    arrays.price.col(k) = input.log_parity.col(headings[k]).array().exp();
    arrays.expenditure.col(k) = input.expenditure.col(headings[k]);
  }
  const BilateralMatrices bilaterals = NodeBilaterals(arrays, method.BilateralsNeeded());
  const AggregateParities aggregate = AggregateFromBilaterals(arrays, bilaterals, method);
  if (!aggregate.failure.empty() || aggregate.log_parity.size() != num_regions) {
    return Eigen::VectorXd::Constant(num_regions, kNaN);
  }
  Eigen::VectorXd out = aggregate.log_parity;
  if (!aggregate.identified && !aggregate.groups.empty()) {
    // Parities between groups are not identified: keep the largest group.
    Eigen::VectorXd kept = Eigen::VectorXd::Constant(num_regions, kNaN);
    for (int r : aggregate.groups.front()) kept(r) = out(r);
    out = kept;
  }
  return out;
}

// The ancestors of heading h whose aggregate without h can serve as its
// proxy (parent first, root last; ancestors holding h alone are skipped).
std::vector<int> AncestorsWithOthers(const Classification& tree, int h) {
  std::vector<int> ancestors;
  for (int node = tree.nodes()[tree.headings()[h]].parent; node >= 0; node = tree.nodes()[node].parent) {
    if (tree.nodes()[node].headings.size() >= 2) ancestors.push_back(node);
  }
  return ancestors;
}

// The ln parities of ancestor `node` without heading h.
Eigen::VectorXd AncestorWithout(const ImputationInput& input, const Classification& tree, int node,
                                int h, const AggregationMethod& method) {
  std::vector<int> others;
  for (int g : tree.nodes()[node].headings) {
    if (g != h) others.push_back(g);
  }
  return AggregateOver(input, others, method);
}

// The linking offset: mean over regions with both an own parity of h and a
// finite proxy of (ln p_sh - ln X_s); 0 when there is none.
double LinkOffset(const ImputationInput& input, int h, const Eigen::VectorXd& proxy) {
  double sum = 0.0;
  int count = 0;
  for (int s = 0; s < proxy.size(); ++s) {
    const double own = input.log_parity(s, h);
    if (std::isfinite(own) && std::isfinite(proxy(s))) {
      sum += own - proxy(s);
      ++count;
    }
  }
  return count > 0 ? sum / count : 0.0;
}

// The proxies of one heading in the order they are tried, each made (with
// its linking offset) only when a region reaches it: most fills need the
// first alone, and an aggregate is costly.
struct ProxyLevels {
  std::function<Eigen::VectorXd(int)> make;  // level k's proxy
  std::vector<int> node;                     // level k's classification node (-1: none)
  std::vector<Eigen::VectorXd> proxy;        // made so far
  std::vector<double> offset;

  const Eigen::VectorXd& Get(const ImputationInput& input, int h, int k) {
    while (static_cast<int>(proxy.size()) <= k) {
      proxy.push_back(make(static_cast<int>(proxy.size())));
      offset.push_back(LinkOffset(input, h, proxy.back()));
    }
    return proxy[k];
  }
};

// Fills the missing entries of heading h from the proxies of `levels` in
// order (the first with a finite value for the region wins), each linked on
// its own.
void FillFromProxies(const ImputationInput& input, int h, ProxyLevels* levels, ParitySource source,
                     ImputationResult* result) {
  const int num_levels = static_cast<int>(levels->node.size());
  int highest = -1;
  for (int r = 0; r < input.log_parity.rows(); ++r) {
    if (std::isfinite(input.log_parity(r, h)) || !Spends(input.expenditure(r, h))) continue;
    bool filled = false;
    for (int k = 0; k < num_levels && !filled; ++k) {
      const Eigen::VectorXd& proxy = levels->Get(input, h, k);
      if (!std::isfinite(proxy(r))) continue;
      result->log_parity(r, h) = proxy(r) + levels->offset[k];
      result->source(r, h) = static_cast<int>(source);
      result->imputed[h].push_back(r);
      ++result->num_imputed;
      highest = std::max(highest, k);
      filled = true;
    }
    if (!filled) {
      // Every level was tried and had no value for r (an aggregate may keep
      // only its largest linked group): the last one counts as consulted.
      result->left_missing[h].push_back(r);
      highest = std::max(highest, num_levels - 1);
    }
  }
  if (highest >= 0) result->highest_proxy_node[h] = levels->node[highest];
}

}  // namespace

std::string ToString(ImputationRule rule) {
  switch (rule) {
    case ImputationRule::kLeave:
      return "leave";
    case ImputationRule::kParent:
      return "parent";
    case ImputationRule::kLike:
      return "like";
    case ImputationRule::kExternal:
      return "external";
  }
  return "leave";
}

bool FromString(const std::string& text, ImputationRule* rule) {
  const std::string word = ToLower(text);
  for (ImputationRule r : {ImputationRule::kLeave, ImputationRule::kParent, ImputationRule::kLike,
                           ImputationRule::kExternal}) {
    if (word == ToString(r)) {
      *rule = r;
      return true;
    }
  }
  return false;
}

std::vector<std::string> ImputationRuleNames() {
  return {"leave", "parent", "external", "like:<heading>"};
}

std::string HeadingRule::ToString() const {
  return rule == ImputationRule::kLike ? "like:" + like : paritas::ToString(rule);
}

bool HeadingRule::Parse(const std::string& text, HeadingRule* rule, std::string* error) {
  const std::string trimmed(Trim(text));
  const size_t colon = trimmed.find(':');
  HeadingRule parsed;
  const std::string kind = trimmed.substr(0, colon);
  if (!FromString(kind, &parsed.rule) ||
      (parsed.rule == ImputationRule::kLike) != (colon != std::string::npos)) {
    *error = QuoteValue(text) + " is not one of: " + JoinNames(ImputationRuleNames());
    return false;
  }
  if (parsed.rule == ImputationRule::kLike) {
    parsed.like = std::string(Trim(trimmed.substr(colon + 1)));
    if (parsed.like.empty()) {
      *error = QuoteValue(text) + " names no heading after 'like:'";
      return false;
    }
  }
  *rule = parsed;
  return true;
}

std::string ToString(ParitySource source) {
  switch (source) {
    case ParitySource::kNone:
      return "none";
    case ParitySource::kPriced:
      return "priced";
    case ParitySource::kImputed:
      return "imputed";
    case ParitySource::kExternal:
      return "external";
  }
  return "none";
}

bool ImputeMissingHeadingParities(const ImputationInput& input, const Classification& tree,
                                  const AggregationMethod& method, ImputationResult* result,
                                  std::string* error) {
  const int num_headings = static_cast<int>(input.log_parity.cols());
  *result = ImputationResult();
  result->log_parity = input.log_parity;
  result->source = input.source;
  result->left_missing.assign(num_headings, {});
  result->imputed.assign(num_headings, {});
  result->highest_proxy_node.assign(num_headings, -1);
  for (int h = 0; h < num_headings; ++h) {
    const HeadingRule& rule = input.rules[h];
    const std::string& code = tree.nodes()[tree.headings()[h]].code;
    // Proxies (an aggregate per ancestor for `parent`) are built only for
    // headings with a region to fill; a like: rule is checked regardless.
    bool needed = false;
    for (int r = 0; r < input.log_parity.rows() && !needed; ++r) {
      needed = !std::isfinite(input.log_parity(r, h)) && Spends(input.expenditure(r, h));
    }
    if (!needed && rule.rule != ImputationRule::kLike) continue;
    ProxyLevels levels;
    ParitySource source = ParitySource::kImputed;
    switch (rule.rule) {
      case ImputationRule::kLeave:
        break;
      case ImputationRule::kParent:
        levels.node = AncestorsWithOthers(tree, h);
        levels.make = [&](int k) { return AncestorWithout(input, tree, levels.node[k], h, method); };
        break;
      case ImputationRule::kLike: {
        const int g = tree.FindHeading(rule.like);
        if (g < 0 || g == h) {
          *error = "missing_parities: heading '" + code + "': rule '" + rule.ToString() +
                   (g < 0 ? "' names no heading of the classification"
                          : "' names the heading itself");
          const std::string nearest = NearestName(rule.like, tree.HeadingCodes());
          if (g < 0 && !nearest.empty()) *error += "; did you mean '" + nearest + "'?";
          return false;
        }
        levels.node = {-1};
        levels.make = [&input, g](int) { return Eigen::VectorXd(input.log_parity.col(g)); };
        break;
      }
      case ImputationRule::kExternal:
        if (input.external_log_parity.cols() == num_headings) {
          levels.node = {-1};
          levels.make = [&input, h](int) { return Eigen::VectorXd(input.external_log_parity.col(h)); };
        }
        source = ParitySource::kExternal;
        break;
    }
    FillFromProxies(input, h, &levels, source, result);
  }
  return true;
}

Eigen::Vector4d SourceShares(const Classification& tree, int node, int region,
                             const Eigen::MatrixXd& expenditure, const Eigen::MatrixXi& source) {
  const ClassificationNode& n = tree.nodes()[node];
  Eigen::Vector4d shares = Eigen::Vector4d::Zero();
  auto slot = [](int s) {
    switch (static_cast<ParitySource>(s)) {
      case ParitySource::kPriced:
        return 0;
      case ParitySource::kImputed:
        return 1;
      case ParitySource::kExternal:
        return 2;
      case ParitySource::kNone:
        return 3;
    }
    return 3;
  };
  if (n.is_leaf) {
    // A heading's parity has one source whatever the region spends.
    shares(slot(source(region, n.headings.front()))) = 1.0;
    return shares;
  }
  double total = 0.0;
  for (int h : n.headings) {
    const double e = expenditure(region, h);
    if (!Spends(e)) continue;
    shares(slot(source(region, h))) += e;
    total += e;
  }
  if (!(total > 0)) return Eigen::Vector4d::Constant(kNaN);
  return shares / total;
}

std::string SourceLabel(const Eigen::Vector4d& shares) {
  static const char* const kNames[] = {"priced", "imputed", "external"};
  int found = -1;
  for (int k = 0; k < 3; ++k) {
    if (!(shares(k) > 0)) continue;
    if (found >= 0) return "mixed";
    found = k;
  }
  return found < 0 ? "none" : kNames[found];
}

}  // namespace paritas
