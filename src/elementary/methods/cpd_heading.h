// The CPD fit of one heading shared by the cpd and robust-cpd methods: the
// heading's cells (with item multiplicities from resampling) handed to
// FitCpd, and its result copied into HeadingParities.
#ifndef PARITAS_INTERNAL_ELEMENTARY_METHODS_CPD_HEADING_H_
#define PARITAS_INTERNAL_ELEMENTARY_METHODS_CPD_HEADING_H_

#include "paritas/elementary/elementary_method.h"

#include <vector>

namespace paritas::internal {

// A heading's cells as FitCpd reads them; reused by each thread.
struct CellBuffers {
  std::vector<int> region;
  std::vector<int> item;  // index within the heading
  std::vector<double> log_price;
  std::vector<double> weight;  // empty = all 1
  // 1 where the cell is flagged representative, else 0 (as a regressor).
  std::vector<double> representative;

  void Clear();
  // Keeps only the cells of the regions in `group`.
  void KeepRegions(const std::vector<int>& group, int num_regions);
};

// Copies the heading's cells; weights only where they differ from 1
// somewhere (the representative weight of `input.options`, or item
// multiplicities: m copies of a cell when `copies_for_multiplicity`, else
// weight m).
void CollectCells(const HeadingInput& input, bool copies_for_multiplicity, CellBuffers* cells);

// FitCpd over `cells` (log_price as given) with the options of `input`.
CpdResult FitCells(const HeadingInput& input, const CellBuffers& cells, CpdLoss loss);

// Fits ln price = region effect + item effect with `loss`. An item
// multiplicity m is a cell weight m under least squares (the same normal
// equations as m copies); a robust loss gets m copies, since rho(m e^2)
// differs from m rho(e^2).
void FitHeadingCpd(const HeadingInput& input, CpdLoss loss, HeadingParities* out);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_ELEMENTARY_METHODS_CPD_HEADING_H_
