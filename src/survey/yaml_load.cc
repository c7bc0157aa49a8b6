// The depth check parses the text once more than yaml-cpp alone would; YAML
// files are small (limits.max_yaml_bytes), and the check is what keeps
// yaml-cpp's recursion, and its "bad file" message, out of reach.
#include "survey/yaml_load.h"

#include <new>
#include <sstream>

#include <yaml-cpp/eventhandler.h>

namespace paritas::internal {
namespace {

// Thrown through yaml-cpp's parser at the first collection too deep.
struct TooDeep {
  YAML::Mark mark;
};

// Counts open mappings and sequences.
class DepthCheck : public YAML::EventHandler {
 public:
  explicit DepthCheck(int max_depth) : max_depth_(max_depth) {}

  void OnDocumentStart(const YAML::Mark&) override {}
  void OnDocumentEnd() override {}
  void OnNull(const YAML::Mark&, YAML::anchor_t) override {}
  void OnAlias(const YAML::Mark&, YAML::anchor_t) override {}
  void OnScalar(const YAML::Mark&, const std::string&, YAML::anchor_t,
                const std::string&) override {}
  void OnSequenceStart(const YAML::Mark& mark, const std::string&, YAML::anchor_t,
                       YAML::EmitterStyle::value) override {
    Enter(mark);
  }
  void OnSequenceEnd() override { --depth_; }
  void OnMapStart(const YAML::Mark& mark, const std::string&, YAML::anchor_t,
                  YAML::EmitterStyle::value) override {
    Enter(mark);
  }
  void OnMapEnd() override { --depth_; }

 private:
  void Enter(const YAML::Mark& mark) {
    if (++depth_ > max_depth_) throw TooDeep{mark};
  }

  const int max_depth_;
  int depth_ = 0;
};

}  // namespace

std::string YamlWhere(const std::string& source, const YAML::Mark& mark) {
  if (mark.line < 0) return source + ": ";
  return source + ":" + std::to_string(mark.line + 1) + ":" + std::to_string(mark.column + 1) +
         ": ";
}

bool LoadYaml(const std::string& text, const std::string& source, int max_depth,
              std::string_view depth_advice, YAML::Node* root, std::string* error) {
  try {
    std::istringstream stream(text);
    YAML::Parser parser(stream);
    DepthCheck check(max_depth);
    parser.HandleNextDocument(check);
    *root = YAML::Load(text);
  } catch (const TooDeep& e) {
    *error = YamlWhere(source, e.mark) + "nesting deeper than " + std::to_string(max_depth) +
             " levels " + std::string(depth_advice);
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
