// The limits are plain numbers checked where the bytes are read (csv.cc,
// the YAML loader); this file validates them and formats them for messages.
#include "paritas/base/read_limits.h"

#include <array>
#include <charconv>
#include <cstdint>
#include <string>
#include <utility>

#include "paritas/base/text.h"

namespace paritas {
namespace {

struct Unit {
  const char* name;
  int shift;
};
// Largest first, so FormatByteSize picks the largest whole unit.
constexpr std::array<Unit, 4> kUnits = {{{"TiB", 40}, {"GiB", 30}, {"MiB", 20}, {"KiB", 10}}};

}  // namespace

bool ReadLimits::IsValid(std::string* error) const {
  const std::array<std::pair<const char*, int64_t>, 4> byte_limits = {{
      {"max_file_bytes", max_file_bytes},
      {"max_yaml_bytes", max_yaml_bytes},
      {"max_record_bytes", max_record_bytes},
      {"max_field_bytes", max_field_bytes},
  }};
  for (const auto& [name, value] : byte_limits) {
    if (value < 1 || value > kMaxByteLimit) {
      *error = std::string("limits.") + name + " must be from 1 byte to 1 TiB, found " +
               std::to_string(value);
      return false;
    }
  }
  if (max_yaml_depth < 1 || max_yaml_depth > kMaxYamlDepthLimit) {
    *error = "limits.max_yaml_depth must be from 1 to " + std::to_string(kMaxYamlDepthLimit) +
             ", found " + std::to_string(max_yaml_depth);
    return false;
  }
  return true;
}

std::string FormatByteSize(int64_t bytes) {
  for (const Unit& unit : kUnits) {
    const int64_t size = int64_t{1} << unit.shift;
    if (bytes >= size && bytes % size == 0) {
      return std::to_string(bytes / size) + " " + unit.name;
    }
  }
  return std::to_string(bytes) + (bytes == 1 ? " byte" : " bytes");
}

bool ParseByteSize(std::string_view text, int64_t* bytes) {
  text = Trim(text);
  int64_t number = 0;
  const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), number);
  if (ec != std::errc() || end == text.data() || number < 0) return false;
  const std::string unit = ToLower(Trim(text.substr(end - text.data())));
  int shift = 0;
  if (!unit.empty()) {
    bool known = false;
    for (const Unit& candidate : kUnits) {
      const std::string name = ToLower(candidate.name);        // "kib"
      const std::string short_name = name.substr(0, 1) + "b";  // "kb"
      if (unit == name || unit == short_name) {
        shift = candidate.shift;
        known = true;
      }
    }
    if (!known) return false;
  }
  if (shift > 0 && number > (INT64_MAX >> shift)) return false;
  *bytes = number << shift;
  return true;
}

std::string LimitAdvice(std::string_view key) {
  return "(" + std::string(key) + "); raise the limit if the file is right";
}

}  // namespace paritas
