// The YAML tree is walked once into a flat node array in depth-first order,
// so every later pass (aggregation, outputs) is a loop over indices.
#include "paritas/survey/classification.h"

#include <algorithm>
#include <map>
#include <unordered_map>

#include <yaml-cpp/yaml.h>

#include "paritas/base/text.h"
#include "survey/classification_yaml.h"
#include "survey/yaml_load.h"

namespace paritas {
namespace internal {

class ClassificationBuilder {
 public:
  ClassificationBuilder(const std::string& source, Classification* out)
      : source_(source), out_(out) {}

  bool Build(const YAML::Node& root, std::string* error) {
    if (!root.IsMap() || root.size() != 1) {
      *error = Where(root) + "the classification must have exactly one root (a mapping with one key)";
      if (root.IsMap() && root.size() > 1) {
        std::vector<std::string> keys;
        for (const auto& kv : root) keys.push_back(kv.first.Scalar());
        *error += ", found " + std::to_string(keys.size()) + " roots: ";
        for (size_t i = 0; i < keys.size(); ++i) *error += (i ? ", " : "") + keys[i];
      }
      return false;
    }
    auto it = root.begin();
    return AddAggregate(it->first, it->second, -1, error);
  }

 private:
  std::string Where(const YAML::Node& node) const {
    const YAML::Mark mark = node.Mark();
    if (mark.line < 0) return source_ + ": ";
    return source_ + ":" + std::to_string(mark.line + 1) + ":" + std::to_string(mark.column + 1) + ": ";
  }

  int AddNode(const YAML::Node& key, int parent, bool leaf, std::string* error) {
    if (!key.IsScalar() || key.Scalar().empty()) {
      *error = Where(key) + "expected a non-empty code";
      return -1;
    }
    const std::string& code = key.Scalar();
    auto [it, inserted] = lines_.emplace(code, key.Mark().line + 1);
    if (!inserted) {
      *error = Where(key) + "'" + code + "' is listed twice in the classification (first at line " +
               std::to_string(it->second) + ")";
      return -1;
    }
    ClassificationNode node;
    node.code = code;
    node.parent = parent;
    node.is_leaf = leaf;
    node.depth = parent < 0 ? 0 : out_->nodes_[parent].depth + 1;
    const int index = static_cast<int>(out_->nodes_.size());
    out_->nodes_.push_back(std::move(node));
    if (parent >= 0) out_->nodes_[parent].children.push_back(index);
    return index;
  }

  bool AddAggregate(const YAML::Node& key, const YAML::Node& value, int parent,
                    std::string* error) {
    const int index = AddNode(key, parent, false, error);
    if (index < 0) return false;
    const std::string& code = key.Scalar();
    if (value.IsMap()) {
      if (value.size() == 0) return Empty(key, code, error);
      for (const auto& kv : value) {
        if (!AddAggregate(kv.first, kv.second, index, error)) return false;
      }
      return true;
    }
    if (value.IsSequence()) {
      if (value.size() == 0) return Empty(key, code, error);
      for (const auto& entry : value) {
        if (entry.IsScalar()) {
          if (AddNode(entry, index, true, error) < 0) return false;
        } else if (entry.IsMap() && entry.size() == 1) {
          auto it = entry.begin();
          if (!AddAggregate(it->first, it->second, index, error)) return false;
        } else {
          *error = Where(entry) + "an entry of '" + code +
                   "' must be a heading code or a one-key mapping (a child aggregate)";
          return false;
        }
      }
      return true;
    }
    if (value.IsNull()) return Empty(key, code, error);
    *error = Where(value) + "aggregate '" + code +
             "' must hold a mapping of child aggregates or a list of headings";
    return false;
  }

  bool Empty(const YAML::Node& key, const std::string& code, std::string* error) {
    *error = Where(key) + "aggregate '" + code + "' has no headings";
    return false;
  }

  std::string source_;
  Classification* out_;

 public:
  void Finish() { out_->Finish(); }

 private:
  std::unordered_map<std::string, int> lines_;
};

bool ClassificationFromNode(const YAML::Node& root, const std::string& source,
                            Classification* classification, std::string* error) {
  Classification result;
  ClassificationBuilder builder(source, &result);
  try {
    if (!builder.Build(root, error)) return false;
  } catch (const YAML::Exception& e) {
    *error = source + ": invalid classification: " + e.msg;
    return false;
  }
  builder.Finish();
  *classification = std::move(result);
  return true;
}

}  // namespace internal

bool Classification::FromYaml(const std::string& yaml_text, const std::string& source,
                              Classification* classification, std::string* error,
                              int max_yaml_depth) {
  YAML::Node root;
  if (!internal::LoadYaml(yaml_text, source, max_yaml_depth, LimitAdvice("limits.max_yaml_depth"),
                          &root, error)) {
    return false;
  }
  return internal::ClassificationFromNode(root, source, classification, error);
}

Classification Classification::Flat(const std::vector<std::string>& heading_codes,
                                    const std::string& root_code) {
  Classification result;
  ClassificationNode root;
  root.code = root_code;
  result.nodes_.push_back(root);
  for (const std::string& code : heading_codes) {
    ClassificationNode leaf;
    leaf.code = code;
    leaf.parent = 0;
    leaf.depth = 1;
    leaf.is_leaf = true;
    result.nodes_[0].children.push_back(static_cast<int>(result.nodes_.size()));
    result.nodes_.push_back(leaf);
  }
  result.Finish();
  return result;
}

void Classification::Finish() {
  num_tree_nodes_ = static_cast<int>(nodes_.size());
  heading_nodes_.clear();
  for (int i = 0; i < static_cast<int>(nodes_.size()); ++i) {
    if (nodes_[i].is_leaf) heading_nodes_.push_back(i);
  }
  for (auto& node : nodes_) node.headings.clear();
  for (int h = 0; h < static_cast<int>(heading_nodes_.size()); ++h) {
    for (int n = heading_nodes_[h]; n >= 0; n = nodes_[n].parent) nodes_[n].headings.push_back(h);
  }
}

namespace {

std::string Located(const std::string& source, const ConfigPlace& place, const std::string& what) {
  return LocatedMessage(source, place.line, place.column, what);
}

std::string DidYouMean(const std::string& word, const std::vector<std::string>& candidates) {
  const std::string nearest = NearestName(word, candidates);
  return nearest.empty() ? "" : "; did you mean '" + nearest + "'?";
}

int IndexOf(const std::vector<std::string>& codes, const std::string& code) {
  const auto it = std::find(codes.begin(), codes.end(), code);
  return it == codes.end() ? -1 : static_cast<int>(it - codes.begin());
}

}  // namespace

// Marks the headings of one group's definition in `in` (by heading index);
// returns false with the message.
bool Classification::GroupHeadings(const GroupDefinition& group, const std::string& source,
                                   const std::vector<std::string>& tree_codes,
                                   const std::vector<GroupDefinition>& groups,
                                   std::vector<char>* in, std::string* error) const {
  const std::string prefix = "group " + QuoteValue(group.code.code) + ": ";
  auto member = [&](const PlacedCode& entry, const char* key) {
    const int n = IndexOf(tree_codes, entry.code);
    if (n >= 0) return n;
    const bool is_group = std::any_of(groups.begin(), groups.end(), [&](const GroupDefinition& g) {
      return g.code.code == entry.code;
    });
    *error = Located(source, entry.place,
                     prefix + key + " " + QuoteValue(entry.code) +
                         (is_group ? " is a group; groups are made of nodes of the classification"
                                   : " is not a node of the classification" +
                                         DidYouMean(entry.code, tree_codes)));
    return -1;
  };
  if (group.of.empty() && group.from.code.empty()) {
    *error = Located(source, group.code.place,
                     prefix + "needs 'of' (a list of nodes) or 'from' (a node)");
    return false;
  }
  std::vector<std::pair<const PlacedCode*, const char*>> included;
  for (const PlacedCode& entry : group.of) included.emplace_back(&entry, "of");
  if (!group.from.code.empty()) included.emplace_back(&group.from, "from");
  for (const auto& [entry, key] : included) {
    const int n = member(*entry, key);
    if (n < 0) return false;
    for (int h : nodes_[n].headings) (*in)[h] = 1;
  }
  for (const PlacedCode& entry : group.without) {
    const int n = member(entry, "without");
    if (n < 0) return false;
    int removed = 0;
    for (int h : nodes_[n].headings) {
      removed += (*in)[h];
      (*in)[h] = 0;
    }
    if (removed == 0) {
      *error = Located(
          source, entry.place,
          prefix + "without " + QuoteValue(entry.code) + " takes out no heading of the group");
      return false;
    }
  }
  return true;
}

bool Classification::SetGroups(const std::vector<GroupDefinition>& groups,
                               const std::string& source, std::string* error) {
  std::vector<std::string> tree_codes;
  for (int n = 0; n < num_tree_nodes_; ++n) tree_codes.push_back(nodes_[n].code);
  std::vector<ClassificationNode> added;
  for (const GroupDefinition& group : groups) {
    const std::string& code = group.code.code;
    const std::string prefix = "group " + QuoteValue(code) + ": ";
    if (code.empty()) {
      *error = Located(source, group.code.place, "a group needs a non-empty code");
      return false;
    }
    if (const int clash = IndexOf(tree_codes, code); clash >= 0) {
      *error = Located(source, group.code.place,
                       prefix + "the classification already has " +
                           (nodes_[clash].is_leaf ? "a basic heading" : "an aggregate") +
                           " with this code; give the group a code of its own");
      return false;
    }
    for (const ClassificationNode& earlier : added) {
      if (earlier.code == code) {
        *error = Located(source, group.code.place, prefix + "defined twice");
        return false;
      }
    }
    std::vector<char> in(heading_nodes_.size(), 0);
    if (!GroupHeadings(group, source, tree_codes, groups, &in, error)) return false;
    ClassificationNode node;
    node.code = code;
    node.label = group.label;
    node.is_group = true;
    for (int h = 0; h < static_cast<int>(in.size()); ++h) {
      if (in[h]) node.headings.push_back(h);
    }
    if (node.headings.empty()) {
      *error = Located(source, group.code.place, prefix + "no basic heading is left");
      return false;
    }
    added.push_back(std::move(node));
  }
  nodes_.resize(num_tree_nodes_);
  nodes_.insert(nodes_.end(), added.begin(), added.end());
  return true;
}

bool Classification::SetLabels(const std::vector<NodeLabel>& labels, const std::string& source,
                               std::string* error) {
  std::vector<std::string> tree_codes;
  for (int n = 0; n < num_tree_nodes_; ++n) tree_codes.push_back(nodes_[n].code);
  std::vector<std::pair<int, std::string>> found;
  for (const NodeLabel& label : labels) {
    const int n = FindNode(label.code.code);
    if (n >= num_tree_nodes_) {
      *error = Located(source, label.code.place,
                       "labels: " + QuoteValue(label.code.code) +
                           " is a group; give its label as groups." + label.code.code + ".label");
      return false;
    }
    if (n < 0) {
      *error = Located(source, label.code.place,
                       "labels: " + QuoteValue(label.code.code) +
                           " is not a node of the classification" +
                           DidYouMean(label.code.code, tree_codes));
      return false;
    }
    found.emplace_back(n, label.label);
  }
  for (auto& [n, text] : found) nodes_[n].label = std::move(text);
  return true;
}

int Classification::FindNode(const std::string& code) const {
  for (int i = 0; i < static_cast<int>(nodes_.size()); ++i) {
    if (nodes_[i].code == code) return i;
  }
  return -1;
}

int Classification::FindHeading(const std::string& code) const {
  for (int h = 0; h < static_cast<int>(heading_nodes_.size()); ++h) {
    if (nodes_[heading_nodes_[h]].code == code) return h;
  }
  return -1;
}

std::vector<std::string> Classification::NodeCodes() const {
  std::vector<std::string> codes;
  for (const auto& node : nodes_) codes.push_back(node.code);
  return codes;
}

std::vector<std::string> Classification::HeadingCodes() const {
  std::vector<std::string> codes;
  for (int n : heading_nodes_) codes.push_back(nodes_[n].code);
  return codes;
}

}  // namespace paritas
