// The CPD fit of one heading shared by the cpd and robust-cpd methods: the
// heading's cells (with item multiplicities from resampling) handed to
// FitCpd, and its result copied into HeadingParities.
#ifndef PARITAS_INTERNAL_ELEMENTARY_METHODS_CPD_HEADING_H_
#define PARITAS_INTERNAL_ELEMENTARY_METHODS_CPD_HEADING_H_

#include "paritas/elementary/elementary_method.h"

namespace paritas::internal {

// Fits ln price = region effect + item effect with `loss`. An item
// multiplicity m is a cell weight m under least squares (the same normal
// equations as m copies); a robust loss gets m copies, since rho(m e^2)
// differs from m rho(e^2).
void FitHeadingCpd(const HeadingInput& input, CpdLoss loss, HeadingParities* out);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_ELEMENTARY_METHODS_CPD_HEADING_H_
