// Fuzzes the price index file of `paritas carry`; the property is
// CheckPriceIndices in properties.h.
#include <cstddef>
#include <cstdint>

#include "properties.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  return paritas::fuzz::RunHarness("price_indices", paritas::fuzz::CheckPriceIndices, data, size);
}
