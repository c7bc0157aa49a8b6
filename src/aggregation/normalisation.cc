// Weights are chosen per node from the regions that have a parity there, so
// a region missing from one node never shifts the others.
#include "paritas/aggregation/normalisation.h"

#include <algorithm>
#include <cmath>
#include <limits>

namespace paritas {

std::string ReferenceWeights(const Reference& reference, int reference_region,
                             const Eigen::VectorXd& log_parity, const Eigen::VectorXd& expenditure,
                             std::vector<double>* weights) {
  const int n = static_cast<int>(log_parity.size());
  weights->assign(n, 0.0);
  double total = 0.0;
  switch (reference.kind) {
    case ReferenceKind::kRegion: {
      const int r = reference_region;
      if (r >= 0 && std::isfinite(log_parity(r))) {
        (*weights)[r] = 1.0;
        return reference.region;
      }
      for (int k = 0; k < n; ++k) (*weights)[k] = std::isfinite(log_parity(k)) ? 1.0 : 0.0;
      return "mean (reference region absent)";
    }
    case ReferenceKind::kWeightedMean:
      for (int k = 0; k < n; ++k) {
        const double e = expenditure(k);
        if (std::isfinite(log_parity(k)) && std::isfinite(e) && e > 0) {
          (*weights)[k] = e;
          total += e;
        }
      }
      if (total > 0) return "weighted-mean";
      for (int k = 0; k < n; ++k) (*weights)[k] = std::isfinite(log_parity(k)) ? 1.0 : 0.0;
      return "mean (no expenditure to weight by)";
    case ReferenceKind::kCountry:
      for (int k = 0; k < n; ++k) {
        const double e = expenditure(k);
        if (std::isfinite(log_parity(k)) && std::isfinite(e) && e > 0) {
          (*weights)[k] = e * std::exp(-log_parity(k));
          total += e;
        }
      }
      if (total > 0) return "country";
      for (int k = 0; k < n; ++k) (*weights)[k] = std::isfinite(log_parity(k)) ? 1.0 : 0.0;
      return "mean (no expenditure to weight by)";
    case ReferenceKind::kMean:
      break;
  }
  for (int k = 0; k < n; ++k) (*weights)[k] = std::isfinite(log_parity(k)) ? 1.0 : 0.0;
  return "mean";
}

void NormaliseLogParities(const std::vector<double>& weights, Eigen::VectorXd* log_parity) {
  double sum = 0.0, total = 0.0;
  for (int r = 0; r < log_parity->size(); ++r) {
    if (!std::isfinite((*log_parity)(r)) || weights[r] <= 0) continue;
    sum += weights[r] * (*log_parity)(r);
    total += weights[r];
  }
  if (total > 0) *log_parity = log_parity->array() - sum / total;
}

}  // namespace paritas

namespace paritas {

std::string ReferenceConvention(const std::string& reference_used) {
  if (reference_used == "country") {
    return "country = 100: total real expenditure over the regions equals total nominal "
           "expenditure, so deflated regional values add up to the national total";
  }
  if (reference_used == "weighted-mean") {
    return "weighted-mean = 100: the expenditure-weighted geometric mean of the regions' "
           "parities is 100 (deflated regional values need not add up to the national total)";
  }
  if (reference_used == "mean") {
    return "mean = 100: the geometric mean of the regions' parities is 100, each region "
           "counting once";
  }
  if (reference_used.rfind("mean (", 0) == 0) {
    return reference_used + " = 100: the geometric mean of the regions' parities is 100";
  }
  return reference_used + " = 100: every parity is relative to region " + reference_used;
}

std::string NormaliseToReference(const Reference& reference, int reference_region,
                                 const Eigen::VectorXd& expenditure, Eigen::VectorXd* log_parity) {
  std::vector<double> weights;
  const std::string used =
      ReferenceWeights(reference, reference_region, *log_parity, expenditure, &weights);
  if (used != "country") {
    NormaliseLogParities(weights, log_parity);
    return used;
  }
  // Shift by the log of the ratio of real to nominal totals; the smallest ln
  // parity is factored out of the sum so no term overflows.
  double nominal = 0.0, low = std::numeric_limits<double>::infinity();
  for (int r = 0; r < log_parity->size(); ++r) {
    if (weights[r] > 0) low = std::min(low, (*log_parity)(r));
  }
  double real = 0.0;
  for (int r = 0; r < log_parity->size(); ++r) {
    if (weights[r] <= 0) continue;
    nominal += expenditure(r);
    real += expenditure(r) * std::exp(-((*log_parity)(r) - low));
  }
  const double shift = std::log(nominal) - (std::log(real) - low);
  *log_parity = log_parity->array() - shift;
  return used;
}

}  // namespace paritas
