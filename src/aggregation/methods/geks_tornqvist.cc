// geks-tornqvist: GEKS over bilateral Törnqvist indices (Caves, Christensen
// and Diewert 1982 for the multilateral Törnqvist form).
#include "aggregation/methods/geks_text.h"
#include "paritas/aggregation/aggregation.h"

namespace paritas::internal {
namespace {

class GeksTornqvist final : public AggregationMethod {
 public:
  std::string_view Name() const override { return "geks-tornqvist"; }
  std::string_view Description() const override { return "GEKS over bilateral T\xC3\xB6rnqvist indices"; }
  std::string_view ReportTitle() const override { return "GEKS over T\xC3\xB6rnqvist indices"; }
  std::string_view ReportHtml() const override { return kGeksReportHtml; }
  AggregationProperties Properties() const override { return {}; }
  // None: without the Törnqvist matrix, GEKS runs by row blocks (GeksTornqvist).
  BilateralOptions BilateralsNeeded() const override { return BilateralOptions::None(); }
  AggregateParities Aggregate(const NodeArrays& arrays,
                              const BilateralMatrices& bilaterals) const override {
    return paritas::GeksTornqvist(arrays, bilaterals);
  }
};

}  // namespace

const AggregationMethod& GeksTornqvistMethod() {
  static const GeksTornqvist method;
  return method;
}

}  // namespace paritas::internal
