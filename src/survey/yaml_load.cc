// The depth check parses the text once more than yaml-cpp alone would; YAML
// files are small (limits.max_yaml_bytes), and the check is what keeps
// yaml-cpp's recursion, and its "bad file" message, out of reach.
#include "survey/yaml_load.h"

#include <yaml-cpp/eventhandler.h>

#include <algorithm>
#include <new>
#include <sstream>
#include <unordered_map>
#include <vector>

#include "paritas/base/text.h"

namespace paritas::internal {
namespace {

// Thrown through yaml-cpp's parser at the first collection too deep.
struct TooDeep {
  YAML::Mark mark;
};

// Thrown at the second occurrence of a key in one mapping.
struct DuplicateKey {
  YAML::Mark mark;
  std::string key;
  int first_line;  // 0-based, as yaml-cpp's marks
};

// Counts open mappings and sequences, and checks that no mapping gives a
// key twice: yaml-cpp keeps one of them without a word.
class StructureCheck : public YAML::EventHandler {
 public:
  explicit StructureCheck(int max_depth) : max_depth_(max_depth) {}

  void OnDocumentStart(const YAML::Mark&) override {}
  void OnDocumentEnd() override {}
  void OnNull(const YAML::Mark& mark, YAML::anchor_t) override { Node(mark, nullptr); }
  void OnAlias(const YAML::Mark& mark, YAML::anchor_t) override { Node(mark, nullptr); }
  void OnScalar(const YAML::Mark& mark, const std::string&, YAML::anchor_t,
                const std::string& value) override {
    Node(mark, &value);
  }
  void OnSequenceStart(const YAML::Mark& mark, const std::string&, YAML::anchor_t,
                       YAML::EmitterStyle::value) override {
    Node(mark, nullptr);
    Enter(mark, false);
  }
  void OnSequenceEnd() override { frames_.pop_back(); }
  void OnMapStart(const YAML::Mark& mark, const std::string&, YAML::anchor_t,
                  YAML::EmitterStyle::value) override {
    Node(mark, nullptr);
    Enter(mark, true);
  }
  void OnMapEnd() override { frames_.pop_back(); }

 private:
  // An open collection. In a mapping, nodes alternate: key, value, key...
  struct Frame {
    bool is_map = false;
    bool expect_key = true;
    std::unordered_map<std::string, int> key_lines;
  };

  void Enter(const YAML::Mark& mark, bool is_map) {
    if (static_cast<int>(frames_.size()) >= max_depth_) throw TooDeep{mark};
    frames_.push_back(Frame{is_map, true, {}});
  }

  // A node starts at `mark`; `scalar` is its text when it is a scalar.
  void Node(const YAML::Mark& mark, const std::string* scalar) {
    if (frames_.empty() || !frames_.back().is_map) return;
    Frame& frame = frames_.back();
    if (frame.expect_key && scalar != nullptr) {
      const auto [it, inserted] = frame.key_lines.emplace(*scalar, mark.line);
      if (!inserted) throw DuplicateKey{mark, *scalar, it->second};
    }
    frame.expect_key = !frame.expect_key;
  }

  const int max_depth_;
  std::vector<Frame> frames_;
};

// Returns false with a message naming the line and column (in characters)
// of the first byte that is not UTF-8.
bool CheckUtf8(const std::string& text, const std::string& source, std::string* error) {
  const size_t bad = FindInvalidUtf8(text);
  if (bad == std::string_view::npos) return true;
  const size_t line_begin =
      text.rfind('\n', bad) == std::string::npos ? 0 : text.rfind('\n', bad) + 1;
  const size_t line_end = std::min(text.find('\n', bad), text.size());
  const int64_t line = 1 + std::count(text.begin(), text.begin() + line_begin, '\n');
  int64_t column = 1;  // Characters, not bytes: UTF-8 continuation bytes do not count.
  for (size_t i = line_begin; i < bad; ++i)
    column += (static_cast<unsigned char>(text[i]) & 0xC0) != 0x80;
  *error = LocatedMessage(
      source, line, static_cast<int>(column),
      Utf8Problem("line", std::string_view(text).substr(line_begin, line_end - line_begin)));
  return false;
}

}  // namespace

std::string YamlWhere(const std::string& source, const YAML::Mark& mark) {
  if (mark.line < 0) return source + ": ";
  return source + ":" + std::to_string(mark.line + 1) + ":" + std::to_string(mark.column + 1) +
         ": ";
}

bool LoadYaml(const std::string& text, const std::string& source, int max_depth,
              std::string_view depth_advice, YAML::Node* root, std::string* error) {
  if (!CheckUtf8(text, source, error)) return false;
  try {
    std::istringstream stream(text);
    YAML::Parser parser(stream);
    StructureCheck check(max_depth);
    parser.HandleNextDocument(check);
    *root = YAML::Load(text);
  } catch (const TooDeep& e) {
    *error = YamlWhere(source, e.mark) + "nesting deeper than " + std::to_string(max_depth) +
             " levels " + std::string(depth_advice);
    return false;
  } catch (const DuplicateKey& e) {
    *error = YamlWhere(source, e.mark) + "key " + QuoteValue(e.key) +
             " is given twice (first at line " + std::to_string(e.first_line + 1) +
             "); remove one of them";
    return false;
  } catch (const YAML::Exception& e) {
    *error = YamlWhere(source, e.mark) + "invalid YAML: " + e.msg;
    return false;
  } catch (const std::bad_alloc&) {
    *error =
        source + ": out of memory while reading YAML (" + std::to_string(text.size()) + " bytes)";
    return false;
  }
  return true;
}

}  // namespace paritas::internal
