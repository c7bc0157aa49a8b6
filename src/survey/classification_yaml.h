// Builds a classification from an already parsed YAML node (an inline
// classification inside the run configuration).
#ifndef PARITAS_INTERNAL_SURVEY_CLASSIFICATION_YAML_H_
#define PARITAS_INTERNAL_SURVEY_CLASSIFICATION_YAML_H_

#include <string>

#include <yaml-cpp/yaml.h>

#include "paritas/survey/classification.h"

namespace paritas::internal {

bool ClassificationFromNode(const YAML::Node& root, const std::string& source,
                            Classification* classification, std::string* error);

}  // namespace paritas::internal

#endif  // PARITAS_INTERNAL_SURVEY_CLASSIFICATION_YAML_H_
