// Linear probing with a power-of-two table kept at most half full.
#include "paritas/base/code_table.h"

#include <cstring>

#include "base/equal_bytes.h"

namespace paritas {

uint64_t CodeTable::Hash(std::string_view code) {
  // FNV-1a over 8-byte words, then a final mix: codes are short, so this is a
  // handful of multiplications.
  uint64_t h = 0xcbf29ce484222325ULL ^ code.size();
  size_t i = 0;
  for (; i + 8 <= code.size(); i += 8) {
    uint64_t word;
    std::memcpy(&word, code.data() + i, 8);
    h = (h ^ word) * 0x100000001b3ULL;
    h ^= h >> 29;
  }
  uint64_t tail = 0;
  // An empty view may hold a null pointer, which memcpy must not get.
  if (code.size() > i) std::memcpy(&tail, code.data() + i, code.size() - i);
  h = (h ^ tail) * 0x9e3779b97f4a7c15ULL;
  h ^= h >> 32;
  h *= 0xd6e8feb86659fd93ULL;
  h ^= h >> 32;
  return h;
}

int CodeTable::Find(std::string_view code) const {
  if (slots_.empty()) return -1;
  const size_t mask = slots_.size() - 1;
  for (size_t slot = Hash(code) & mask;; slot = (slot + 1) & mask) {
    const uint32_t entry = slots_[slot];
    if (entry == 0) return -1;
    if (internal::EqualBytes(Code(static_cast<int>(entry - 1)), code)) return static_cast<int>(entry - 1);
  }
}

int CodeTable::Intern(std::string_view code) {
  if (2 * (size() + 1) > static_cast<int>(slots_.size())) Grow();
  const size_t mask = slots_.size() - 1;
  size_t slot = Hash(code) & mask;
  for (;; slot = (slot + 1) & mask) {
    const uint32_t entry = slots_[slot];
    if (entry == 0) break;
    if (internal::EqualBytes(Code(static_cast<int>(entry - 1)), code)) return static_cast<int>(entry - 1);
  }
  const int index = size();
  arena_.append(code);
  offsets_.push_back(static_cast<uint32_t>(arena_.size()));
  slots_[slot] = static_cast<uint32_t>(index + 1);
  return index;
}

void CodeTable::Grow() {
  const size_t new_size = slots_.empty() ? 16 : slots_.size() * 2;
  slots_.assign(new_size, 0);
  const size_t mask = new_size - 1;
  for (int index = 0; index < size(); ++index) {
    size_t slot = Hash(Code(index)) & mask;
    while (slots_[slot] != 0) slot = (slot + 1) & mask;
    slots_[slot] = static_cast<uint32_t>(index + 1);
  }
}

std::vector<std::string> CodeTable::Codes() const {
  std::vector<std::string> codes;
  codes.reserve(size());
  for (int i = 0; i < size(); ++i) codes.emplace_back(Code(i));
  return codes;
}

CodeTable CodeTable::FromCodes(const std::vector<std::string>& codes) {
  CodeTable table;
  for (const std::string& code : codes) table.Intern(code);
  return table;
}

}  // namespace paritas
