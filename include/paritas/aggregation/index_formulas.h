// Bilateral price index formulas between two regions, a and b.
//
// Plain functions over spans of matched entries: the caller selects the
// entries both regions priced, so each formula is the textbook one and the
// all-pairs code (bilateral_matrix.h) can be checked against it entry by entry.
//
// Every function compares region b with region a ("the cost in b of what
// costs 1 in a") over the entries given. All spans of one call must have the
// same length (asserted: a mismatch is a programmer error). Prices must be
// positive and finite; quantities non-negative. An empty input returns NaN;
// a zero denominator gives NaN or infinity as IEEE arithmetic does. The
// formulas follow the ILO/IMF/OECD/UNECE/Eurostat/World Bank Consumer Price
// Index Manual: Theory and Practice (2004), chapters 15-17 (hereafter "CPI
// Manual 2004"), with time periods 0 and 1 read as regions a and b.
#ifndef PARITAS_AGGREGATION_INDEX_FORMULAS_H_
#define PARITAS_AGGREGATION_INDEX_FORMULAS_H_

#include <span>

namespace paritas {

// Returns the Jevons index: the geometric mean of the price relatives,
// exp(mean_i ln(p_bi / p_ai)). Unweighted; NaN for empty input.
double Jevons(std::span<const double> price_a, std::span<const double> price_b);

// Returns the Dutot index: the ratio of arithmetic mean prices,
// mean(p_b) / mean(p_a). Unweighted; NaN for empty input.
double Dutot(std::span<const double> price_a, std::span<const double> price_b);

// Returns the Carli index: the arithmetic mean of the price relatives,
// mean_i(p_bi / p_ai). Unweighted; NaN for empty input.
double Carli(std::span<const double> price_a, std::span<const double> price_b);

// Returns the Laspeyres index with the quantities of region a:
// sum(p_b q_a) / sum(p_a q_a). NaN for empty input.
double Laspeyres(std::span<const double> price_a, std::span<const double> price_b,
                 std::span<const double> quantity_a);

// Returns the Paasche index with the quantities of region b:
// sum(p_b q_b) / sum(p_a q_b). NaN for empty input.
double Paasche(std::span<const double> price_a, std::span<const double> price_b,
               std::span<const double> quantity_b);

// Returns the Fisher ideal index, sqrt(Laspeyres * Paasche). It passes the
// time (here: region) reversal test, F(a, b) F(b, a) = 1, and the product
// test: Fisher price index times Fisher quantity index (the same function
// with prices and quantities swapped) equals sum(p_b q_b) / sum(p_a q_a).
// NaN for empty input.
double Fisher(std::span<const double> price_a, std::span<const double> price_b,
              std::span<const double> quantity_a, std::span<const double> quantity_b);

// Returns the Törnqvist index, exp(sum_i ½ (s_ai + s_bi) ln(p_bi / p_ai)),
// with s_ri = p_ri q_ri / sum_j p_rj q_rj the expenditure share of entry i in
// region r over the entries given (so shares are renormalised to the matched
// set). Equals exp of the sum of TornqvistLogContributions. NaN for empty
// input.
double Tornqvist(std::span<const double> price_a, std::span<const double> price_b,
                 std::span<const double> quantity_a, std::span<const double> quantity_b);

// Returns the Walsh index, sum(p_b sqrt(q_a q_b)) / sum(p_a sqrt(q_a q_b)):
// a fixed-basket index on the geometric mean quantities. NaN for empty input.
double Walsh(std::span<const double> price_a, std::span<const double> price_b,
             std::span<const double> quantity_a, std::span<const double> quantity_b);

// Writes into `contribution` (same length as the inputs) the additive
// contribution of each entry to the log Törnqvist index,
//   c_i = ½ (s_ai + s_bi) ln(p_bi / p_ai),
// with the shares s of Tornqvist(). They sum to ln Tornqvist(...): the
// identity is exact, and Tornqvist() sums these very terms, so the two agree
// to rounding in the last place.
void TornqvistLogContributions(std::span<const double> price_a, std::span<const double> price_b,
                               std::span<const double> quantity_a,
                               std::span<const double> quantity_b, std::span<double> contribution);

// Writes into `contribution` (same length as the inputs) the additive
// contribution of each entry to Fisher(...) - 1, in the decomposition of
// Reinsdorf, Diewert and Ehemann (2002), "Additive decompositions for Fisher,
// Törnqvist and geometric mean indexes", Journal of Economic and Social
// Measurement 28, which rests on Van IJzeren's (1987) observation that the
// Fisher index is a fixed-basket index on the basket
//   q̄_i = q_ai + q_bi / Q_F,
// where Q_F = sqrt((sum p_a q_b / sum p_a q_a) (sum p_b q_b / sum p_b q_a))
// is the Fisher quantity index. Hence, with r_i = p_bi / p_ai,
//   c_i = w_i (r_i - 1),   w_i = p_ai q̄_i / sum_j p_aj q̄_j,
// the weights sum to 1 and sum_i c_i = F - 1 exactly. In share form the same
// weight reads w_i = (s_ai + F s_bi / r_i) / (1 + F sum_j s_bj / r_j) with
// s_r the expenditure shares of Tornqvist() and F the Fisher price index.
// (Citations recalled from memory. The identity sum p_b q̄ / sum p_a q̄ = F
// follows by direct algebra from the definitions of Laspeyres, Paasche and
// Q_F; the tests check it, and the share form, numerically.)
void FisherContributions(std::span<const double> price_a, std::span<const double> price_b,
                         std::span<const double> quantity_a, std::span<const double> quantity_b,
                         std::span<double> contribution);

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_INDEX_FORMULAS_H_
