// How many items to price, from the bootstrap's standard errors under the
// 1/n law (assumptions in items_needed.h); the coverage curve gives a second,
// independent estimate of the same standard error as a check of that law.
#include "paritas/uncertainty/items_needed.h"

#include <algorithm>
#include <cassert>
#include <charconv>
#include <cmath>
#include <limits>
#include <optional>
#include <string>
#include <vector>

#include "base/not_a_number.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

double Median(std::vector<double> values) {
  if (values.empty()) return kNaN;
  std::sort(values.begin(), values.end());
  return PercentileType7(values, 0.5);
}

// ceil(factor x items_now), at least 2 (one item gives no standard error);
// 0 without a factor or items, empty above kMaxItemsPlanned (or infinite).
std::optional<int64_t> ItemsFor(double factor, double items_now) {
  if (std::isnan(factor) || !(items_now > 0.0)) return 0;
  const double product = factor * items_now;
  if (!(product <= static_cast<double>(kMaxItemsPlanned))) return std::nullopt;
  // Rounding in c and the product can lift a whole number by a few units in
  // the last place; the tolerance keeps that from counting one item more.
  const double tolerance = std::max(1e-9, 1e-15 * product);
  return std::max<int64_t>(2, static_cast<int64_t>(std::ceil(product - tolerance)));
}

// The count, or an empty field / "over 10^12" for a count left out.
std::string CountText(const std::optional<int64_t>& count, const char* beyond) {
  return count ? std::to_string(*count) : beyond;
}

// (n/m - 1) of each coverage level for the node, averaged over its headings:
// the variance of a subsample of m of n items is (S^2 / n)(n/m - 1).
std::vector<double> CurveFactors(const SensitivityResult& result, const ClassificationNode& node) {
  std::vector<double> factors;
  for (const CoverageLevel& level : result.coverage) {
    double sum = 0.0;
    int num_priced = 0;
    for (int h : node.headings) {
      const int n = result.heading_num_items[h];
      if (n == 0) continue;
      const int m = std::clamp(static_cast<int>(std::lround(level.coverage * n)), 1, n);
      sum += static_cast<double>(n) / m - 1.0;
      ++num_priced;
    }
    factors.push_back(num_priced > 0 ? sum / num_priced : 0.0);
  }
  return factors;
}

// Least squares through the origin of the curve's variances on the factors:
// the variance at the current n. NaN when no level left items out.
double CurveVariance(const SensitivityResult& result, const std::vector<double>& factors, int n,
                     int r) {
  double num = 0.0, den = 0.0;
  for (size_t k = 0; k < result.coverage.size(); ++k) {
    const double sd = result.coverage[k].log_sd(n, r);
    if (!std::isfinite(sd) || factors[k] <= 0.0) continue;
    num += sd * sd * factors[k];
    den += factors[k] * factors[k];
  }
  return den > 0.0 ? num / den : kNaN;
}

ItemsNeededRow MakeRow(const Survey& survey, const SensitivityResult& result, int n,
                       double target) {
  const ClassificationNode& node = survey.classification.nodes()[n];
  ItemsNeededRow row;
  row.node = n;
  row.is_heading = node.is_leaf;
  row.num_headings = static_cast<int>(node.headings.size());
  double items = 0.0;
  int num_priced = 0;
  for (int h : node.headings) {
    items += result.heading_num_items[h];
    num_priced += result.heading_num_items[h] > 0 ? 1 : 0;
    if (!result.heading_external.empty() && result.heading_external[h]) ++row.num_headings_external;
  }
  row.items_now = num_priced > 0 ? items / num_priced : 0.0;
  const std::vector<double> factors = CurveFactors(result, node);
  std::vector<double> se, curve_se, ratio;
  for (int r = 0; r < survey.num_regions(); ++r) {
    const double s = result.boot_log_se(n, r);
    if (!std::isfinite(s) || s <= 0.0) continue;
    se.push_back(s);
    if (s <= target) ++row.num_regions_at_target;
    const double v = CurveVariance(result, factors, n, r);
    if (std::isfinite(v)) {
      curve_se.push_back(std::sqrt(v));
      ratio.push_back(std::sqrt(v) / s);
    }
  }
  row.num_regions = static_cast<int>(se.size());
  row.log_se_median = Median(se);
  row.log_se_max = se.empty() ? kNaN : *std::max_element(se.begin(), se.end());
  row.curve_log_se_median = Median(curve_se);
  row.curve_ratio_median = Median(ratio);
  row.factor_median = std::pow(row.log_se_median / target, 2);
  row.factor_all = std::pow(row.log_se_max / target, 2);
  row.items_for_median = ItemsFor(row.factor_median, row.items_now);
  row.items_for_all = ItemsFor(row.factor_all, row.items_now);
  return row;
}

std::string Kind(const Survey& survey, const ItemsNeededRow& row) {
  if (row.is_heading) return "heading";
  return survey.classification.nodes()[row.node].parent < 0 ? "root" : "aggregate";
}

void AppendValue(double value, std::string* out) {
  *out += ',';
  AppendShortest(value, out);
}

}  // namespace

std::vector<ItemsNeededRow> ItemsNeeded(const Survey& survey, const SensitivityResult& result,
                                        double target_log_se) {
  assert(target_log_se > 0.0);
  std::vector<ItemsNeededRow> rows;
  if (result.boot_log_se.size() == 0 ||
      static_cast<int>(result.heading_num_items.size()) != survey.num_headings()) {
    return rows;
  }
  const auto& nodes = survey.classification.nodes();
  std::vector<int> order;
  for (int n = 0; n < static_cast<int>(nodes.size()); ++n) {
    if (!nodes[n].is_group && nodes[n].parent < 0) order.push_back(n);
  }
  for (int n = 0; n < static_cast<int>(nodes.size()); ++n) {
    if (!nodes[n].is_group && !nodes[n].is_leaf && nodes[n].depth == 1) order.push_back(n);
  }
  for (int n = 0; n < static_cast<int>(nodes.size()); ++n) {
    // A root that is itself a heading is listed once, as the root.
    if (nodes[n].is_leaf && nodes[n].parent >= 0) order.push_back(n);
  }
  for (int n : order) rows.push_back(MakeRow(survey, result, n, target_log_se));
  return rows;
}

std::string ItemsNeededCsv(const Survey& survey, const std::vector<ItemsNeededRow>& rows,
                           double target_log_se) {
  std::string out =
      "node,kind,num_headings,num_headings_external,items_now,num_regions,log_se_median,log_se_"
      "max,curve_log_se_median,curve_ratio_median,target_log_se,factor_median,factor_all,items_"
      "for_median,items_for_all,num_regions_at_target\n";
  for (const ItemsNeededRow& row : rows) {
    AppendCsvField(survey.classification.nodes()[row.node].code, &out);
    out += ',' + Kind(survey, row);
    out += ',' + std::to_string(row.num_headings) + ',' + std::to_string(row.num_headings_external);
    AppendValue(row.items_now, &out);
    out += ',' + std::to_string(row.num_regions);
    for (double v : {row.log_se_median, row.log_se_max, row.curve_log_se_median,
                     row.curve_ratio_median, target_log_se, row.factor_median, row.factor_all}) {
      AppendValue(v, &out);
    }
    out += ',' + CountText(row.items_for_median, "") + ',' + CountText(row.items_for_all, "") +
           ',' + std::to_string(row.num_regions_at_target) + '\n';
  }
  return out;
}

std::string ItemsNeededSummary(const Survey& survey, const std::vector<ItemsNeededRow>& rows,
                               double target_log_se) {
  if (rows.empty()) return "";
  std::string out = "items per heading for a standard error of ln parity of ";
  // Four places when they show the target as given (0.05 as 0.0500); else
  // its shortest digits, so that 0.99999 is not shown as 1.0000, nor
  // 0.00001 as 0.0000.
  const std::string four_places = FormatFixed(target_log_se, 4);
  double shown = 0.0;  // read back whatever the locale (from_chars, not strtod)
  std::from_chars(four_places.data(), four_places.data() + four_places.size(), shown);
  if (shown == target_log_se) {
    out += four_places;
  } else {
    AppendShortest(target_log_se, &out);
  }
  out += " (our own estimate under the 1/n law; items_needed.csv):\n";
  auto line = [&](const ItemsNeededRow& row) {
    out += "  " + survey.classification.nodes()[row.node].code + ": " +
           FormatFixed(row.items_now, 1) + " items now, se " + FormatFixed(row.log_se_median, 4) +
           " (median region) -> " + CountText(row.items_for_median, "over 10^12") +
           " for the median region, " + CountText(row.items_for_all, "over 10^12") +
           " for every region\n";
  };
  std::vector<const ItemsNeededRow*> headings;
  for (const ItemsNeededRow& row : rows) {
    if (row.is_heading) {
      headings.push_back(&row);
    } else {
      line(row);
    }
  }
  // Largest factor first; headings without a standard error last.
  auto key = [](const ItemsNeededRow* row) {
    return std::isfinite(row->factor_median) ? row->factor_median
                                             : -std::numeric_limits<double>::infinity();
  };
  std::stable_sort(headings.begin(), headings.end(),
                   [&](const auto* a, const auto* b) { return key(a) > key(b); });
  if (!headings.empty()) out += "  headings needing the largest increase:\n";
  for (size_t k = 0; k < std::min<size_t>(3, headings.size()); ++k) {
    out += "  ";
    line(*headings[k]);
  }
  const auto num_beyond = std::count_if(rows.begin(), rows.end(), [](const ItemsNeededRow& row) {
    return !row.items_for_median || !row.items_for_all;
  });
  if (num_beyond > 0) {
    out += "  " + std::to_string(num_beyond) + (num_beyond == 1 ? " node needs" : " nodes need") +
           " over 10^12 items per heading, more than any heading has: items_needed.csv leaves "
           "those counts empty (factor_median and factor_all give the scale)\n";
  }
  return out;
}

}  // namespace paritas
