// The residual scale is robust (median absolute residual) so that the gross
// errors being looked for do not inflate the yardstick that measures them.
#include "paritas/uncertainty/outliers.h"

#include <algorithm>
#include <cmath>

#include "paritas/base/csv.h"
#include "paritas/output/output_writers.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

// Residual ln p - fitted of every cell of heading h, in cell order.
Eigen::VectorXd HeadingResiduals(const Survey& survey, const HeadingParities& heading,
                                 Eigen::VectorXd* fitted) {
  const HeadingRange& range = survey.heading_range[heading.heading];
  const int64_t n = range.num_cells();
  if (heading.cell_residual.size() == n && heading.cell_fitted.size() == n) {
    *fitted = heading.cell_fitted;
    return heading.cell_residual;
  }
  Eigen::VectorXd item_sum = Eigen::VectorXd::Zero(range.num_items());
  Eigen::VectorXd item_count = Eigen::VectorXd::Zero(range.num_items());
  for (int64_t k = 0; k < n; ++k) {
    const int64_t c = range.cell_begin + k;
    const int i = survey.cells.item[c] - range.item_begin;
    item_sum(i) += survey.cells.log_price[c] - heading.log_parity(survey.cells.region[c]);
    item_count(i) += 1.0;
  }
  fitted->resize(n);
  Eigen::VectorXd residual(n);
  for (int64_t k = 0; k < n; ++k) {
    const int64_t c = range.cell_begin + k;
    const int i = survey.cells.item[c] - range.item_begin;
    (*fitted)(k) = heading.log_parity(survey.cells.region[c]) + item_sum(i) / item_count(i);
    residual(k) = survey.cells.log_price[c] - (*fitted)(k);
  }
  return residual;
}

double RobustScale(const Eigen::VectorXd& residual) {
  std::vector<double> magnitude(residual.size());
  for (int64_t k = 0; k < residual.size(); ++k) magnitude[k] = std::abs(residual(k));
  if (magnitude.empty()) return 0.0;
  const size_t mid = magnitude.size() / 2;
  std::nth_element(magnitude.begin(), magnitude.begin() + mid, magnitude.end());
  double median = magnitude[mid];
  if (magnitude.size() % 2 == 0) {
    median = 0.5 * (median + *std::max_element(magnitude.begin(), magnitude.begin() + mid));
  }
  return 1.4826 * median;
}

}  // namespace

bool OutlierOptions::IsValid(std::string* error) const {
  if (!(threshold > 0) || !std::isfinite(threshold)) {
    *error = "outlier threshold must be a positive number";
    return false;
  }
  return true;
}

std::string ToString(OutlierKind kind) {
  switch (kind) {
    case OutlierKind::kCell:
      return "cell";
    case OutlierKind::kLowestQuote:
      return "lowest_quote";
    case OutlierKind::kHighestQuote:
      return "highest_quote";
  }
  return "?";
}

OutlierReport FindOutliers(const Survey& survey, const ParityResult& result,
                           const OutlierOptions& options) {
  OutlierReport report;
  const int num_headings = survey.num_headings();
  report.num_flagged_cells.assign(num_headings, 0);
  report.residual_scale.assign(num_headings, std::nan(""));
  // Headings are independent: each fills its own lists, joined in heading
  // order afterwards, so the report is the same for any number of threads.
  const int num_scanned = std::min(num_headings, static_cast<int>(result.headings.size()));
  std::vector<std::vector<Outlier>> outliers_of(num_scanned);
  std::vector<std::vector<Dispersion>> dispersion_of(num_scanned);
#pragma omp parallel for schedule(dynamic, 1)
  for (int h = 0; h < num_scanned; ++h) {
    std::vector<Outlier>& heading_outliers = outliers_of[h];
    const HeadingParities& heading = result.headings[h];
    const HeadingRange& range = survey.heading_range[h];
    if (range.num_cells() == 0 || !heading.identified) continue;
    Eigen::VectorXd fitted;
    const Eigen::VectorXd residual = HeadingResiduals(survey, heading, &fitted);
    const double scale = RobustScale(residual);
    report.residual_scale[h] = scale;
    // A single quote also varies around its cell mean: its yardstick adds the
    // typical within-cell spread (median sd of log quotes over cells with
    // several quotes) to the cell scale.
    std::vector<double> within;
    for (int64_t c = range.cell_begin; c < range.cell_end; ++c) {
      if (survey.cells.num_quotes[c] > 1) within.push_back(survey.cells.log_sd[c]);
    }
    double within_sd = 0.0;
    if (!within.empty()) {
      std::nth_element(within.begin(), within.begin() + within.size() / 2, within.end());
      within_sd = within[within.size() / 2];
    }
    const double quote_scale = std::sqrt(scale * scale + within_sd * within_sd);
    std::vector<Dispersion> rows(survey.num_regions());
    for (int64_t k = 0; k < range.num_cells(); ++k) {
      const int64_t c = range.cell_begin + k;
      const int r = survey.cells.region[c];
      Dispersion& d = rows[r];
      d.num_items += 1;
      d.rms_log_residual += residual(k) * residual(k);
      d.max_abs_log_residual = std::max(d.max_abs_log_residual, std::abs(residual(k)));
      if (!(scale > 0)) continue;
      auto flag = [&](OutlierKind kind, double log_observed) {
        const double z = (log_observed - fitted(k)) / (kind == OutlierKind::kCell ? scale : quote_scale);
        if (!(std::abs(z) > options.threshold)) return false;
        Outlier o;
        o.kind = kind;
        o.heading = h;
        o.region = r;
        o.item = survey.cells.item[c];
        o.observed = std::exp(log_observed);
        o.predicted = std::exp(fitted(k));
        o.standardised_residual = z;
        o.num_quotes = survey.cells.num_quotes[c];
        heading_outliers.push_back(o);
        return true;
      };
      if (flag(OutlierKind::kCell, survey.cells.log_price[c])) {
        ++d.num_flagged;
        ++report.num_flagged_cells[h];
      } else if (survey.cells.num_quotes[c] > 1) {
        // A bad quote among good ones may leave the cell mean unflagged; the
        // extremes of the cell's quotes show it.
        flag(OutlierKind::kLowestQuote, survey.cells.log_min[c]);
        flag(OutlierKind::kHighestQuote, survey.cells.log_max[c]);
      }
    }
    for (int r = 0; r < survey.num_regions(); ++r) {
      Dispersion& d = rows[r];
      if (d.num_items == 0) continue;
      d.heading = h;
      d.region = r;
      d.rms_log_residual = std::sqrt(d.rms_log_residual / d.num_items);
      dispersion_of[h].push_back(d);
    }
  }
  for (int h = 0; h < num_scanned; ++h) {
    report.outliers.insert(report.outliers.end(), outliers_of[h].begin(), outliers_of[h].end());
    report.dispersion.insert(report.dispersion.end(), dispersion_of[h].begin(), dispersion_of[h].end());
  }
  std::stable_sort(report.outliers.begin(), report.outliers.end(), [](const Outlier& a, const Outlier& b) {
    return std::abs(a.standardised_residual) > std::abs(b.standardised_residual);
  });
  return report;
}

std::string OutliersCsv(const Survey& survey, const OutlierReport& report) {
  std::string out = "heading,region,item,kind,observed,predicted,ratio,standardised_residual,num_quotes\n";
  for (const Outlier& o : report.outliers) {
    AppendCsvField(survey.heading_codes[o.heading], &out);
    out += ',';
    AppendCsvField(survey.regions.Code(o.region), &out);
    out += ',';
    AppendCsvField(survey.items.Code(o.item), &out);
    out += ',' + ToString(o.kind) + ',';
    AppendShortest(o.observed, &out);
    out += ',';
    AppendShortest(o.predicted, &out);
    out += ',';
    AppendShortest(o.observed / o.predicted, &out);
    out += ',';
    AppendShortest(o.standardised_residual, &out);
    out += ',' + std::to_string(o.num_quotes) + '\n';
  }
  return out;
}

std::string DispersionCsv(const Survey& survey, const OutlierReport& report) {
  std::string out = "heading,region,num_items,rms_log_residual,max_abs_log_residual,num_flagged\n";
  for (const Dispersion& d : report.dispersion) {
    AppendCsvField(survey.heading_codes[d.heading], &out);
    out += ',';
    AppendCsvField(survey.regions.Code(d.region), &out);
    out += ',' + std::to_string(d.num_items) + ',';
    AppendShortest(d.rms_log_residual, &out);
    out += ',';
    AppendShortest(d.max_abs_log_residual, &out);
    out += ',' + std::to_string(d.num_flagged) + '\n';
  }
  return out;
}

}  // namespace paritas
