// The classification tree: basic headings (leaves) grouped into aggregates
// (inner nodes) under exactly one root, followed by the analytic groups
// (named sets of headings outside the tree). Groups sit in the same node list
// as the tree's aggregates, so every stage that loops over nodes (compute,
// outputs, sensitivity, deflate, pair) treats them as aggregates.
#ifndef PARITAS_SURVEY_CLASSIFICATION_H_
#define PARITAS_SURVEY_CLASSIFICATION_H_

#include <string>
#include <vector>

#include "paritas/base/read_limits.h"

namespace paritas {
namespace internal {
class ClassificationBuilder;
}

struct ClassificationNode {
  std::string code;
  // Index of the parent node; -1 for the root.
  int parent = -1;
  // Child node indices in the order written.
  std::vector<int> children;
  // Depth below the root (root = 0).
  int depth = 0;
  // True for basic headings (leaves); false for aggregates.
  bool is_leaf = false;
  // Indices (into Classification::headings()) of the basic headings under
  // this node, in tree order; a heading node lists itself; a group lists
  // its headings in tree order.
  std::vector<int> headings;
  // True for an analytic group (the configuration's `groups:`): an
  // aggregate outside the tree, after every tree node, with parent -1, no
  // children and depth 0.
  bool is_group = false;
  // Human-readable name (the configuration's `labels:`, or a group's
  // `label`); empty = none, the code stands for itself.
  std::string label;
};

// A place in a configuration file, for messages (1-based; 0 = unknown).
struct ConfigPlace {
  int line = 0;
  int column = 0;
};

// A code written in the configuration, with where it was written.
struct PlacedCode {
  std::string code;
  ConfigPlace place;
};

// An analytic group as the configuration defines it: its headings are those
// of every node in `of` and of `from`, less those of every node in
// `without`. Nodes are codes of the classification (headings or
// aggregates); groups may overlap the tree and each other.
struct GroupDefinition {
  // The group's code (a key of `groups:`); must differ from every node code.
  PlacedCode code;
  // Human-readable name; empty = none.
  std::string label;
  // Nodes whose headings the group holds (`of:`), and one more (`from:`;
  // empty code = not given). At least one of the two is given.
  std::vector<PlacedCode> of;
  PlacedCode from;
  // Nodes whose headings are taken out (`without:`); each must take out at
  // least one heading.
  std::vector<PlacedCode> without;
};

// A label for a node code (the configuration's `labels:` map).
struct NodeLabel {
  PlacedCode code;
  std::string label;
};

class Classification {
 public:
  // Parses the YAML tree. `source` names the file (or config key) for
  // messages. Returns false with a message naming the line on malformed
  // trees: not exactly one root, an empty aggregate, a code listed twice,
  // a list entry that is neither a code nor a one-key mapping, or YAML
  // nesting deeper than `max_yaml_depth` (ReadLimits::max_yaml_depth).
  static bool FromYaml(const std::string& yaml_text, const std::string& source,
                       Classification* classification, std::string* error,
                       int max_yaml_depth = ReadLimits().max_yaml_depth);
  // Builds the default tree: a root `all` holding the given headings.
  static Classification Flat(const std::vector<std::string>& heading_codes,
                             const std::string& root_code = "all");

  // Tree nodes in depth-first order (node 0 is the root), then the groups
  // in the order defined.
  const std::vector<ClassificationNode>& nodes() const { return nodes_; }
  // Number of tree nodes: nodes()[num_tree_nodes()..] are the groups.
  int num_tree_nodes() const { return num_tree_nodes_; }

  // Appends the groups after the tree's nodes (any groups added before are
  // replaced). `source` names the configuration file for messages. Returns
  // false, leaving the classification unchanged, with a message
  // "source:line:column: group 'x': ..." when a group's code is already a
  // node's, a member is not a node of the tree (with the nearest code as a
  // hint), a `without` entry takes out no heading, or no heading is left.
  bool SetGroups(const std::vector<GroupDefinition>& groups, const std::string& source,
                 std::string* error);
  // Sets the labels of tree nodes. Returns false, leaving the labels
  // unchanged, when a code is not a node of the tree (with a hint), or is a
  // group (whose label is its definition's `label`).
  bool SetLabels(const std::vector<NodeLabel>& labels, const std::string& source,
                 std::string* error);
  // Returns a node's label, or its code when it has none.
  const std::string& LabelOrCode(int node) const {
    return nodes_[node].label.empty() ? nodes_[node].code : nodes_[node].label;
  }
  // Node indices of the basic headings, in tree order.
  const std::vector<int>& headings() const { return heading_nodes_; }
  // Node index of a code, or -1.
  int FindNode(const std::string& code) const;
  // Heading index (position in headings()) of a heading code, or -1.
  int FindHeading(const std::string& code) const;
  // Codes of all nodes, in node order.
  std::vector<std::string> NodeCodes() const;
  std::vector<std::string> HeadingCodes() const;
  bool empty() const { return nodes_.empty(); }

 private:
  friend class internal::ClassificationBuilder;
  void Finish();
  bool GroupHeadings(const GroupDefinition& group, const std::string& source,
                     const std::vector<std::string>& tree_codes,
                     const std::vector<GroupDefinition>& groups, std::vector<char>* in,
                     std::string* error) const;

  std::vector<ClassificationNode> nodes_;
  std::vector<int> heading_nodes_;
  int num_tree_nodes_ = 0;
};

}  // namespace paritas

#endif  // PARITAS_SURVEY_CLASSIFICATION_H_
