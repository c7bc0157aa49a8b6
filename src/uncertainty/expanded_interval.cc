// Student t quantiles without a statistics library: the CDF through the
// regularized incomplete beta function (continued fraction), inverted by
// Newton steps that never leave a bisection bracket, so a poor step can
// only slow the search, never lose the root.
#include "paritas/uncertainty/expanded_interval.h"

#include <cmath>
#include <limits>

#include "paritas/base/text.h"

namespace paritas {
namespace {

constexpr double kTiny = 1e-300;
// Degrees of freedom from which the t quantile comes from the Cornish-Fisher
// expansion rather than from inverting the CDF.
constexpr double kCornishFisherDf = 1000.0;

// Continued fraction of I_x(a, b) / (x^a (1 - x)^b / (a B(a, b))), modified
// Lentz; converges quickly for x < (a + 1) / (a + b + 2).
double BetaContinuedFraction(double a, double b, double x) {
  double c = 1.0, d = 1.0 - (a + b) * x / (a + 1.0);
  if (std::fabs(d) < kTiny) d = kTiny;
  d = 1.0 / d;
  double h = d;
  for (int m = 1; m <= 100000; ++m) {
    const double m2 = 2.0 * m;
    double aa = m * (b - m) * x / ((a + m2 - 1.0) * (a + m2));
    d = 1.0 + aa * d;
    if (std::fabs(d) < kTiny) d = kTiny;
    c = 1.0 + aa / c;
    if (std::fabs(c) < kTiny) c = kTiny;
    d = 1.0 / d;
    h *= d * c;
    aa = -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1.0));
    d = 1.0 + aa * d;
    if (std::fabs(d) < kTiny) d = kTiny;
    c = 1.0 + aa / c;
    if (std::fabs(c) < kTiny) c = kTiny;
    d = 1.0 / d;
    const double step = d * c;
    h *= step;
    if (std::fabs(step - 1.0) < 1e-15) break;
  }
  return h;
}

// ln Gamma(a + 1/2) - ln Gamma(a). For large a the two lgamma values are
// near a ln a and their difference would lose about log10(a ln a) digits
// (5e-12 in the t CDF at df = 2e5), so there it is taken from Stirling's
// series, ln Gamma(z) = (z - 1/2) ln z - z + ln(2 pi) / 2 + 1/(12 z) -
// 1/(360 z^3) + 1/(1260 z^5) - ... (Abramowitz and Stegun 1964, 6.1.41),
// differenced term by term: the first terms give a ln(1 + 1/(2a)) +
// ln(a) / 2 - 1/2 exactly; the next omitted term, 1/(1680 z^7), is below
// 1e-15 for a >= 50.
double LogGammaHalfStep(double a) {
  if (a < 50.0) return std::lgamma(a + 0.5) - std::lgamma(a);
  const double z = a + 0.5;
  auto tail = [](double v) {
    const double v2 = v * v;
    return 1.0 / (12.0 * v) - 1.0 / (360.0 * v * v2) + 1.0 / (1260.0 * v * v2 * v2);
  };
  return a * std::log1p(0.5 / a) + 0.5 * std::log(a) - 0.5 + tail(z) - tail(a);
}

// Regularized incomplete beta I_x(a, 1/2), 0 <= x <= 1: the only b the t
// distribution needs. ln x and ln(1 - x) are given by the caller, who can
// form them without rounding x first (a ln x with a = 1e5 would magnify
// x's rounding a hundred-thousandfold).
double RegularizedBeta(double a, double x, double log_x, double log_1mx) {
  const double b = 0.5;
  if (x <= 0.0) return 0.0;
  if (x >= 1.0) return 1.0;
  const double log_front = LogGammaHalfStep(a) - std::lgamma(b) + a * log_x + b * log_1mx;
  if (x < (a + 1.0) / (a + b + 2.0)) {
    return std::exp(log_front) * BetaContinuedFraction(a, b, x) / a;
  }
  return 1.0 - std::exp(log_front) * BetaContinuedFraction(b, a, 1.0 - x) / b;
}

double NormalCdf(double x) { return 0.5 * std::erfc(-x / std::sqrt(2.0)); }

// Density of Student's t (the standard normal for df = +inf).
double StudentTDensity(double t, double df) {
  if (std::isinf(df)) return std::exp(-0.5 * t * t) / std::sqrt(2.0 * M_PI);
  return std::exp(std::lgamma(0.5 * (df + 1.0)) - std::lgamma(0.5 * df) -
                  0.5 * (df + 1.0) * std::log1p(t * t / df)) /
         std::sqrt(df * M_PI);
}

}  // namespace

std::string ToString(IntervalKind kind) {
  return kind == IntervalKind::kPercentile ? "percentile" : "expanded";
}

bool FromString(const std::string& text, IntervalKind* kind) {
  const std::string lower = ToLower(Trim(text));
  for (IntervalKind candidate : {IntervalKind::kExpanded, IntervalKind::kPercentile}) {
    if (lower == ToString(candidate)) {
      *kind = candidate;
      return true;
    }
  }
  return false;
}

double StudentTCdf(double t, double df) {
  if (std::isnan(t) || !(df > 0.0)) return std::numeric_limits<double>::quiet_NaN();
  if (std::isinf(df)) return NormalCdf(t);
  // x = df / (df + t^2): ln x = -ln(1 + t^2 / df), ln(1 - x) = ln(t^2) -
  // ln(df + t^2).
  const double t2 = t * t;
  if (t2 == 0.0) return 0.5;
  const double tail = 0.5 * RegularizedBeta(0.5 * df, df / (df + t2), -std::log1p(t2 / df),
                                            std::log(t2) - std::log(df + t2));
  return t > 0.0 ? 1.0 - tail : tail;
}

double StudentTQuantile(double p, double df) {
  if (!(p > 0.0 && p < 1.0) || !(df > 0.0)) return std::numeric_limits<double>::quiet_NaN();
  if (p == 0.5) return 0.0;
  if (std::isfinite(df) && df >= kCornishFisherDf) {
    // The continued fraction loses digits as x = df / (df + t^2) nears 1
    // (5e-12 at df = 7e5); the expansion in 1 / df about the normal
    // quantile z does not (Abramowitz and Stegun 1964, 26.7.5, terms to
    // 1 / df^4; the next is below 1e-15 at df = 1,000).
    const double z = StudentTQuantile(p, std::numeric_limits<double>::infinity());
    const double z2 = z * z, z3 = z2 * z, z5 = z3 * z2, z7 = z5 * z2, z9 = z7 * z2;
    const double g1 = (z3 + z) / 4.0;
    const double g2 = (5.0 * z5 + 16.0 * z3 + 3.0 * z) / 96.0;
    const double g3 = (3.0 * z7 + 19.0 * z5 + 17.0 * z3 - 15.0 * z) / 384.0;
    const double g4 = (79.0 * z9 + 776.0 * z7 + 1482.0 * z5 - 1920.0 * z3 - 945.0 * z) / 92160.0;
    return z + (g1 + (g2 + (g3 + g4 / df) / df) / df) / df;
  }
  // Solve for the upper tail's quantile and mirror: q >= 0.5.
  const double q = p > 0.5 ? p : 1.0 - p;
  double low = 0.0, high = 1.0;
  while (StudentTCdf(high, df) < q && high < 1e300) high *= 2.0;
  double t = 0.5 * (low + high);
  for (int iteration = 0; iteration < 200; ++iteration) {
    const double f = StudentTCdf(t, df) - q;
    if (f == 0.0) break;
    if (f < 0.0) low = t; else high = t;
    const double density = StudentTDensity(t, df);
    double next = density > 0.0 ? t - f / density : 0.5 * (low + high);
    if (!(next > low && next < high)) next = 0.5 * (low + high);
    if (std::fabs(next - t) <= 1e-14 * std::fabs(next)) {
      t = next;
      break;
    }
    t = next;
  }
  return p > 0.5 ? t : -t;
}

double ExpandedLowerLevel(double level, double df, double scale) {
  const bool t_expansion = df > 0.0 && df < kIntervalDfCap;
  if (!t_expansion && scale == 1.0) return 0.5 * (1.0 - level);
  const double quantile = StudentTQuantile(0.5 * (1.0 + level),
                                           t_expansion ? df : std::numeric_limits<double>::infinity());
  return NormalCdf(-scale * quantile);
}

double SatterthwaiteDf(const std::vector<double>& terms, const std::vector<double>& df) {
  double sum = 0.0, denominator = 0.0;
  bool counted = false;
  for (size_t j = 0; j < terms.size(); ++j) {
    if (!std::isfinite(terms[j]) || !(terms[j] > 0.0) || !(df[j] > 0.0)) continue;
    counted = true;
    sum += terms[j];
    if (std::isfinite(df[j])) denominator += terms[j] * terms[j] / df[j];
  }
  if (!counted) return std::numeric_limits<double>::quiet_NaN();
  if (denominator == 0.0) return std::numeric_limits<double>::infinity();
  return sum * sum / denominator;
}

}  // namespace paritas
