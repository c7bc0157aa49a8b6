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
// a parity. Returns the label of the reference used ("mean", "weighted-mean",
// the region code, or "mean (...)" for a fallback).
std::string ReferenceWeights(const Reference& reference, int reference_region,
                             const Eigen::VectorXd& log_parity, const Eigen::VectorXd& expenditure,
                             std::vector<double>* weights);

// Shifts ln parities so that their weighted mean over the regions with a
// parity and a positive weight is 0.
void NormaliseLogParities(const std::vector<double>& weights, Eigen::VectorXd* log_parity);

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_NORMALISATION_H_
