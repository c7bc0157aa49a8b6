// Linear probing with a power-of-two table kept at most 3/4 full; a slot
// of 16 bytes settles a code of up to 8 bytes without reading the arena.
#include "paritas/base/code_table.h"

#include <algorithm>
#include <cstring>

#include "base/equal_bytes.h"

namespace paritas {

uint64_t CodeTable::Word(std::string_view code) {
  return internal::ShortWord(code.data(), std::min<size_t>(code.size(), 8));
}

uint64_t CodeTable::HashOf(std::string_view code, uint64_t word) {
  // Codes are short: one multiply-fold for up to 8 bytes, one more per
  // further 8 bytes.
  uint64_t h = internal::MultiplyFold(word ^ 0x243f6a8885a308d3ULL,
                                      code.size() ^ 0x9e3779b97f4a7c15ULL);
  for (size_t i = 8; i < code.size(); i += 8) {
    const size_t n = std::min<size_t>(code.size() - i, 8);
    h = internal::MultiplyFold(h ^ internal::ShortWord(code.data() + i, n), 0x9e3779b97f4a7c15ULL);
  }
  return h;
}

uint64_t CodeTable::Hash(std::string_view code) { return HashOf(code, Word(code)); }

int CodeTable::Find(std::string_view code) const {
  if (slots_.empty()) return -1;
  const uint64_t word = Word(code);
  const size_t mask = slots_.size() - 1;
  for (size_t slot = HashOf(code, word) & mask;; slot = (slot + 1) & mask) {
    const Slot& entry = slots_[slot];
    if (entry.index_plus_one == 0) return -1;
    if (entry.word == word && entry.size == code.size()) {
      const int index = static_cast<int>(entry.index_plus_one - 1);
      if (code.size() <= 8 || internal::EqualBytes(Code(index), code)) return index;
    }
  }
}

int CodeTable::Intern(std::string_view code) {
  if (4 * (size() + 1) > 3 * static_cast<int64_t>(slots_.size())) Grow();
  const uint64_t word = Word(code);
  const size_t mask = slots_.size() - 1;
  size_t slot = HashOf(code, word) & mask;
  for (;; slot = (slot + 1) & mask) {
    const Slot& entry = slots_[slot];
    if (entry.index_plus_one == 0) break;
    if (entry.word == word && entry.size == code.size()) {
      const int index = static_cast<int>(entry.index_plus_one - 1);
      if (code.size() <= 8 || internal::EqualBytes(Code(index), code)) return index;
    }
  }
  const int index = size();
  arena_.append(code);
  offsets_.push_back(static_cast<uint32_t>(arena_.size()));
  slots_[slot] = {word, static_cast<uint32_t>(index + 1), static_cast<uint32_t>(code.size())};
  return index;
}

void CodeTable::Grow() {
  const size_t new_size = slots_.empty() ? 16 : slots_.size() * 2;
  slots_.assign(new_size, Slot());
  const size_t mask = new_size - 1;
  for (int index = 0; index < size(); ++index) {
    const std::string_view code = Code(index);
    const uint64_t word = Word(code);
    size_t slot = HashOf(code, word) & mask;
    while (slots_[slot].index_plus_one != 0) slot = (slot + 1) & mask;
    slots_[slot] = {word, static_cast<uint32_t>(index + 1), static_cast<uint32_t>(code.size())};
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
