// Weights are chosen per node from the regions that have a parity there, so
// a region missing from one node never shifts the others.
#include "paritas/aggregation/normalisation.h"

#include <cmath>

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
