// The CSV files under sensitivity/ and the terminal table: one row per node
// and region, numbers through AppendFixed so the text is the same on every
// platform and locale.
#include <algorithm>
#include <bit>
#include <cmath>
#include <cstdint>
#include <limits>
#include <string>
#include <vector>

#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/output/output_writers.h"
#include "paritas/uncertainty/sensitivity.h"

namespace paritas {
namespace {

void AppendNodeRegion(const Survey& survey, int n, int r, std::string* out) {
  AppendCsvField(survey.classification.nodes()[n].code, out);
  *out += ',';
  AppendCsvField(survey.regions.Code(r), out);
}

// Every number in the shortest form that reads back to the same double.
void AppendValue(double value, std::string* out) {
  *out += ',';
  AppendShortest(value, out);
}

void AppendCount(int64_t value, std::string* out) {
  *out += ',';
  *out += std::to_string(value);
}

// Appends `value` as `bytes` little-endian bytes, whatever the host order.
void AppendLittleEndian(uint64_t value, int bytes, std::string* out) {
  for (int k = 0; k < bytes; ++k) out->push_back(static_cast<char>((value >> (8 * k)) & 0xFF));
}

}  // namespace

std::string ReplicatesBinary(const SensitivityResult& result) {
  const int64_t num_b = result.boot_num_replicates_kept;
  if (num_b == 0 || result.boot_log_parity.empty()) return "";
  const int64_t num_nodes = result.parity.rows(), num_regions = result.parity.cols();
  std::string out = "PRTSREP1";
  out.reserve(24 + 8 * result.boot_log_parity.size());
  AppendLittleEndian(static_cast<uint64_t>(num_nodes), 4, &out);
  AppendLittleEndian(static_cast<uint64_t>(num_regions), 4, &out);
  AppendLittleEndian(static_cast<uint64_t>(num_b), 4, &out);
  AppendLittleEndian(0, 4, &out);
  for (double value : result.boot_log_parity) {
    // One NaN pattern for "no parity", so equal runs give equal bytes.
    const double written = std::isfinite(value) ? value : std::numeric_limits<double>::quiet_NaN();
    AppendLittleEndian(std::bit_cast<uint64_t>(written), 8, &out);
  }
  return out;
}

std::string ReplicatesKeyCsv(const Survey& survey) {
  std::string out = "kind,index,code\n";
  const auto& nodes = survey.classification.nodes();
  for (size_t n = 0; n < nodes.size(); ++n) {
    out += "node," + std::to_string(n) + ',';
    AppendCsvField(nodes[n].code, &out);
    out += '\n';
  }
  for (int r = 0; r < survey.num_regions(); ++r) {
    out += "region," + std::to_string(r) + ',';
    AppendCsvField(survey.regions.Code(r), &out);
    out += '\n';
  }
  return out;
}

std::string BootstrapCsv(const Survey& survey, const SensitivityResult& result) {
  std::string out =
      "node,region,parity,median,lower,upper,log_se,rank_low,rank_high,num_replicates,interval_df,"
      "interval_scale\n";
  if (result.boot_median.size() == 0) return out;
  for (Eigen::Index n = 0; n < result.parity.rows(); ++n) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      AppendNodeRegion(survey, static_cast<int>(n), r, &out);
      AppendValue(result.parity(n, r), &out);
      AppendValue(result.boot_median(n, r), &out);
      AppendValue(result.boot_lower(n, r), &out);
      AppendValue(result.boot_upper(n, r), &out);
      AppendValue(result.boot_log_se(n, r), &out);
      out += ',';
      if (result.boot_rank_low(n, r) > 0) out += std::to_string(result.boot_rank_low(n, r));
      out += ',';
      if (result.boot_rank_high(n, r) > 0) out += std::to_string(result.boot_rank_high(n, r));
      AppendCount(result.boot_num_replicates(n, r), &out);
      AppendValue(result.boot_interval_df(n, r), &out);
      AppendValue(result.boot_interval_scale(n, r), &out);
      out += '\n';
    }
  }
  return out;
}

std::string LeaveOneOutCsv(const Survey& survey, const SensitivityResult& result) {
  std::string out =
      "node,region,parity,jackknife_log_se,item_log_change,item,num_items_lost,heading_log_change,"
      "heading\n";
  if (result.jackknife_log_se.size() == 0) return out;
  for (Eigen::Index n = 0; n < result.parity.rows(); ++n) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      AppendNodeRegion(survey, static_cast<int>(n), r, &out);
      AppendValue(result.parity(n, r), &out);
      AppendValue(result.jackknife_log_se(n, r), &out);
      AppendValue(result.loo_item_log_change(n, r), &out);
      out += ',';
      if (result.loo_item(n, r) >= 0)
        AppendCsvField(survey.items.Code(result.loo_item(n, r)), &out);
      AppendCount(result.loo_num_items_lost(n, r), &out);
      AppendValue(result.loo_heading_log_change(n, r), &out);
      out += ',';
      if (result.loo_heading(n, r) >= 0)
        AppendCsvField(survey.heading_codes[result.loo_heading(n, r)], &out);
      out += '\n';
    }
  }
  return out;
}

std::string CoverageCurveCsv(const Survey& survey, const SensitivityResult& result) {
  std::string out =
      "node,coverage,repetitions,region,log_sd,median_abs_log_change,max_abs_log_change,num_"
      "missing\n";
  for (Eigen::Index n = 0; n < result.parity.rows(); ++n) {
    for (const CoverageLevel& level : result.coverage) {
      for (int r = 0; r < survey.num_regions(); ++r) {
        AppendCsvField(survey.classification.nodes()[n].code, &out);
        // The coverage is a setting (a percentage label), not a result.
        out += ',';
        AppendFixed(100.0 * level.coverage, 2, &out);
        AppendCount(level.num_repetitions, &out);
        out += ',';
        AppendCsvField(survey.regions.Code(r), &out);
        AppendValue(level.log_sd(n, r), &out);
        AppendValue(level.median_abs_log_change(n, r), &out);
        AppendValue(level.max_abs_log_change(n, r), &out);
        AppendCount(level.num_missing(n, r), &out);
        out += '\n';
      }
    }
  }
  return out;
}

std::string MethodSpreadCsv(const Survey& survey, const SensitivityResult& result) {
  std::string out = "node,region";
  for (const MethodRun& run : result.methods) {
    out += ',';
    AppendCsvField(run.name, &out);
  }
  out += ",spread\n";
  if (result.methods.empty()) return out;
  for (Eigen::Index n = 0; n < result.parity.rows(); ++n) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      AppendNodeRegion(survey, static_cast<int>(n), r, &out);
      for (const MethodRun& run : result.methods)
        AppendValue(run.parity(n, r), &out);
      AppendValue(result.method_log_spread(n, r), &out);
      out += '\n';
    }
  }
  return out;
}

std::string SensitivityTable(const Survey& survey, const SensitivityResult& result,
                             const SensitivityOptions& options) {
  if (result.parity.rows() == 0) return "";
  const int n =
      options.node.empty() ? 0 : std::max(0, survey.classification.FindNode(options.node));
  auto pad = [](const std::string& text, size_t width, bool right) {
    if (text.size() >= width) return text;
    return right ? std::string(width - text.size(), ' ') + text
                 : text + std::string(width - text.size(), ' ');
  };
  const bool boot = result.boot_median.size() > 0;
  const bool loo = result.jackknife_log_se.size() > 0;
  const bool methods = result.method_log_spread.size() > 0;
  size_t width = 6;
  for (int r = 0; r < survey.num_regions(); ++r)
    width = std::max(width, survey.regions.Code(r).size());
  std::string out = "  " + pad("region", width, false) + pad("parity", 10, true);
  const std::string level = FormatShareAsPercent(options.level) + " % interval";
  if (boot) out += pad(level, 20, true) + pad("ranks", 9, true) + pad("boot se", 9, true);
  if (loo)
    out += pad("jk se", 9, true) + pad("largest change", 16, true) + "  " + pad("cause", 18, false);
  if (methods) out += pad("method spread", 15, true);
  out += "\n";
  std::vector<int> order;
  for (int r = 0; r < survey.num_regions(); ++r) {
    if (std::isfinite(result.parity(n, r))) order.push_back(r);
  }
  std::stable_sort(order.begin(), order.end(),
                   [&](int a, int b) { return result.parity(n, a) > result.parity(n, b); });
  for (int r : order) {
    out += "  " + pad(std::string(survey.regions.Code(r)), width, false) +
           pad(FormatFixed(result.parity(n, r), 2), 10, true);
    if (boot) {
      const std::string interval = std::isfinite(result.boot_lower(n, r))
                                       ? FormatFixed(result.boot_lower(n, r), 2) + " - " +
                                             FormatFixed(result.boot_upper(n, r), 2)
                                       : "-";
      const std::string ranks = result.boot_rank_low(n, r) > 0
                                    ? std::to_string(result.boot_rank_low(n, r)) + "-" +
                                          std::to_string(result.boot_rank_high(n, r))
                                    : "-";
      out += pad(interval, 20, true) + pad(ranks, 9, true) +
             pad(FormatFixed(result.boot_log_se(n, r), 4), 9, true);
    }
    if (loo) {
      const double item = result.loo_item_log_change(n, r),
                   heading = result.loo_heading_log_change(n, r);
      std::string change = "-", cause;
      const bool use_heading = std::isfinite(heading) && !(std::abs(item) >= std::abs(heading));
      if (use_heading) {
        change = FormatFixed(100.0 * heading, 2) + " %";
        cause = "heading " + survey.heading_codes[result.loo_heading(n, r)];
      } else if (std::isfinite(item)) {
        change = FormatFixed(100.0 * item, 2) + " %";
        cause = "item " + std::string(survey.items.Code(result.loo_item(n, r)));
      }
      out += pad(FormatFixed(result.jackknife_log_se(n, r), 4), 9, true) + pad(change, 16, true) +
             "  " + pad(cause, 18, false);
    }
    if (methods)
      out += pad(FormatFixed(100.0 * result.method_log_spread(n, r), 2) + " %", 15, true);
    out += "\n";
  }
  return out;
}

}  // namespace paritas
