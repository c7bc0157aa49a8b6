// The interface every aggregation method implements, and the registry that
// lists them. An aggregation method combines the basic-heading parities of a
// node (an aggregate of the classification) with each region's expenditure
// into one ln parity per region. The registry is the only list of methods:
// the configuration, the command line's help and messages, the method spread
// of `sensitivity` and the report all read it. Adding a method: DEVELOPERS.md.
#ifndef PARITAS_AGGREGATION_AGGREGATION_METHOD_H_
#define PARITAS_AGGREGATION_AGGREGATION_METHOD_H_

#include <string>
#include <string_view>
#include <vector>

#include <Eigen/Core>

#include "paritas/aggregation/bilateral_matrix.h"

namespace paritas {

// The node's inputs, regions x the node's headings: heading parities (ratio
// scale, NaN where missing) and nominal expenditure (currency units, NaN
// where missing).
struct NodeArrays {
  Eigen::MatrixXd price;
  Eigen::MatrixXd expenditure;
  // Threads a method may spread its row blocks over (as
  // GeksBlockOptions::num_threads; the result does not depend on it); 0 =
  // OpenMP's count, which a node loop running each aggregate on one thread
  // has set to 1. Default 0.
  int num_threads = 0;
};

// One edge of a spanning tree: region `to` joined the tree through `from`.
struct TreeEdge {
  int from = -1;
  int to = -1;
  // Paasche-Laspeyres spread |ln(L/P)| of the pair (log points, >= 0).
  double spread = 0.0;
  // Bilateral Fisher index of `to` against `from` (ratio scale).
  double fisher = 0.0;
};

struct AggregateParities {
  // ln parity of every region, mean 0 over the regions present; NaN where a
  // region has no heading with a parity and positive expenditure.
  Eigen::VectorXd log_parity;
  // Headings used per region (parity and positive expenditure).
  Eigen::VectorXi num_headings;
  bool identified = true;
  std::vector<std::vector<int>> groups;
  // True when every pair of regions had a bilateral index.
  bool complete = false;
  // RMS of the log distance between the bilaterals and the result (GEKS).
  double rms_log_residual = 0.0;
  // spanning-tree only: the edges of the minimum spanning tree (a forest
  // when not identified), each group's edges in the order regions joined;
  // empty for other methods.
  std::vector<TreeEdge> tree;
  // Why the method gave no parities although the regions are linked (e.g.
  // an iteration that did not converge); empty when it gave them. The
  // caller fails the node with this message rather than use log_parity.
  std::string failure;
};

// What a method is and reads, for the report, messages and checks.
struct AggregationProperties {
  // Real expenditure at the method's prices adds up over the headings.
  bool additive = false;
  // Parities are transitive by construction (every multilateral method here).
  bool transitive_by_construction = true;
  // Reads expenditure (all weighted methods).
  bool uses_expenditure = true;
};

class AggregationMethod {
 public:
  virtual ~AggregationMethod() = default;
  // Registry name, lower case, as written in the configuration ("geks-fisher").
  virtual std::string_view Name() const = 0;
  // One line for --help and listings.
  virtual std::string_view Description() const = 0;
  // Title and HTML description with the published source, for the report.
  virtual std::string_view ReportTitle() const = 0;
  virtual std::string_view ReportHtml() const = 0;
  virtual AggregationProperties Properties() const = 0;
  // The bilateral matrices Aggregate reads; the caller computes at least these.
  virtual BilateralOptions BilateralsNeeded() const = 0;
  // Computes the node's ln parities (log_parity, identified, groups, and
  // the diagnostics it has); num_headings is filled by the caller.
  virtual AggregateParities Aggregate(const NodeArrays& arrays,
                                      const BilateralMatrices& bilaterals) const = 0;
  // Returns the international price of each of the node's headings implied
  // by the node's ln parities `log_parity` (any normalisation; the prices
  // scale inversely with the parities), for additive methods: real
  // expenditure on heading h is then pi_h * e_rh / p_rh. NaN for a heading
  // no region prices. Empty for methods that are not additive.
  virtual Eigen::VectorXd InternationalPrices(const NodeArrays& /*arrays*/,
                                              const Eigen::VectorXd& /*log_parity*/) const {
    return {};
  }
};

// Every aggregation method, in the order of --help and the method spread.
const std::vector<const AggregationMethod*>& AggregationMethods();
// The method named `name` (case-insensitive, surrounding blanks ignored);
// nullptr when there is none.
const AggregationMethod* FindAggregationMethod(std::string_view name);
// The registry names, for --help and messages.
std::vector<std::string> AggregationMethodNames();

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_AGGREGATION_METHOD_H_
