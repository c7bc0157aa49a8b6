// The classification tree: basic headings (leaves) grouped into aggregates
// (inner nodes) under exactly one root.
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
  // this node, in tree order; a heading node lists itself.
  std::vector<int> headings;
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

  // Nodes in depth-first order; node 0 is the root.
  const std::vector<ClassificationNode>& nodes() const { return nodes_; }
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

  std::vector<ClassificationNode> nodes_;
  std::vector<int> heading_nodes_;
};

}  // namespace paritas

#endif  // PARITAS_SURVEY_CLASSIFICATION_H_
