// Normalisation: every node's parities are set relative to a reference
// (the geometric mean of the regions, an expenditure-weighted geometric
// mean, or one region = 100) on their own, after they are computed.
#ifndef PARITAS_AGGREGATION_NORMALISATION_H_
#define PARITAS_AGGREGATION_NORMALISATION_H_

#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/survey/config.h"

namespace paritas {

// Chooses the normalisation weights of a node, one per region (0 = does not
// count): the reference region (survey index `reference_region`) when it has
// a parity, else the expenditure-weighted or plain mean over the regions with
// a parity. For the country reference the weights are the regions' real
// expenditure e_r exp(-ln p_r), the derivative of its shift (for standard
// errors); the shift itself is not a weighted mean (NormaliseToReference).
// Returns the label of the reference used ("mean", "weighted-mean",
// "country", the region code, or "mean (...)" for a fallback).
std::string ReferenceWeights(const Reference& reference, int reference_region,
                             const Eigen::VectorXd& log_parity, const Eigen::VectorXd& expenditure,
                             std::vector<double>* weights);

// Shifts ln parities so that their weighted mean over the regions with a
// parity and a positive weight is 0.
void NormaliseLogParities(const std::vector<double>& weights, Eigen::VectorXd* log_parity);

// Normalises a node's ln parities to `reference` and returns the label of the
// reference used, as ReferenceWeights. For the country reference the shift c
// makes total real expenditure equal total nominal expenditure over the
// regions with a parity and positive expenditure:
//   c = ln sum_r e_r - ln sum_r e_r exp(-ln p_r),  ln p_r <- ln p_r - c,
// so sum_r e_r / p_r = sum_r e_r (p on the ratio scale, country = 1).
// One sentence saying what "= 100" means under the reference used (a label
// NormaliseToReference returned), for the terminal and the report: e.g.
// "country = 100: total real expenditure over the regions equals total
// nominal expenditure, so deflated regional values add up to the national
// total".
std::string ReferenceConvention(const std::string& reference_used);

std::string NormaliseToReference(const Reference& reference, int reference_region,
                                 const Eigen::VectorXd& expenditure, Eigen::VectorXd* log_parity);

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_NORMALISATION_H_
