// The registry of aggregation methods: the only list of them. A method is a
// file in this folder defining `const AggregationMethod& <Name>Method()`;
// registering it is its line below. The list is explicit rather than filled
// by static initialisers, which a static library's linker may drop.
#include "paritas/aggregation/aggregation_method.h"
#include "paritas/base/text.h"

namespace paritas {
namespace internal {
const AggregationMethod& GeksFisherMethod();
const AggregationMethod& GeksTornqvistMethod();
const AggregationMethod& WeightedCpdAggregationMethod();
const AggregationMethod& SpanningTreeAggregationMethod();
const AggregationMethod& GearyKhamisMethod();
const AggregationMethod& IkleDikhanovBalkMethod();
}  // namespace internal

const std::vector<const AggregationMethod*>& AggregationMethods() {
  static const std::vector<const AggregationMethod*> methods = {
      &internal::GeksFisherMethod(),
      &internal::GeksTornqvistMethod(),
      &internal::WeightedCpdAggregationMethod(),
      &internal::SpanningTreeAggregationMethod(),
      &internal::GearyKhamisMethod(),
      &internal::IkleDikhanovBalkMethod(),
  };
  return methods;
}

const AggregationMethod* FindAggregationMethod(std::string_view name) {
  const std::string wanted = ToLower(Trim(name));
  for (const AggregationMethod* method : AggregationMethods()) {
    if (method->Name() == wanted) return method;
  }
  return nullptr;
}

std::vector<std::string> AggregationMethodNames() {
  std::vector<std::string> names;
  for (const AggregationMethod* method : AggregationMethods()) names.emplace_back(method->Name());
  return names;
}

}  // namespace paritas
