// The registry of elementary methods: the only list of them. A method is a
// file in this folder defining `const ElementaryMethod& <Name>Method()`;
// registering it is its line below. The list is explicit rather than filled
// by static initialisers, which a static library's linker may drop.
#include "paritas/base/text.h"
#include "paritas/elementary/elementary_method.h"

namespace paritas {
namespace internal {
const ElementaryMethod& CpdMethod();
const ElementaryMethod& CprdMethod();
const ElementaryMethod& JevonsGeksMethod();
const ElementaryMethod& RobustCpdMethod();
}  // namespace internal

const std::vector<const ElementaryMethod*>& ElementaryMethods() {
  static const std::vector<const ElementaryMethod*> methods = {
      &internal::CpdMethod(),
      &internal::CprdMethod(),
      &internal::JevonsGeksMethod(),
      &internal::RobustCpdMethod(),
  };
  return methods;
}

const ElementaryMethod* FindElementaryMethod(std::string_view name) {
  const std::string wanted = ToLower(Trim(name));
  for (const ElementaryMethod* method : ElementaryMethods()) {
    if (method->Name() == wanted) return method;
  }
  return nullptr;
}

std::vector<std::string> ElementaryMethodNames() {
  std::vector<std::string> names;
  for (const ElementaryMethod* method : ElementaryMethods()) names.emplace_back(method->Name());
  return names;
}

}  // namespace paritas
