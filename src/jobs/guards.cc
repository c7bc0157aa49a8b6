#include "paritas/jobs/guards.h"

namespace paritas {

PathGuard GuardInputsOf(const RunConfig& config) {
  PathGuard guard;
  guard.AddInput(config.config_path, "configuration");
  for (const PriceSource& source : config.survey.prices) guard.AddInput(source.path, "prices file");
  guard.AddInput(config.survey.expenditure, "expenditure file");
  guard.AddInput(config.survey.regions, "regions file");
  guard.AddInput(config.survey.items, "items file");
  // An inline classification's source is the configuration itself.
  if (config.has_classification) guard.AddInput(config.classification_source, "classification file");
  return guard;
}

}  // namespace paritas
