// An open-addressing map from 64-bit keys to 32-bit values, for the cell
// index (region, item) -> cell while reading quotes. std::unordered_map costs
// an allocation per entry; this costs one probe into a flat array.
#ifndef PARITAS_SRC_FLAT_MAP_H_
#define PARITAS_SRC_FLAT_MAP_H_

#include <cstdint>
#include <vector>

namespace paritas::internal {

class FlatMap64 {
 public:
  static constexpr uint32_t kAbsent = 0xffffffffu;

  // Returns the value stored for `key`, or inserts `value_if_new` and returns
  // kAbsent.
  uint32_t FindOrInsert(uint64_t key, uint32_t value_if_new) {
    if (2 * (size_ + 1) > keys_.size()) Grow();
    const size_t mask = keys_.size() - 1;
    for (size_t slot = Mix(key) & mask;; slot = (slot + 1) & mask) {
      if (values_[slot] == kAbsent) {
        keys_[slot] = key;
        values_[slot] = value_if_new;
        ++size_;
        return kAbsent;
      }
      if (keys_[slot] == key) return values_[slot];
    }
  }
  size_t size() const { return size_; }
  void Clear() {
    keys_.clear();
    values_.clear();
    size_ = 0;
  }

 private:
  static uint64_t Mix(uint64_t key) {
    key ^= key >> 33;
    key *= 0xff51afd7ed558ccdULL;
    key ^= key >> 33;
    return key;
  }
  void Grow() {
    std::vector<uint64_t> old_keys;
    std::vector<uint32_t> old_values;
    old_keys.swap(keys_);
    old_values.swap(values_);
    const size_t new_size = old_keys.empty() ? 1024 : old_keys.size() * 2;
    keys_.assign(new_size, 0);
    values_.assign(new_size, kAbsent);
    const size_t mask = new_size - 1;
    for (size_t i = 0; i < old_keys.size(); ++i) {
      if (old_values[i] == kAbsent) continue;
      size_t slot = Mix(old_keys[i]) & mask;
      while (values_[slot] != kAbsent) slot = (slot + 1) & mask;
      keys_[slot] = old_keys[i];
      values_[slot] = old_values[i];
    }
  }

  std::vector<uint64_t> keys_;
  std::vector<uint32_t> values_;
  size_t size_ = 0;
};

}  // namespace paritas::internal

#endif  // PARITAS_SRC_FLAT_MAP_H_
