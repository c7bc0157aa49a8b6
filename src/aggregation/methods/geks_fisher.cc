// geks-fisher: GEKS over bilateral Fisher indices (Gini 1931; Eltetö and
// Köves 1964; Szulc 1964).
#include "aggregation/methods/geks_text.h"
#include "paritas/aggregation/aggregation.h"

namespace paritas::internal {
namespace {

class GeksFisher final : public AggregationMethod {
 public:
  std::string_view Name() const override { return "geks-fisher"; }
  std::string_view Description() const override { return "GEKS over bilateral Fisher indices"; }
  std::string_view ReportTitle() const override { return "GEKS over Fisher indices"; }
  std::string_view ReportHtml() const override { return kGeksReportHtml; }
  AggregationProperties Properties() const override { return {}; }
  // None: without the Fisher matrix, GEKS runs by row blocks (GeksFisher).
  BilateralOptions BilateralsNeeded() const override { return BilateralOptions::None(); }
  AggregateParities Aggregate(const NodeArrays& arrays,
                              const BilateralMatrices& bilaterals) const override {
    return paritas::GeksFisher(arrays, bilaterals);
  }
};

}  // namespace

const AggregationMethod& GeksFisherMethod() {
  static const GeksFisher method;
  return method;
}

}  // namespace paritas::internal
