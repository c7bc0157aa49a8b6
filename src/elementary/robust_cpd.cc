// Loss derivatives and the MAD scale of the robust CPD fit. Written to match
// statsmodels' robust norms (HuberT) and scale.mad so that the cross-check
// in tests/python/robust_cpd_statsmodels_check.py compares like with like.
#include "elementary/robust_cpd.h"

#include <algorithm>
#include <cmath>
#include <vector>

namespace paritas::internal {

// Phi^-1(3/4), to 17 digits (scipy.stats.norm.ppf(0.75)).
constexpr double kNormalQuartile = 0.67448975019608171;

double TuningConstant(CpdLoss loss) {
  switch (loss) {
    case CpdLoss::kHuber:
      return kHuberTuning;
    case CpdLoss::kCauchy:
      return kCauchyTuning;
    case CpdLoss::kLeastSquares:
      break;
  }
  return 1.0;
}

double RobustWeightFactor(CpdLoss loss, double threshold, double residual) {
  const double size = std::abs(residual);
  switch (loss) {
    case CpdLoss::kHuber:
      return size <= threshold ? 1.0 : threshold / size;
    case CpdLoss::kCauchy: {
      const double u = residual / threshold;
      return 1.0 / (1.0 + u * u);
    }
    case CpdLoss::kLeastSquares:
      break;
  }
  return 1.0;
}

double Psi(CpdLoss loss, double c, double z) {
  switch (loss) {
    case CpdLoss::kHuber:
      return std::max(-c, std::min(c, z));
    case CpdLoss::kCauchy: {
      const double u = z / c;
      return z / (1.0 + u * u);
    }
    case CpdLoss::kLeastSquares:
      break;
  }
  return z;
}

double PsiDerivative(CpdLoss loss, double c, double z) {
  switch (loss) {
    case CpdLoss::kHuber:
      return std::abs(z) <= c ? 1.0 : 0.0;
    case CpdLoss::kCauchy: {
      const double u2 = (z / c) * (z / c);
      return (1.0 - u2) / ((1.0 + u2) * (1.0 + u2));
    }
    case CpdLoss::kLeastSquares:
      break;
  }
  return 1.0;
}

double MadAboutZero(std::span<const double> values) {
  if (values.empty()) return 0.0;
  std::vector<double> size(values.size());
  for (size_t k = 0; k < values.size(); ++k) size[k] = std::abs(values[k]);
  const size_t mid = size.size() / 2;
  std::nth_element(size.begin(), size.begin() + mid, size.end());
  double median = size[mid];
  if (size.size() % 2 == 0) {
    const double below = *std::max_element(size.begin(), size.begin() + mid);
    median = 0.5 * (below + median);
  }
  return median / kNormalQuartile;
}

}  // namespace paritas::internal
