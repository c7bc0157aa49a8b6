// All-pairs bilateral indices as matrix products.
//
// A node of the classification (or a basic heading) gives region x column
// arrays with a presence mask; every pairwise sum over matched columns is a
// product of masked arrays, so no loop runs over pairs and columns together.
#ifndef PARITAS_BILATERAL_MATRIX_H_
#define PARITAS_BILATERAL_MATRIX_H_

#include <Eigen/Core>

namespace paritas {

// Region x region matrices of bilateral indices. Entry (a, b) compares b with
// a; NaN where the pair has no matched column.
struct BilateralMatrices {
  Eigen::MatrixXd laspeyres;
  Eigen::MatrixXd paasche;
  Eigen::MatrixXd fisher;
  Eigen::MatrixXd tornqvist;
  // Number of matched columns per pair (symmetric; diagonal = own count).
  Eigen::MatrixXi num_matched;
};

// Computes Laspeyres, Paasche, Fisher and Törnqvist between every pair of
// regions. `price` and `expenditure` are regions x headings; a heading counts
// for a pair when both regions have price > 0 and expenditure > 0 there
// (entries that fail this are ignored whatever their value). Quantities are
// expenditure / price; shares are renormalised over the matched headings.
BilateralMatrices AllPairsWeighted(const Eigen::MatrixXd& price,
                                   const Eigen::MatrixXd& expenditure);

// Computes the Jevons index between every pair of regions: entry (a, b) is
// exp(mean over matched items of ln p_b - ln p_a). `log_price` is
// regions x items, `present` the mask (1 where priced). Fills `num_matched`
// when non-null. NaN where no item is matched.
Eigen::MatrixXd AllPairsJevons(const Eigen::MatrixXd& log_price, const Eigen::MatrixXd& present,
                               Eigen::MatrixXi* num_matched);

}  // namespace paritas

#endif  // PARITAS_BILATERAL_MATRIX_H_
