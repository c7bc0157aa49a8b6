// Missing heading parities: a region that spends on a basic heading but has
// no parity there gets one by the rule the user chose for the heading, and
// every imputed entry is marked, so the outputs can say how much of each
// aggregate rests on imputed parities. The stage runs between the elementary
// and the aggregate stages (compute.cc) and, per replicate, in the
// sensitivity chain, on the same function.
#ifndef PARITAS_COMPUTE_IMPUTATION_H_
#define PARITAS_COMPUTE_IMPUTATION_H_

#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/survey/classification.h"

namespace paritas {

// How a missing heading parity is filled. Each imputed ln parity is put on
// the heading's scale by linking over the regions priced in the heading:
//   ln p_rh = ln X_r + mean over linking regions s of (ln p_sh - ln X_s),
// where X is the rule's proxy and the linking regions are those with both a
// parity of the heading's own and a finite proxy (offset 0 when there is
// none: the heading's scale is then arbitrary, and normalisation fixes it).
enum class ImputationRule {
  // Leaves the parity missing: the heading drops out of the region's
  // bilateral comparisons pair by pair (the weights renormalise over the
  // headings both regions have). Default; raises a warning per region.
  kLeave,
  // X = the region's parity of the heading's parent aggregate computed with
  // the run's aggregation method from the parent's other headings; when the
  // parent has no other heading, or the region has no parity there, the
  // grandparent without the heading, and so on up to the root.
  kParent,
  // X = the region's parity of a named related heading (rule text
  // "like:<heading>"), its own (priced or external) parities only.
  kLike,
  // X = the heading's parity in the external parities file.
  kExternal,
};

std::string ToString(ImputationRule rule);
// Case-insensitive; "like" alone (without the heading) is accepted here.
bool FromString(const std::string& text, ImputationRule* rule);
std::vector<std::string> ImputationRuleNames();

// One heading's rule: the kind and, for kLike, the related heading's code.
struct HeadingRule {
  ImputationRule rule = ImputationRule::kLeave;
  std::string like;  // heading code for kLike, empty otherwise

  // "leave", "parent", "external" or "like:<heading>".
  std::string ToString() const;
  // Parses the text of a rule (case-insensitive kind; the heading code after
  // "like:" kept as written). Returns false with *error, e.g. "'nearest' is
  // not one of: leave, parent, external, like:<heading>".
  static bool Parse(const std::string& text, HeadingRule* rule, std::string* error);
};

// Where a heading parity of one region came from.
enum class ParitySource {
  kNone = 0,      // no parity (no quotes, rule leave or nothing to impute from)
  kPriced = 1,    // the elementary stage, from price quotes
  kImputed = 2,   // a rule (parent, like)
  kExternal = 3,  // the external parities file, directly or through rule external
};

// "none", "priced", "imputed", "external".
std::string ToString(ParitySource source);

struct ImputationInput {
  // ln parities, regions x headings: finite where the region has a parity
  // of its own, NaN elsewhere. Any scale per heading.
  Eigen::MatrixXd log_parity;
  // ParitySource of each entry of log_parity (kPriced or kExternal where
  // finite, kNone elsewhere), as int.
  Eigen::MatrixXi source;
  // Nominal expenditure, regions x headings (NaN = no row). Only entries
  // with finite expenditure > 0 and no parity are imputed.
  Eigen::MatrixXd expenditure;
  // ln parities from the external file, regions x headings, NaN where the
  // file has none; may be empty (0 x 0) when there is no file.
  Eigen::MatrixXd external_log_parity;
  // One rule per heading (classification heading order).
  std::vector<HeadingRule> rules;
};

struct ImputationResult {
  // The completed ln parities and their sources (as ImputationInput).
  Eigen::MatrixXd log_parity;
  Eigen::MatrixXi source;
  // Per heading, the regions that spend on it and still have no parity
  // (rule leave, or a rule with nothing to impute from).
  std::vector<std::vector<int>> left_missing;
  // Per heading, the regions imputed.
  std::vector<std::vector<int>> imputed;
  // Per heading, the highest ancestor (classification node) whose aggregate
  // without the heading was consulted under rule parent: the one that
  // supplied a filled parity, or, for a region left unfilled, the last one
  // tried; -1 when no aggregate was consulted. The heading's fills (and
  // which regions get one) depend on the parities of that node's other
  // headings and of the heading itself (by the linking).
  std::vector<int> highest_proxy_node;
  // Entries imputed in all (imputed or external by rule).
  int num_imputed = 0;
};

// Fills the missing heading parities of `input` by each heading's rule over
// `tree` (whose headings() index the columns), aggregating with `method` for
// the parent rule. Proxies are read from the parities of `input` only (never
// from another imputed entry), so the result does not depend on the order
// the headings are taken in. Returns false with *error when a kLike rule
// names a heading not in the tree (or the heading itself).
bool ImputeMissingHeadingParities(const ImputationInput& input, const Classification& tree,
                                  const AggregationMethod& method, ImputationResult* result,
                                  std::string* error);

// Returns, for node `node` and region r, the share of r's spending on the
// node's headings (finite expenditure > 0) that rests on parities of each
// source: out(0) priced, out(1) imputed, out(2) external, out(3) none. NaN
// everywhere when the region spends nothing on the node.
Eigen::Vector4d SourceShares(const Classification& tree, int node, int region,
                             const Eigen::MatrixXd& expenditure, const Eigen::MatrixXi& source);

// The `source` column for a node and region from SourceShares: the source
// ("priced", "imputed", "external") when all of the spending with a parity
// rests on one, "mixed" otherwise, "none" when the region has no spending
// with a parity on the node.
std::string SourceLabel(const Eigen::Vector4d& shares);

}  // namespace paritas

#endif  // PARITAS_COMPUTE_IMPUTATION_H_
