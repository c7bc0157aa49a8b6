// Screening of cell prices against the fitted parities: which cells (and
// which extreme quotes within a cell) are far from what the model predicts,
// and how dispersed the log price ratios are per heading and region.
#ifndef PARITAS_UNCERTAINTY_OUTLIERS_H_
#define PARITAS_UNCERTAINTY_OUTLIERS_H_

#include <cstdint>
#include <string>
#include <vector>

#include "paritas/compute/compute.h"
#include "paritas/survey/survey.h"

namespace paritas {

struct OutlierOptions {
  // A cell or quote is flagged when |standardised residual| exceeds this.
  // 3.5 (default) follows Iglewicz and Hoaglin (1993), "How to Detect and
  // Handle Outliers", who recommend flagging modified z-scores (residual /
  // (1.4826 x median absolute residual)) above 3.5.
  double threshold = 3.5;

  bool IsValid(std::string* error) const;
};

enum class OutlierKind { kCell, kLowestQuote, kHighestQuote };
std::string ToString(OutlierKind kind);

struct Outlier {
  OutlierKind kind = OutlierKind::kCell;
  int heading = -1;
  int region = -1;
  int item = -1;
  // Observed price (cell geometric mean, or the quote) and the price the
  // model predicts, exp(region effect + item effect); currency units.
  double observed = 0.0;
  double predicted = 0.0;
  // Log residual over the heading's robust scale (1.4826 x median |residual|
  // of the cells; for a quote, combined with the median within-cell sd).
  double standardised_residual = 0.0;
  int num_quotes = 0;
};

// Dispersion of one region's log price ratios against the fitted parities in
// one heading.
struct Dispersion {
  int heading = -1;
  int region = -1;
  int num_items = 0;
  double rms_log_residual = 0.0;
  double max_abs_log_residual = 0.0;
  int num_flagged = 0;
};

struct OutlierReport {
  // Flagged cells and quotes, worst (largest |standardised residual|) first.
  std::vector<Outlier> outliers;
  std::vector<Dispersion> dispersion;  // heading-major, regions in survey order
  // Per heading: flagged cells, and the robust residual scale (log points).
  std::vector<int> num_flagged_cells;
  std::vector<double> residual_scale;
};

// Screens every heading with parities. Residuals are the CPD fit's where the
// method has one, otherwise ln p - ln P_r - b_i with b_i the mean over the
// item's cells of ln p - ln P_r.
OutlierReport FindOutliers(const Survey& survey, const ParityResult& result,
                           const OutlierOptions& options);

// outliers.csv: heading,region,item,kind,observed,predicted,ratio,
// standardised_residual,num_quotes (ratio = observed / predicted).
std::string OutliersCsv(const Survey& survey, const OutlierReport& report);
// dispersion.csv: heading,region,num_items,rms_log_residual,
// max_abs_log_residual,num_flagged.
std::string DispersionCsv(const Survey& survey, const OutlierReport& report);

}  // namespace paritas

#endif  // PARITAS_UNCERTAINTY_OUTLIERS_H_
