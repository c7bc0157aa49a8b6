// Fuzzes the survey loader; the property is CheckSurveyLoader in properties.h.
#include <cstddef>
#include <cstdint>

#include "properties.h"

extern "C" int LLVMFuzzerTestOneInput(const uint8_t* data, size_t size) {
  return paritas::fuzz::RunHarness("survey_loader", paritas::fuzz::CheckSurveyLoader, data, size);
}
