// Parsing YAML text into a yaml-cpp node under a nesting limit. yaml-cpp
// recurses once per level of nesting and stops at 500 levels with "bad
// file"; the depth is checked first, on yaml-cpp's event stream, which stops
// at the first collection beyond the limit.
#ifndef PARITAS_INTERNAL_SURVEY_YAML_LOAD_H_
#define PARITAS_INTERNAL_SURVEY_YAML_LOAD_H_

#include <string>
#include <string_view>

#include <yaml-cpp/yaml.h>

namespace paritas::internal {

// Returns "source:L:C: " for a yaml-cpp mark (0-based), "source: " without one.
std::string YamlWhere(const std::string& source, const YAML::Mark& mark);

// Parses the first document of `text` into *root. Returns false with a
// message naming `source`, line and column (1-based): "line '...' is not
// valid UTF-8 (the file may be Latin-1 ...)" at the first byte that is not,
// "nesting deeper than 64 levels " + `depth_advice` when collections nest
// deeper than `max_depth`, "key 'x' is given twice (first at line 3); remove
// one of them" for a key repeated in one mapping, or "invalid YAML: ..." for
// text yaml-cpp refuses.
bool LoadYaml(const std::string& text, const std::string& source, int max_depth,
              std::string_view depth_advice, YAML::Node* root, std::string* error);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_SURVEY_YAML_LOAD_H_
