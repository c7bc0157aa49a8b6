// The interface every elementary method implements, and the registry that
// lists them. An elementary method turns one basic heading's cell prices
// (geometric means of the quotes of an item in a region) into a ln parity
// per region. The registry is the only list of methods: the configuration,
// the command line's help and messages, the method spread of `sensitivity`
// and the report all read it. Adding a method: DEVELOPERS.md.
#ifndef PARITAS_ELEMENTARY_ELEMENTARY_METHOD_H_
#define PARITAS_ELEMENTARY_ELEMENTARY_METHOD_H_

#include <cmath>
#include <cstdint>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include <Eigen/Core>

#include "paritas/elementary/cpd.h"
#include "paritas/survey/survey.h"

namespace paritas {

// Settings of the elementary stage.
struct ElementaryOptions {
  // Registry name of the method (see ElementaryMethodNames()); default "cpd".
  std::string method = "cpd";
  // CPD weight of a representative cell (others weigh 1); 1 = unweighted.
  double representative_weight = 1.0;
  // CPD methods: also weighs each cell by the sum of its quote weights
  // (CellPrices::weight; no effect when the survey has none). Default false:
  // cells weigh alike (config key cpd_cell_weights; README on the choice).
  bool quote_weighted_cells = false;
  // Loss of robust-cpd (Huber by default) and its threshold in log points
  // (0: c x a scale re-estimated as the fit iterates; see CpdOptions).
  CpdLoss robust_loss = CpdLoss::kHuber;
  double robust_scale = 0.0;
  // Standard errors of CPD parities (classic for cpd, Huber's sandwich for
  // robust-cpd), and the sandwich errors of log_se_robust (default hc1, as
  // RunConfig::robust_errors says why; see RobustErrors in cpd.h).
  bool compute_standard_errors = true;
  RobustErrors robust_errors = RobustErrors::kHc1;
  // CPD methods: keep each cell's fitted ln price (HeadingParities::
  // cell_fitted; 8 bytes a cell, held to the end of a run: 84 MB on 10.5
  // million cells). No file of `compute` or `check` reads it, and those
  // turn it off. Default true.
  bool keep_cell_fitted = true;

  // False, with a message, for an unknown method or a weight that is not a
  // positive number.
  bool IsValid(std::string* error) const;
};

// Parities of one basic heading, for every region of the survey.
struct HeadingParities {
  int heading = -1;
  // ln parity of each region, normalised by the reference weights given
  // (sum w ln P = 0); NaN where the region priced nothing in the heading.
  Eigen::VectorXd log_parity;
  // Standard errors of ln parity relative to the reference (CPD methods);
  // NaN where not computed.
  Eigen::VectorXd log_se;
  Eigen::VectorXd log_se_robust;
  // Per region: items priced and quotes behind them.
  Eigen::VectorXi num_items;
  Eigen::VectorXi num_quotes;
  int num_regions_priced = 0;
  int num_items_priced = 0;
  int64_t num_cells = 0;
  // False when the regions that priced the heading fall into unlinked groups.
  bool identified = true;
  std::vector<std::vector<int>> groups;
  // True when the regions were unlinked and HeadingInput::keep_largest_group
  // asked for the largest group's parities (the others are NaN).
  bool kept_largest_group = false;
  // CPD: fitted ln price (unless ElementaryOptions::keep_cell_fitted is
  // false) and residual of every cell of the heading, in the survey's cell
  // order; residual variance. Empty for jevons-geks.
  Eigen::VectorXd cell_fitted;
  Eigen::VectorXd cell_residual;
  double sigma2 = 0.0;
  int degrees_of_freedom = 0;
  double robust_scale_used = 0.0;
  // cprd: the representativity effect (the coefficient of the dummy, ln of
  // the price of a representative item relative to an unrepresentative one
  // in the same region) and its classic standard error; NaN for other
  // methods and where the flags do not identify it.
  double representativity_effect = std::nan("");
  double representativity_se = std::nan("");
  // cprd: cells flagged representative among the heading's cells fitted.
  int64_t num_cells_representative = 0;
  std::string message;
};

// What a method is given for one heading.
struct HeadingInput {
  const Survey* survey = nullptr;
  int heading = -1;
  const ElementaryOptions* options = nullptr;
  // Normalisation weights, one per survey region; empty = plain mean.
  std::span<const double> reference_weights;
  // Multiplicity of each survey item (a bootstrap draw, 0 for an item left
  // out); empty = every item once. Resampling runs set it.
  std::span<const double> item_weight;
  // When the heading's regions fall into unlinked groups: false = no
  // parities (identified = false); true = the largest group's parities.
  bool keep_largest_group = false;
  // False leaves the ln parities as the method gives them (a later stage
  // normalises); true applies `reference_weights`.
  bool normalise = true;
};

// What a method reads and gives, for the report, messages and checks.
struct ElementaryProperties {
  bool uses_representativity = false;  // reads the cells' representativity flags
  bool gives_standard_errors = false;  // fills log_se (log_se_robust on request)
  bool gives_cell_residuals = false;   // fills cell_fitted and cell_residual
  bool transitive_by_construction = true;
  // Weighs cells in its fit (representative_weight, quote weights).
  bool weighs_cells = false;
  // Fills representativity_effect and _se (representativity.csv is written).
  bool gives_representativity_effect = false;
};

class ElementaryMethod {
 public:
  virtual ~ElementaryMethod() = default;
  // Registry name, lower case, as written in the configuration ("cpd").
  virtual std::string_view Name() const = 0;
  // One line for --help and listings.
  virtual std::string_view Description() const = 0;
  // Title and HTML description with the published source, for the report.
  virtual std::string_view ReportTitle() const = 0;
  virtual std::string_view ReportHtml() const = 0;
  virtual ElementaryProperties Properties() const = 0;
  // Fills log_parity (and whatever Properties() promises), identified and
  // groups of `out`, whose counts (num_items, num_quotes, num_cells) the
  // caller has set; the heading has at least one cell.
  virtual void Compute(const HeadingInput& input, HeadingParities* out) const = 0;
};

// Every elementary method, in the order of --help and the method spread.
const std::vector<const ElementaryMethod*>& ElementaryMethods();
// The method named `name` (case-insensitive, surrounding blanks ignored);
// nullptr when there is none.
const ElementaryMethod* FindElementaryMethod(std::string_view name);
// The registry names, for --help and messages.
std::vector<std::string> ElementaryMethodNames();

}  // namespace paritas

#endif  // PARITAS_ELEMENTARY_ELEMENTARY_METHOD_H_
