// jevons-geks: bilateral Jevons indices over the items both regions priced,
// made transitive by GEKS.
#include <cmath>

#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/aggregation/geks.h"
#include "paritas/aggregation/normalisation.h"
#include "paritas/elementary/elementary.h"

namespace paritas::internal {
namespace {

// The heading's representative mask (regions x items), or an empty matrix
// when no cell of the heading is flagged.
Eigen::MatrixXd RepresentativeMask(const Survey& survey, int heading) {
  const HeadingRange& range = survey.heading_range[heading];
  Eigen::MatrixXd mask = Eigen::MatrixXd::Zero(survey.num_regions(), range.num_items());
  bool any = false;
  for (int64_t k = range.cell_begin; k < range.cell_end; ++k) {
    if (survey.cells.representative[k] == 0) continue;
    mask(survey.cells.region[k], survey.cells.item[k] - range.item_begin) = 1.0;
    any = true;
  }
  return any ? mask : Eigen::MatrixXd();
}

// The all-pairs ln Jevons matrix of the heading, with item multiplicities
// when resampling; the starred form when the heading flags representative
// items.
Eigen::MatrixXd LogJevons(const HeadingInput& input, const HeadingParities& counts) {
  const Survey& survey = *input.survey;
  const HeadingRange& range = survey.heading_range[input.heading];
  Eigen::MatrixXd log_price, present;
  HeadingPriceArrays(survey, input.heading, &log_price, &present);
  Eigen::VectorXd weight;
  if (!input.item_weight.empty()) {
    weight.resize(range.num_items());
    for (int i = 0; i < range.num_items(); ++i) weight(i) = input.item_weight[range.item_begin + i];
  }
  const Eigen::MatrixXd representative = RepresentativeMask(survey, input.heading);
  Eigen::MatrixXd jevons;
  if (representative.size() > 0) {
    jevons = AllPairsJevonsRepresentative(log_price, present, representative, weight, nullptr);
  } else if (input.item_weight.empty()) {
    jevons = AllPairsJevons(log_price, present, nullptr);
    // Regions that priced nothing have no bilaterals at all, not even with
    // themselves, so GEKS leaves them out.
    for (int r = 0; r < survey.num_regions(); ++r) {
      if (counts.num_items(r) == 0) jevons(r, r) = std::nan("");
    }
  } else {
    jevons = AllPairsJevonsWeighted(log_price, present, weight);
  }
  return jevons.array().log().matrix();
}

class JevonsGeks final : public ElementaryMethod {
 public:
  std::string_view Name() const override { return "jevons-geks"; }
  std::string_view Description() const override {
    return "GEKS over bilateral Jevons indices of the items both regions priced (GEKS* with "
           "representative items where a heading flags them)";
  }
  std::string_view ReportTitle() const override { return "GEKS over Jevons indices"; }
  std::string_view ReportHtml() const override {
    return "Bilateral Jevons indices (geometric means of price relatives over the items both regions priced; "
           "Jevons, W. S., 1865) made transitive by GEKS (below). Where a heading flags representative "
           "items, each bilateral index is the geometric mean of two Jevons indices, one over the items "
           "representative in each region of the pair (the GEKS* form of Eurostat and OECD, "
           "<i>Methodological Manual on Purchasing Power Parities</i>, 2012); a pair that "
           "shares no representative item has no bilateral index.";
  }
  ElementaryProperties Properties() const override { return {.uses_representativity = true}; }

  void Compute(const HeadingInput& input, HeadingParities* out) const override {
    const GeksResult geks = Geks(LogJevons(input, *out));
    out->identified = geks.identified;
    out->groups = geks.groups;
    if (geks.groups.empty()) return;
    if (!geks.identified) {
      if (!input.keep_largest_group) return;
      out->kept_largest_group = true;
      out->log_parity = Eigen::VectorXd::Constant(geks.log_parity.size(), std::nan(""));
      for (int r : geks.groups.front()) out->log_parity(r) = geks.log_parity(r);
    } else {
      out->log_parity = geks.log_parity;
    }
    if (!input.normalise) return;
    std::vector<double> weights(input.reference_weights.begin(), input.reference_weights.end());
    if (weights.empty()) weights.assign(input.survey->num_regions(), 1.0);
    NormaliseLogParities(weights, &out->log_parity);
  }
};

}  // namespace

const ElementaryMethod& JevonsGeksMethod() {
  static const JevonsGeks method;
  return method;
}

}  // namespace paritas::internal
