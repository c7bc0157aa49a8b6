// Fuzzes number and flag parsing; the property is CheckText in properties.h.
#include <cstddef>
#include <cstdint>

#include "properties.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  return paritas::fuzz::RunHarness("text", paritas::fuzz::CheckText, data, size);
}
