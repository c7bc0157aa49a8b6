// Reading regional price indices and moving heading parities by them
// (carry_forward.h). The index file is read whole (one row per region x
// node x period) and every row is checked before any is used.
#include "paritas/use/carry_forward.h"

#include <cmath>
#include <limits>
#include <map>
#include <tuple>

#include "base/magnitude.h"
#include "base/not_a_number.h"
#include "paritas/base/text.h"
#include "use/run_tables.h"

namespace paritas {
namespace {

// One row of the chosen period, by classification node.
struct IndexRow {
  int region = -1;
  int node = -1;
  double index = kNaN;
};

// The index of `region` in `heading` from the most specific node with a row:
// the heading's own, else the nearest aggregate above it.
void Resolve(const Classification& tree, const std::map<std::pair<int, int>, double>& by_node,
             int num_regions, PriceIndexTable* table) {
  const int num_headings = static_cast<int>(tree.headings().size());
  table->index.setConstant(num_regions, num_headings, kNaN);
  table->from_node.setConstant(num_regions, num_headings, -1);
  for (int h = 0; h < num_headings; ++h) {
    for (int r = 0; r < num_regions; ++r) {
      for (int n = tree.headings()[h]; n >= 0; n = tree.nodes()[n].parent) {
        const auto it = by_node.find({r, n});
        if (it == by_node.end()) continue;
        table->index(r, h) = it->second;
        table->from_node(r, h) = n;
        break;
      }
    }
  }
}

// Why a carried parity beyond kCarriedRange stops the run: its figures, and
// where to look.
std::string CarriedOutOfRange(const std::string& region, const std::string& heading, double parity,
                              double benchmark, double index, double country_index) {
  const internal::FigureRange& range = internal::kCarriedRange;
  return "region '" + region + "', heading '" + heading + "': the carried parity " +
         FormatReadable(parity, 2) + " (the benchmark's " + FormatReadable(benchmark, 2) +
         " times the index " + FormatReadable(index, 2) + " over the country's " +
         FormatReadable(country_index, 2) + ") is " +
         (parity > range.largest ? std::string("beyond ") + range.largest_text
                                 : std::string("nearer 0 than ") + range.smallest_text) +
         ", where ratios between regions overflow in the aggregation; check the benchmark's "
         "parities.csv and the units of the index file";
}

}  // namespace

std::string ToString(MissingIndexRule rule) {
  return rule == MissingIndexRule::kCountry ? "country" : "stop";
}

bool FromString(const std::string& text, MissingIndexRule* rule) {
  const std::string lower = ToLower(text);
  if (lower == "stop") {
    *rule = MissingIndexRule::kStop;
    return true;
  }
  if (lower == "country") {
    *rule = MissingIndexRule::kCountry;
    return true;
  }
  return false;
}

std::vector<std::string> MissingIndexRuleNames() { return {"stop", "country"}; }

bool ReadPriceIndices(const std::string& path, const ReadLimits& limits,
                      const Classification& classification,
                      const std::vector<std::string>& regions, const std::string& period,
                      PriceIndexTable* table, std::string* error) {
  *table = PriceIndexTable();
  std::map<std::string, int> region_index;
  for (size_t r = 0; r < regions.size(); ++r) region_index[regions[r]] = static_cast<int>(r);
  // Every row of every period, checked; (region, node, period) -> line.
  std::map<std::tuple<int, int, std::string>, int64_t> seen;
  std::vector<std::pair<std::string, IndexRow>> rows;
  const auto handle = [&](const internal::TableRow& row, std::string* message) {
    const std::string region(row.fields[0]), node(row.fields[1]), when(row.fields[2]);
    const auto r = region_index.find(region);
    if (r == region_index.end()) {
      *message = LocatedMessage(path, row.line, row.columns[0],
                                "region " + QuoteValue(region) + " is not in the benchmark run");
      const std::string nearest = NearestName(region, regions);
      if (!nearest.empty()) *message += "; did you mean '" + nearest + "'?";
      return false;
    }
    const int n = classification.FindNode(node);
    if (n < 0) {
      *message = LocatedMessage(path, row.line, row.columns[1],
                                "node " + QuoteValue(node) +
                                    " is not a basic heading or aggregate of the classification");
      const std::string nearest = NearestName(node, classification.NodeCodes());
      if (!nearest.empty()) *message += "; did you mean '" + nearest + "'?";
      return false;
    }
    if (classification.nodes()[n].is_group) {
      *message = LocatedMessage(path, row.line, row.columns[1],
                                "node " + QuoteValue(node) +
                                    " is an analytic group, not part of the tree; give indices "
                                    "by basic heading or by an aggregate of the tree");
      return false;
    }
    if (when.empty()) {
      *message = LocatedMessage(path, row.line, row.columns[2], "period is empty");
      return false;
    }
    double index = kNaN;
    if (row.fields[3].empty()) {
      *message = LocatedMessage(path, row.line, row.columns[3], "index is empty");
      return false;
    }
    if (!internal::ParseParity(path, row.line, row.columns[3], "index", row.fields[3], &index,
                               message, internal::kInputRange)) {
      return false;
    }
    const auto [at, inserted] = seen.emplace(std::make_tuple(r->second, n, when), row.line);
    if (!inserted) {
      *message = LocatedMessage(path, row.line, row.columns[0],
                                "region " + QuoteValue(region) + ", node " + QuoteValue(node) +
                                    " and period " + QuoteValue(when) + " repeat line " +
                                    std::to_string(at->second));
      return false;
    }
    ++table->num_rows_read;
    if (std::find(table->periods.begin(), table->periods.end(), when) == table->periods.end()) {
      table->periods.push_back(when);
    }
    rows.push_back({when, IndexRow{r->second, n, index}});
    return true;
  };
  if (!internal::ReadTable(path, limits, {"region", "node", "period", "index"},
                           {true, true, true, true}, handle, error)) {
    return false;
  }
  if (table->periods.empty()) {
    *error = path + ": no data rows (only a header)";
    return false;
  }
  if (period.empty() && table->periods.size() > 1) {
    *error = path + " holds " + std::to_string(table->periods.size()) + " periods (" +
             internal::ListedNames(table->periods) + "); choose one with --period";
    return false;
  }
  table->period = period.empty() ? table->periods.front() : period;
  std::map<std::pair<int, int>, double> by_node;
  for (const auto& [when, row] : rows) {
    if (when != table->period) {
      ++table->num_rows_other_period;
      continue;
    }
    ++table->num_rows_used;
    by_node[{row.region, row.node}] = row.index;
  }
  if (table->num_rows_used == 0) {
    *error = path + ": no rows for period " + QuoteValue(table->period) + " (periods found: " +
             internal::ListedNames(table->periods) + ")";
    return false;
  }
  Resolve(classification, by_node, static_cast<int>(regions.size()), table);
  return true;
}

bool CarryHeadingParities(const Eigen::MatrixXd& benchmark_log_parity,
                          const Eigen::MatrixXd& index, const Eigen::MatrixXd& weights,
                          MissingIndexRule rule, const std::vector<std::string>& regions,
                          const std::vector<std::string>& headings, CarriedHeadings* carried,
                          std::string* error) {
  const int num_regions = static_cast<int>(benchmark_log_parity.rows());
  const int num_headings = static_cast<int>(benchmark_log_parity.cols());
  *carried = CarriedHeadings();
  carried->log_parity.setConstant(num_regions, num_headings, kNaN);
  carried->index_used.setConstant(num_regions, num_headings, kNaN);
  carried->country_index.setConstant(num_headings, kNaN);
  // Regions and headings without an index, where the benchmark has a parity.
  std::vector<std::pair<int, int>> missing;
  for (int h = 0; h < num_headings; ++h) {
    for (int r = 0; r < num_regions; ++r) {
      if (std::isfinite(benchmark_log_parity(r, h)) && !std::isfinite(index(r, h))) {
        missing.push_back({r, h});
      }
    }
  }
  if (rule == MissingIndexRule::kStop && !missing.empty()) {
    const auto [r, h] = missing.front();
    *error = "no price index for region '" + regions[r] + "' in heading '" + headings[h] +
             "' (nor for any aggregate above it), where the benchmark has a parity";
    if (missing.size() > 1) {
      *error += "; " + std::to_string(missing.size() - 1) + " more region and heading pair" +
                (missing.size() == 2 ? "" : "s") + " lack one";
    }
    *error += "; give the indices, or --missing-index country to move them as the country does";
    return false;
  }
  for (int h = 0; h < num_headings; ++h) {
    // C_h: weighted geometric mean over the regions with a parity and an
    // index; equal weights when none of them has a positive weight.
    double sum = 0.0, sum_weights = 0.0, sum_equal = 0.0;
    int count = 0;
    for (int r = 0; r < num_regions; ++r) {
      if (!std::isfinite(benchmark_log_parity(r, h)) || !std::isfinite(index(r, h))) continue;
      const double w = weights(r, h);
      const double log_index = std::log(index(r, h));
      if (std::isfinite(w) && w > 0) {
        sum += w * log_index;
        sum_weights += w;
      }
      sum_equal += log_index;
      ++count;
    }
    if (count == 0) {
      bool any = false;
      for (int r = 0; r < num_regions; ++r) any = any || std::isfinite(benchmark_log_parity(r, h));
      if (!any) continue;  // nothing to carry in this heading
      *error = "no region has a price index for heading '" + headings[h] +
               "' (nor for any aggregate above it), so the country's movement there is unknown";
      return false;
    }
    const double log_country = sum_weights > 0 ? sum / sum_weights : sum_equal / count;
    carried->country_index(h) = std::exp(log_country);
    for (int r = 0; r < num_regions; ++r) {
      if (!std::isfinite(benchmark_log_parity(r, h))) continue;
      const bool has_index = std::isfinite(index(r, h));
      if (!has_index) carried->filled_by_rule.push_back({r, h});
      const double log_index = has_index ? std::log(index(r, h)) : log_country;
      carried->index_used(r, h) = has_index ? index(r, h) : carried->country_index(h);
      carried->log_parity(r, h) = benchmark_log_parity(r, h) + log_index - log_country;
      const double parity = std::exp(carried->log_parity(r, h));
      if (!internal::WithinRange(parity, internal::kCarriedRange)) {
        *error = CarriedOutOfRange(regions[r], headings[h], parity, std::exp(benchmark_log_parity(r, h)),
                                   carried->index_used(r, h), carried->country_index(h));
        return false;
      }
    }
  }
  return true;
}

}  // namespace paritas
