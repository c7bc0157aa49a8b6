// Bilateral price index formulas between two regions, a and b.
//
// Every function compares region b with region a ("the cost in b of what
// costs 1 in a") over the entries given; callers pass only matched entries
// (both prices present). Prices must be positive; quantities and
// expenditures non-negative. The formulas follow the ILO/IMF/OECD/UNECE/
// Eurostat/World Bank Consumer Price Index Manual (2004), chapters 15-17.
#ifndef PARITAS_INDEX_FORMULAS_H_
#define PARITAS_INDEX_FORMULAS_H_

#include <span>

namespace paritas {

// Jevons: geometric mean of the price relatives p_b / p_a. Returns NaN for
// empty input.
double Jevons(std::span<const double> price_a, std::span<const double> price_b);

// Dutot: ratio of arithmetic mean prices, mean(p_b) / mean(p_a).
double Dutot(std::span<const double> price_a, std::span<const double> price_b);

// Carli: arithmetic mean of the price relatives p_b / p_a.
double Carli(std::span<const double> price_a, std::span<const double> price_b);

// Laspeyres: sum(p_b q_a) / sum(p_a q_a), quantities of region a.
double Laspeyres(std::span<const double> price_a, std::span<const double> price_b,
                 std::span<const double> quantity_a);

// Paasche: sum(p_b q_b) / sum(p_a q_b), quantities of region b.
double Paasche(std::span<const double> price_a, std::span<const double> price_b,
               std::span<const double> quantity_b);

// Fisher: geometric mean of Laspeyres and Paasche.
double Fisher(std::span<const double> price_a, std::span<const double> price_b,
              std::span<const double> quantity_a, std::span<const double> quantity_b);

// Törnqvist: exp(sum ½ (s_a + s_b) ln(p_b / p_a)), with s the expenditure
// shares p q / sum(p q) of each region over the entries given.
double Tornqvist(std::span<const double> price_a, std::span<const double> price_b,
                 std::span<const double> quantity_a, std::span<const double> quantity_b);

// Walsh: sum(p_b sqrt(q_a q_b)) / sum(p_a sqrt(q_a q_b)).
double Walsh(std::span<const double> price_a, std::span<const double> price_b,
             std::span<const double> quantity_a, std::span<const double> quantity_b);

// Additive contributions of each entry to the log Törnqvist index:
// c_i = ½ (s_ai + s_bi) ln(p_bi / p_ai); they sum to ln Tornqvist exactly.
void TornqvistLogContributions(std::span<const double> price_a, std::span<const double> price_b,
                               std::span<const double> quantity_a,
                               std::span<const double> quantity_b, std::span<double> contribution);

// Additive contributions of each entry to the Fisher index minus one, after
// Reinsdorf, Diewert and Ehemann (2002), "Additive decompositions for Fisher,
// Törnqvist and geometric mean indexes", Journal of Economic and Social
// Measurement 28: c_i = w_i (p_bi/p_ai - 1), with
// w_i = (p_ai q_ai / V_a + F p_ai q_bi / V_b') / (1 + F) normalised weights;
// they sum to Fisher - 1 exactly.
void FisherContributions(std::span<const double> price_a, std::span<const double> price_b,
                         std::span<const double> quantity_a, std::span<const double> quantity_b,
                         std::span<double> contribution);

}  // namespace paritas

#endif  // PARITAS_INDEX_FORMULAS_H_
