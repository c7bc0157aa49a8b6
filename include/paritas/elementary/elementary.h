// Elementary parities: the price level of every region within one basic
// heading, from the heading's cell prices, by the method the options name
// (elementary_method.h lists them).
#ifndef PARITAS_ELEMENTARY_ELEMENTARY_H_
#define PARITAS_ELEMENTARY_ELEMENTARY_H_

#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/elementary/elementary_method.h"
#include "paritas/survey/survey.h"

namespace paritas {

// Computes the elementary parities of one heading: counts the items and
// quotes behind each region, then runs the method `input.options->method`.
// A heading without cells returns NaN parities and the message "no price
// quotes".
HeadingParities ComputeHeadingParities(const HeadingInput& input);

// Same for the compute stage: `reference_weights` (one per survey region, or
// empty for the plain mean) fix the normalisation.
HeadingParities ComputeHeadingParities(const Survey& survey, int heading,
                                       const ElementaryOptions& options,
                                       const std::vector<double>& reference_weights);

// The heading's cells as dense regions x items arrays: ln price (0 where
// absent) and presence (1 where priced). For the all-pairs Jevons matrix.
void HeadingPriceArrays(const Survey& survey, int heading, Eigen::MatrixXd* log_price,
                        Eigen::MatrixXd* present);

}  // namespace paritas

#endif  // PARITAS_ELEMENTARY_ELEMENTARY_H_
