// Interned codes (regions, items, headings) mapped to dense indices.
//
// An open-addressing table over one string arena: a lookup hashes the code
// once and compares bytes, with no allocation, which keeps the survey reader
// near the speed of a plain parse. Each slot holds the code's length and its
// first bytes, so a lookup of a code of up to 8 bytes (most codes) reads one
// slot and never the arena: rows in random order stay within a small table.
#ifndef PARITAS_BASE_CODE_TABLE_H_
#define PARITAS_BASE_CODE_TABLE_H_

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

namespace paritas {

class CodeTable {
 public:
  CodeTable() = default;

  // Returns the index of `code`, adding it when new. Indices are dense, in
  // order of first insertion.
  int Intern(std::string_view code);
  // Returns the index of `code`, or -1 when absent.
  int Find(std::string_view code) const;
  // The code with index `index`.
  std::string_view Code(int index) const {
    return std::string_view(arena_.data() + offsets_[index], offsets_[index + 1] - offsets_[index]);
  }
  int size() const { return static_cast<int>(offsets_.size()) - 1; }
  bool empty() const { return size() == 0; }
  // All codes in index order.
  std::vector<std::string> Codes() const;

  // Builds a table holding `codes` in the given order (codes must be unique).
  static CodeTable FromCodes(const std::vector<std::string>& codes);

  static uint64_t Hash(std::string_view code);

 private:
  struct Slot {
    // The code's bytes as internal::ShortWord gives them (its first 8
    // bytes for a longer code).
    uint64_t word = 0;
    uint32_t index_plus_one = 0;  // 0 = empty
    uint32_t size = 0;            // bytes of the code
  };
  // The code's word and hash.
  static uint64_t Word(std::string_view code);
  static uint64_t HashOf(std::string_view code, uint64_t word);
  void Grow();

  std::string arena_;
  std::vector<uint32_t> offsets_{0};
  std::vector<Slot> slots_;
};

}  // namespace paritas

#endif  // PARITAS_BASE_CODE_TABLE_H_
