// The checks read only the computed result and the survey, so they cost one
// pass over nodes x regions (plus the cells for items per heading) and never
// change a number: they add warnings and the basket_share column.
#include "paritas/compute/plausibility.h"

#include <omp.h>

#include <algorithm>
#include <cmath>
#include <utility>

#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/compute/imputation.h"

namespace paritas {
namespace {

struct KindLabel {
  const char* kind;
  const char* label;
};

constexpr KindLabel kKinds[] = {
    {"rejected-rows", "invalid rows left out"},
    {"duplicate-quotes", "duplicate quote rows"},
    {"input", "input"},
    {"computation", "computation"},
    {"weights", "spending weights"},
    {"partial-basket", "partial basket"},
    {"missing-parity", "missing heading parity"},
    {"single-item-heading", "single-item heading"},
    {"thin-evidence", "thin evidence"},
    {"implausible-level", "implausible level"},
    {"large-spread", "large Paasche-Laspeyres spread"},
    {"gross-outlier", "gross outlier"},
    {"sensitivity", "sensitivity"},
    {"extrapolated", "extrapolated parities"},
};

// Fixed decimals, or three significant digits for a figure that fixed
// decimals would show as 0.00 or with dozens of digits.
std::string Fixed(double value, int decimals) { return FormatReadable(value, decimals); }
std::string Percent(double share) { return FormatFixed(100.0 * share, 1) + " %"; }

int KindOrder(const std::string& kind) {
  for (size_t k = 0; k < std::size(kKinds); ++k) {
    if (kind == kKinds[k].kind) return static_cast<int>(k);
  }
  return static_cast<int>(std::size(kKinds));
}

// Collects warnings and marks the node/region cells they concern.
class Checker {
 public:
  Checker(const Survey& survey, const ParityResult& result, const RunConfig& config,
          PlausibilityResult* out)
      : survey_(survey),
        result_(result),
        checks_(config.checks),
        out_(out),
        threads_(config.threads > 0 ? config.threads : omp_get_max_threads()) {
    const int num_nodes = static_cast<int>(survey.classification.nodes().size());
    out_->basket_share.setConstant(num_nodes, survey.num_regions(), std::nan(""));
    out_->node_region_kinds.assign(num_nodes, std::vector<std::string>(survey.num_regions()));
    reference_region_ = config.reference.kind == ReferenceKind::kRegion
                            ? survey.regions.Find(config.reference.region)
                            : -1;
  }

  void Run() {
    CheckWeights();
    CheckBaskets();
    CheckMissingParities();
    CheckEvidence();
    CheckLevels();
    CheckSpreads();
  }

 private:
  const std::string& NodeCode(int node) const { return survey_.classification.nodes()[node].code; }
  // "aggregate 'x'" or "group 'x'": a group is no node of the tree.
  std::string NodeNamed(int node) const {
    const ClassificationNode& n = survey_.classification.nodes()[node];
    return std::string(n.is_group ? "group '" : "aggregate '") + n.code + "'";
  }
  std::string RegionCode(int r) const { return std::string(survey_.regions.Code(r)); }
  int HeadingNode(int h) const { return survey_.classification.headings()[h]; }
  double Spending(int r, int h) const {
    const double e = survey_.expenditure(r, h);
    return std::isfinite(e) && e > 0 ? e : 0.0;
  }
  double HeadingParity(int h, int r) const { return result_.nodes[HeadingNode(h)].parity(r); }

  void Add(const std::string& kind, int node, int region, std::string text) {
    out_->warnings.push_back({kind, node >= 0 ? NodeCode(node) : "",
                              region >= 0 ? RegionCode(region) : "", std::move(text)});
    if (node >= 0 && region >= 0) MarkKind(kind, node, region, out_);
  }

  // Headings with no spending anywhere count in no aggregate; without
  // spending in the reference region they drop out of its comparisons.
  void CheckWeights() {
    for (int h = 0; h < survey_.num_headings(); ++h) {
      bool any = false;
      for (int r = 0; r < survey_.num_regions() && !any; ++r) any = Spending(r, h) > 0;
      const std::string head = "heading '" + survey_.heading_codes[h] + "': ";
      if (!any) {
        Add("weights", HeadingNode(h), -1,
            head + "no region has spending on it, so it counts in no aggregate");
      } else if (reference_region_ >= 0 && Spending(reference_region_, h) <= 0) {
        Add("weights", HeadingNode(h), -1,
            head + "the reference region '" + RegionCode(reference_region_) +
                " has no spending on it, so comparisons weighted by its spending leave it out");
      }
    }
  }

  void CheckBaskets() {
    const auto& nodes = survey_.classification.nodes();
    for (int n = 0; n < static_cast<int>(nodes.size()); ++n) {
      for (int r = 0; r < survey_.num_regions(); ++r) BasketShare(n, r, nodes[n]);
    }
  }

  // The heading parity's source (imputation.h); without a source matrix
  // (results built by hand) every parity counts as priced.
  ParitySource Source(int h, int r) const {
    if (result_.heading_source.rows() == survey_.num_regions() &&
        result_.heading_source.cols() == survey_.num_headings()) {
      return static_cast<ParitySource>(result_.heading_source(r, h));
    }
    return std::isfinite(HeadingParity(h, r)) ? ParitySource::kPriced : ParitySource::kNone;
  }

  // "h1 5.0 %, h2 3.1 % and 2 more", largest first.
  std::string ShareList(std::vector<std::pair<double, int>> list, double total) const {
    std::sort(list.begin(), list.end(), [](const auto& a, const auto& b) {
      return a.first != b.first ? a.first > b.first : a.second < b.second;
    });
    std::string text;
    for (size_t k = 0; k < list.size() && k < 3; ++k) {
      text += (k > 0 ? ", " : "") + survey_.heading_codes[list[k].second] + " " +
              Percent(list[k].first / total);
    }
    if (list.size() > 3) text += " and " + std::to_string(list.size() - 3) + " more";
    return text;
  }

  // A region's share of the node's spending on imputed parities: the
  // partial-basket sentence's middle part (empty when none).
  std::string ImputedPart(const std::vector<std::pair<double, int>>& imputed, double total) const {
    if (imputed.empty()) return "";
    double sum = 0.0;
    for (const auto& entry : imputed) sum += entry.first;
    return "; " + Percent(sum / total) + " rests on imputed parities: " + ShareList(imputed, total);
  }

  void BasketShare(int n, int r, const ClassificationNode& node) {
    double total = 0.0, covered = 0.0;
    std::vector<std::pair<double, int>> missing, imputed;
    for (int h : node.headings) {
      const double e = Spending(r, h);
      total += e;
      const ParitySource source = Source(h, r);
      if (source == ParitySource::kPriced || source == ParitySource::kExternal) {
        covered += e;
      } else if (e > 0) {
        (source == ParitySource::kImputed ? imputed : missing).push_back({e, h});
      }
    }
    if (node.is_leaf) {
      const ParitySource source = Source(node.headings.front(), r);
      const bool priced = source == ParitySource::kPriced || source == ParitySource::kExternal;
      out_->basket_share(n, r) = priced ? 1.0 : (total > 0 ? 0.0 : std::nan(""));
      return;
    }
    if (!(total > 0)) return;
    const double share = covered / total;
    out_->basket_share(n, r) = share;
    if (share >= checks_.min_basket_share || !std::isfinite(result_.nodes[n].parity(r))) return;
    std::string text = NodeNamed(n) + ", region '" + RegionCode(r) + "': only " +
                       Percent(share) +
                       " of its spending rests on headings it has parities for "
                       "(checks.min_basket_share " +
                       Percent(checks_.min_basket_share) + ")" + ImputedPart(imputed, total);
    if (!missing.empty()) {
      text += "; without a parity: " + ShareList(missing, total) +
              "; its level there is in effect taken from its other headings";
    }
    Add("partial-basket", n, r, std::move(text));
  }

  // One warning per heading and region that spends on the heading without
  // a parity after its rule, and one per heading whose rule imputed some.
  void CheckMissingParities() {
    if (result_.missing_regions.size() != static_cast<size_t>(survey_.num_headings())) return;
    const std::string& root = NodeCode(0);
    for (int h = 0; h < survey_.num_headings(); ++h) {
      const std::string rule = result_.heading_rules[h].ToString();
      const std::string head = "heading '" + survey_.heading_codes[h] + "'";
      // A heading without a parity anywhere is named once by the computation
      // ("has no price quotes"), not once per region.
      bool any = false;
      for (int r = 0; r < survey_.num_regions() && !any; ++r) {
        any = std::isfinite(HeadingParity(h, r));
      }
      for (int r : any ? result_.missing_regions[h] : std::vector<int>()) {
        double total = 0.0;
        for (int g = 0; g < survey_.num_headings(); ++g) total += Spending(r, g);
        Add("missing-parity", HeadingNode(h), r,
            head + ", region '" + RegionCode(r) + "': " + Percent(Spending(r, h) / total) +
                " of its '" + root + "' spending but no parity (rule " + rule +
                "): the heading drops out of the region's comparisons pair by pair");
      }
      const std::vector<int>& imputed = result_.imputed_regions[h];
      if (imputed.empty()) continue;
      std::vector<std::string> codes;
      for (size_t k = 0; k < imputed.size() && k < 10; ++k) codes.push_back(RegionCode(imputed[k]));
      if (imputed.size() > 10) codes.push_back("...");
      Add("missing-parity", HeadingNode(h), -1,
          head + ": parities of " + std::to_string(imputed.size()) + " region" +
              (imputed.size() == 1 ? "" : "s") + " without one filled by rule " + rule + " (" +
              JoinNames(codes) + ")");
      for (int r : imputed) MarkKind("missing-parity", HeadingNode(h), r, out_);
    }
  }

  // Items priced per heading, and per region the items and quotes behind
  // the heading parity.
  void CheckEvidence() {
    for (int h = 0; h < survey_.num_headings(); ++h) {
      const HeadingRange& range = survey_.heading_range[h];
      std::vector<char> priced(range.num_items(), 0);
      for (int64_t k = range.cell_begin; k < range.cell_end; ++k) {
        priced[survey_.cells.item[k] - range.item_begin] = 1;
      }
      const int num_priced = static_cast<int>(std::count(priced.begin(), priced.end(), 1));
      const bool single = num_priced == 1;
      if (single) {
        const int item = range.item_begin + static_cast<int>(std::find(priced.begin(), priced.end(), 1) -
                                                             priced.begin());
        Add("single-item-heading", HeadingNode(h), -1,
            "heading '" + survey_.heading_codes[h] + "': one item priced ('" +
                std::string(survey_.items.Code(item)) +
                "'); its parities rest on that item alone");
      }
      const NodeResult& node = result_.nodes[HeadingNode(h)];
      for (int r = 0; r < survey_.num_regions(); ++r) {
        if (!std::isfinite(node.parity(r))) continue;
        // External and imputed parities rest on no quotes here: their own
        // warnings (and log_se) speak for them.
        if (IsPricedElsewhere(h, r)) continue;
        const int items = node.num_items(r), quotes = node.num_quotes(r);
        const bool few_items = !single && items < checks_.min_items;
        if (!few_items && quotes >= checks_.min_quotes) continue;
        Add("thin-evidence", HeadingNode(h), r,
            "heading '" + survey_.heading_codes[h] + "', region '" + RegionCode(r) +
                "': parity rests on " + std::to_string(items) + (items == 1 ? " item" : " items") +
                " and " + std::to_string(quotes) + (quotes == 1 ? " quote" : " quotes") +
                " (checks.min_items " + std::to_string(checks_.min_items) + ", min_quotes " +
                std::to_string(checks_.min_quotes) + ")");
      }
    }
  }

  // True when region r's parity of heading h came from the external file or
  // a missing_parities rule rather than from quotes.
  bool IsPricedElsewhere(int h, int r) const {
    const Eigen::MatrixXi& source = result_.heading_source;
    if (r >= source.rows() || h >= source.cols()) return false;
    const int s = source(r, h);
    return s == static_cast<int>(ParitySource::kExternal) ||
           s == static_cast<int>(ParitySource::kImputed);
  }

  // The levels are formed region by region on the run's threads (each
  // from the same sums in the same order as on one thread); the warnings
  // are then added in heading, region order.
  void CheckLevels() {
    const auto& nodes = survey_.classification.nodes();
    // ln parity and spending of each heading, one column per region, each
    // logarithm taken once (NaN where the parity is missing or not positive).
    const int num_headings = survey_.num_headings(), num_regions = survey_.num_regions();
    Eigen::MatrixXd log_parity(num_headings, num_regions), spending(num_headings, num_regions);
    for (int h = 0; h < num_headings; ++h) {
      for (int r = 0; r < num_regions; ++r) {
        const double p = HeadingParity(h, r);
        log_parity(h, r) = std::isfinite(p) && p > 0 ? std::log(p) : std::nan("");
        spending(h, r) = Spending(r, h);
      }
    }
    std::vector<int> parent_of(num_headings, -1);
    for (int h = 0; h < num_headings; ++h) {
      const int parent = nodes[HeadingNode(h)].parent;
      if (parent >= 0 && nodes[parent].headings.size() >= 2) parent_of[h] = parent;
    }
    // Level of each heading and region; NaN where no warning can arise.
    Eigen::MatrixXd level = Eigen::MatrixXd::Constant(num_headings, num_regions, std::nan(""));
#pragma omp parallel for schedule(static) num_threads(threads_)
    for (int r = 0; r < num_regions; ++r) {
      for (int h = 0; h < num_headings; ++h) {
        if (parent_of[h] < 0) continue;
        level(h, r) = Level(h, parent_of[h], r, log_parity.col(r).data(), spending.col(r).data());
      }
    }
    for (int h = 0; h < num_headings; ++h) {
      for (int r = 0; r < num_regions; ++r) {
        if (!std::isnan(level(h, r))) CheckLevel(h, parent_of[h], r, level(h, r));
      }
    }
  }

  // The region's level in the parent's other headings: their parities'
  // geometric mean weighted by its spending (plain when it has none); NaN
  // when the heading has no parity there or the parent no other heading
  // with one. `log_parity` and `spending` are the region's, per heading.
  double Level(int h, int parent, int r, const double* log_parity, const double* spending) const {
    if (!std::isfinite(HeadingParity(h, r))) return std::nan("");
    double sum_w = 0.0, sum_wlog = 0.0, sum_log = 0.0;
    int count = 0;
    for (int other : survey_.classification.nodes()[parent].headings) {
      const double log_p = log_parity[other];
      if (other == h || std::isnan(log_p)) continue;
      sum_w += spending[other];
      sum_wlog += spending[other] * log_p;
      sum_log += log_p;
      ++count;
    }
    if (count == 0) return std::nan("");
    return std::exp(sum_w > 0 ? sum_wlog / sum_w : sum_log / count);
  }

  // Warns when the heading's parity in region r is too far from its level.
  void CheckLevel(int h, int parent, int r, double level) {
    const double parity = HeadingParity(h, r);
    const double ratio = parity / level;
    if (ratio <= checks_.max_level_ratio && ratio >= 1.0 / checks_.max_level_ratio) return;
    Add("implausible-level", HeadingNode(h), r,
        "heading '" + survey_.heading_codes[h] + "', region '" + RegionCode(r) + "': parity " +
            Fixed(parity, 1) + " is " + Fixed(ratio, 2) + " times its level in the other headings of '" +
            NodeCode(parent) + "' (" + Fixed(level, 1) + "; checks.max_level_ratio " +
            Fixed(checks_.max_level_ratio, 2) + "); check its prices and units");
  }

  // Per region of each node whose bilaterals were kept: its largest spread.
  void CheckSpreads() {
    // The root's spreads computed without its matrices, when it has none.
    const SpreadSummary& root = result_.root_spreads;
    for (size_t a = 0; a < root.check_partner.size(); ++a) {
      if (!result_.bilaterals.empty() && result_.bilaterals.front().laspeyres.rows() > 0) break;
      AddSpread(0, static_cast<int>(a), root.check_percent[a], root.check_partner[a]);
    }
    for (size_t n = 0; n < result_.bilaterals.size(); ++n) {
      const BilateralMatrices& b = result_.bilaterals[n];
      const int size = static_cast<int>(b.laspeyres.rows());
      if (size == 0 || b.paasche.rows() != size) continue;
      for (int a = 0; a < size; ++a) {
        double worst = 0.0;
        int partner = -1;
        for (int c = 0; c < size; ++c) {
          const double spread = 100.0 * std::abs(std::log(b.laspeyres(a, c) / b.paasche(a, c)));
          if (c != a && std::isfinite(spread) && spread > worst) worst = spread, partner = c;
        }
        AddSpread(static_cast<int>(n), a, worst, partner);
      }
    }
  }

  // A large-spread warning for region a of node n when its largest spread
  // (`worst`, percent, against `partner`) is above the threshold.
  void AddSpread(int n, int a, double worst, int partner) {
    if (partner < 0 || worst <= checks_.max_spread_percent) return;
    Add("large-spread", n, a,
        NodeNamed(n) + ", region '" + RegionCode(a) + "': Paasche-Laspeyres spread " +
            Fixed(worst, 1) + " % against '" + RegionCode(partner) +
            "' (checks.max_spread_percent " + Fixed(checks_.max_spread_percent, 1) +
            "); its parity depends on the index formula");
  }

 public:
  static void MarkKind(const std::string& kind, int node, int region, PlausibilityResult* out) {
    std::string& kinds = out->node_region_kinds[node][region];
    for (size_t start = 0; start <= kinds.size();) {
      const size_t end = std::min(kinds.find(';', start), kinds.size());
      if (kinds.compare(start, end - start, kind) == 0 && end - start == kind.size()) return;
      start = end + 1;
    }
    if (!kinds.empty()) kinds += ';';
    kinds += kind;
  }

 private:
  const Survey& survey_;
  const ParityResult& result_;
  const CheckThresholds& checks_;
  PlausibilityResult* out_;
  int threads_;  // the run's threads (RunConfig::threads resolved)
  int reference_region_ = -1;
};

}  // namespace

std::vector<std::string> WarningKinds() {
  std::vector<std::string> kinds;
  for (const KindLabel& k : kKinds) kinds.push_back(k.kind);
  return kinds;
}

std::string WarningLabel(const std::string& kind) {
  for (const KindLabel& k : kKinds) {
    if (kind == k.kind) return k.label;
  }
  return kind;
}

PlausibilityResult CheckPlausibility(const Survey& survey, const ParityResult& result,
                                     const RunConfig& config) {
  PlausibilityResult out;
  Checker(survey, result, config, &out).Run();
  return out;
}

int64_t AddGrossOutlierWarnings(const Survey& survey, const OutlierReport& outliers,
                                const CheckThresholds& checks, PlausibilityResult* plausibility) {
  auto gross = [&](const Outlier& o) {
    const double ratio = o.observed / o.predicted;
    return std::isfinite(ratio) && ratio > 0 &&
           (ratio >= checks.gross_outlier_ratio || ratio <= 1.0 / checks.gross_outlier_ratio);
  };
  // One error, one warning: a quote of a cell that is itself gross is not
  // named again.
  std::vector<std::pair<int, int>> gross_cells;
  for (const Outlier& o : outliers.outliers) {
    if (o.kind == OutlierKind::kCell && gross(o)) gross_cells.push_back({o.region, o.item});
  }
  std::sort(gross_cells.begin(), gross_cells.end());
  int64_t count = 0;
  for (const Outlier& o : outliers.outliers) {
    if (!gross(o)) continue;
    if (o.kind != OutlierKind::kCell &&
        std::binary_search(gross_cells.begin(), gross_cells.end(), std::pair(o.region, o.item))) {
      continue;
    }
    const double ratio = o.observed / o.predicted;
    const int node = survey.classification.headings()[o.heading];
    const std::string region(survey.regions.Code(o.region));
    const bool cell = o.kind == OutlierKind::kCell;
    plausibility->warnings.push_back(
        {"gross-outlier", survey.heading_codes[o.heading], region,
         "heading '" + survey.heading_codes[o.heading] + "', region '" + region + "', item '" +
             std::string(survey.items.Code(o.item)) + "': " + (cell ? "cell price " : "a quote of ") +
             FormatReadable(o.observed, 2) + " is " + FormatReadable(ratio, 3) +
             " times the predicted " + FormatReadable(o.predicted, 2) + " (checks.gross_outlier_ratio " +
             FormatFixed(checks.gross_outlier_ratio, 2) + "); see outliers.csv"});
    if (plausibility->node_region_kinds.size() > static_cast<size_t>(node)) {
      Checker::MarkKind("gross-outlier", node, o.region, plausibility);
    }
    ++count;
  }
  return count;
}

std::vector<RunWarning> CollectWarnings(const LoadSummary& load,
                                        const std::vector<std::string>& compute_warnings,
                                        const PlausibilityResult& plausibility) {
  std::vector<RunWarning> out;
  if (load.num_rows_rejected > 0) {
    out.push_back({"rejected-rows", "", "",
                   FormatCount(load.num_rows_rejected) +
                       " invalid rows left out (listed in rejected.csv)"});
    // Rejected codes and heading conflicts once each, not row by row.
    std::string prices_path;
    for (const InputFileSummary& file : load.files) {
      if (file.role == "prices") prices_path = file.path;
    }
    for (const HeadingConflict& conflict : load.heading_conflicts) {
      out.push_back({"rejected-rows", "", "", conflict.Describe(prices_path)});
    }
    for (const RejectedCode& code : load.rejected_codes) {
      out.push_back({"rejected-rows", "", "", code.Describe()});
    }
  }
  if (load.num_duplicate_quotes > 0) {
    const int64_t n = load.num_duplicate_quotes;
    const char* fate =
        load.duplicate_policy == DuplicateQuotePolicy::kKeep
            ? "kept as quotes (duplicate_quotes: keep; set drop or reject to leave them out)"
        : load.duplicate_policy == DuplicateQuotePolicy::kDrop
            ? "left out (duplicate_quotes: drop)"
            : "rejected as invalid rows (duplicate_quotes: reject)";
    out.push_back({"duplicate-quotes", "", "",
                   FormatCount(n) + (n == 1 ? " quote row repeats" : " quote rows repeat") +
                       " an earlier row field for field (the first: " + load.duplicate_example +
                       "); " + fate});
  }
  for (const std::string& w : load.warnings) out.push_back({"input", "", "", w});
  for (const std::string& w : compute_warnings) out.push_back({"computation", "", "", w});
  std::vector<RunWarning> checks = plausibility.warnings;
  std::stable_sort(checks.begin(), checks.end(), [](const RunWarning& a, const RunWarning& b) {
    return KindOrder(a.kind) < KindOrder(b.kind);
  });
  out.insert(out.end(), checks.begin(), checks.end());
  std::stable_sort(out.begin(), out.end(), [](const RunWarning& a, const RunWarning& b) {
    return KindOrder(a.kind) < KindOrder(b.kind);
  });
  return out;
}

std::vector<std::pair<std::string, int64_t>> CountWarnings(const std::vector<RunWarning>& warnings) {
  std::vector<int64_t> counts(std::size(kKinds) + 1, 0);
  for (const RunWarning& w : warnings) ++counts[KindOrder(w.kind)];
  std::vector<std::pair<std::string, int64_t>> out;
  for (size_t k = 0; k < std::size(kKinds); ++k) {
    if (counts[k] > 0) out.push_back({kKinds[k].kind, counts[k]});
  }
  if (counts.back() > 0) out.push_back({"other", counts.back()});
  return out;
}

std::string WarningsText(const std::vector<RunWarning>& warnings, size_t per_kind) {
  if (warnings.empty()) return "no warnings\n";
  std::string out = FormatCount(static_cast<int64_t>(warnings.size())) +
                    (warnings.size() == 1 ? " warning" : " warnings") +
                    " (every one in warnings.csv):\n";
  for (size_t k = 0; k < warnings.size();) {
    size_t end = k;
    while (end < warnings.size() && warnings[end].kind == warnings[k].kind) ++end;
    out += "  " + WarningLabel(warnings[k].kind) + " (" + FormatCount(static_cast<int64_t>(end - k)) +
           "):\n";
    for (size_t j = k; j < end && j < k + per_kind; ++j) out += "    " + warnings[j].text + "\n";
    if (end - k > per_kind) {
      out += "    ... and " + FormatCount(static_cast<int64_t>(end - k - per_kind)) + " more\n";
    }
    k = end;
  }
  return out;
}

std::string StrictModeMessage(const std::vector<RunWarning>& warnings) {
  std::string counts;
  for (const auto& [kind, count] : CountWarnings(warnings)) {
    counts += (counts.empty() ? "" : ", ") + WarningLabel(kind) + " " + FormatCount(count);
  }
  return "strict: every output was written, but the run raised " +
         FormatCount(static_cast<int64_t>(warnings.size())) +
         (warnings.size() == 1 ? " warning (" : " warnings (") + counts +
         "); see warnings.csv before publishing";
}

std::string WarningsCsv(const std::vector<RunWarning>& warnings) {
  std::string out = "kind,node,region,message\n";
  for (const RunWarning& w : warnings) {
    AppendCsvField(w.kind, &out);
    out += ',';
    AppendCsvField(w.node, &out);
    out += ',';
    AppendCsvField(w.region, &out);
    out += ',';
    AppendCsvField(w.text, &out);
    out += '\n';
  }
  return out;
}

}  // namespace paritas
