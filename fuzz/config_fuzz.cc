// Fuzzes the configuration and classification parsers; the property is CheckConfig in properties.h.
#include <cstddef>
#include <cstdint>

#include "properties.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  return paritas::fuzz::RunHarness("config", paritas::fuzz::CheckConfig, data, size);
}
