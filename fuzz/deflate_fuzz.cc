// Fuzzes deflation of a wage file; the property is CheckDeflate in properties.h.
#include <cstddef>
#include <cstdint>

#include "properties.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  return paritas::fuzz::RunHarness("deflate", paritas::fuzz::CheckDeflate, data, size);
}
