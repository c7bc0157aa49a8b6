// Fuzzes the CSV reader; the property is CheckCsvReader in properties.h.
#include <cstddef>
#include <cstdint>

#include "properties.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  return paritas::fuzz::RunHarness("csv_reader", paritas::fuzz::CheckCsvReader, data, size);
}
