// The expanded percentile interval: bootstrap percentiles taken at levels
// widened so that an interval resting on few items covers about as often as
// its nominal level says. A percentile interval is about +-z standard errors,
// while the standard error itself rests on the heading's few items; the
// expanded interval moves the quantile levels out to where a Student t
// interval with the right degrees of freedom would reach.
#ifndef PARITAS_UNCERTAINTY_EXPANDED_INTERVAL_H_
#define PARITAS_UNCERTAINTY_EXPANDED_INTERVAL_H_

#include <string>
#include <vector>

namespace paritas {

// Which bootstrap interval `sensitivity` reports.
//   kExpanded (default): the expanded percentile interval of Hesterberg
//     (2015, "What Teachers Should Know About the Bootstrap: Resampling in
//     the Undergraduate Statistics Curriculum", The American Statistician
//     69(4), 371-386; cited from memory, the paper could not be consulted
//     here): the type-7 percentiles of the replicates at
//       p = Phi(-k t_(nu, (1 + level) / 2))  and  1 - p,
//     with nu the degrees of freedom of the parity's standard error
//     (ExpandedLowerLevel) and k the bootstrap's variance correction (1 for
//     the rescaled bootstrap, whose variance is already unbiased;
//     sqrt(n / (n - 1)) for the plain one).
//   kPercentile: the plain percentile interval, at (1 - level) / 2 and
//     (1 + level) / 2 (Efron and Tibshirani 1993, ch. 13).
enum class IntervalKind { kExpanded, kPercentile };
// "expanded", "percentile".
std::string ToString(IntervalKind kind);
// Case-insensitive; returns false for unknown names.
bool FromString(const std::string& text, IntervalKind* kind);

// Degrees of freedom at and above which the interval is not expanded (the t
// quantile is then within 2e-6 of the normal one).
inline constexpr double kIntervalDfCap = 1e6;

// Returns P(T <= t) for Student's t with `df` > 0 degrees of freedom, through
// the regularized incomplete beta function, P(|T| > |t|) = I_x(df / 2, 1 / 2)
// with x = df / (df + t^2) (Abramowitz and Stegun 1964, Handbook of
// Mathematical Functions, 26.5.27), evaluated by its continued fraction
// (26.5.8) with the modified Lentz method (Press et al. 1992, Numerical
// Recipes in C, 2nd ed., sections 5.2 and 6.4); equation numbers cited from
// memory. df = +inf gives the standard normal, 0.5 erfc(-t / sqrt 2).
double StudentTCdf(double t, double df);

// Returns the p-quantile (0 < p < 1) of Student's t with `df` > 0 degrees of
// freedom (df = +inf: the standard normal), by Newton steps on StudentTCdf
// kept inside a bisection bracket, and for df >= 1,000 by the Cornish-Fisher
// expansion about the normal quantile (Abramowitz and Stegun 1964, 26.7.5,
// to 1 / df^4); within about 1e-13 relative.
double StudentTQuantile(double p, double df);

// Returns the lower quantile level of the expanded percentile interval at
// `level` (0 < level < 1): p = Phi(-scale x t_(df, (1 + level) / 2)), the
// upper level being 1 - p. `df` NaN, <= 0 or >= kIntervalDfCap takes the
// normal quantile in place of t (no t expansion); scale = 1 and no t
// expansion give the plain percentile level (1 - level) / 2 (up to rounding
// of Phi; it is returned exactly then).
double ExpandedLowerLevel(double level, double df, double scale);

// Returns the Welch-Satterthwaite effective degrees of freedom of a sum of
// independent variance estimates (Satterthwaite 1946, "An approximate
// distribution of estimates of variance components", Biometrics Bulletin
// 2(6), 110-114, eq. 7):
//   nu = (sum_j c_j)^2 / sum_j c_j^2 / df_j,
// with c_j = `terms`[j] (a weighted variance a_j v_j) and df_j = `df`[j]
// (+inf for a term known without sampling error in its variance: it adds to
// the numerator only). Terms that are not finite or not above 0 add nothing.
// Returns +inf when every counted term has infinite df, NaN when no term
// counts.
double SatterthwaiteDf(const std::vector<double>& terms, const std::vector<double>& df);

}  // namespace paritas

#endif  // PARITAS_UNCERTAINTY_EXPANDED_INTERVAL_H_
