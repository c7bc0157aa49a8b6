// The configuration is checked key by key against a fixed list, so a typo is
// an error with a suggestion rather than a silently ignored setting.
#include "paritas/survey/config.h"

#include "paritas/uncertainty/outliers.h"

#include <yaml-cpp/yaml.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <map>
#include <string_view>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/compute/imputation.h"
#include "paritas/elementary/elementary_method.h"
#include "survey/classification_yaml.h"
#include "survey/yaml_load.h"

namespace paritas {
namespace {

namespace fs = std::filesystem;

template <typename Enum>
struct EnumName {
  Enum value;
  const char* name;
};

constexpr EnumName<InvalidRowPolicy> kPolicyNames[] = {
    {InvalidRowPolicy::kStop, "stop"},
    {InvalidRowPolicy::kSkip, "skip"},
};

std::string ShortestText(double value) {
  std::string text;
  AppendShortest(value, &text);
  return text;
}

constexpr EnumName<DuplicateQuotePolicy> kDuplicateNames[] = {
    {DuplicateQuotePolicy::kKeep, "keep"},
    {DuplicateQuotePolicy::kDrop, "drop"},
    {DuplicateQuotePolicy::kReject, "reject"},
};

template <typename Enum, size_t N>
std::string NameOf(const EnumName<Enum> (&names)[N], Enum value) {
  for (const auto& entry : names) {
    if (entry.value == value) return entry.name;
  }
  return "?";
}

template <typename Enum, size_t N>
bool ValueOf(const EnumName<Enum> (&names)[N], const std::string& text, Enum* value) {
  const std::string lower = ToLower(Trim(text));
  for (const auto& entry : names) {
    if (lower == entry.name) {
      *value = entry.value;
      return true;
    }
  }
  return false;
}

template <typename Enum, size_t N>
std::vector<std::string> NamesOf(const EnumName<Enum> (&names)[N]) {
  std::vector<std::string> out;
  for (const auto& entry : names) out.push_back(entry.name);
  return out;
}

const std::vector<std::string> kTopKeys = {"survey",
                                           "classification",
                                           "reference",
                                           "elementary",
                                           "aggregation",
                                           "invalid_rows",
                                           "output",
                                           "matrices",
                                           "representative_weight",
                                           "outlier_threshold",
                                           "outlier_fit",
                                           "robust_standard_errors",
                                           "report",
                                           "report_region",
                                           "threads",
                                           "limits",
                                           "duplicate_quotes",
                                           "strict",
                                           "checks",
                                           "missing_parities"};
const std::vector<std::string> kCheckKeys = {"min_basket_share",   "min_items",
                                             "min_quotes",         "max_level_ratio",
                                             "max_spread_percent", "gross_outlier_ratio"};
const std::vector<std::string> kSurveyKeys = {"prices", "expenditure", "regions", "items"};
// Optional survey files read apart from the four above.
const std::vector<std::string> kSurveyExtraKeys = {"external_parities"};
const std::vector<std::string> kMissingParityKeys = {"default", "headings"};
// Keys of a survey file given as a mapping.
const std::vector<std::string> kFileKeys = {"path", "delimiter", "decimal"};
const std::vector<std::string> kLimitKeys = {"max_file_bytes", "max_yaml_bytes", "max_record_bytes",
                                             "max_field_bytes", "max_yaml_depth"};
// The configuration file itself is read before its `limits:` are known.
constexpr std::string_view kConfigFileAdvice =
    "(limits.max_yaml_bytes; the configuration file itself is read under the default); move a "
    "large classification into a file of its own";
constexpr std::string_view kConfigDepthAdvice =
    "(limits.max_yaml_depth; the configuration file itself is read under the default); move a "
    "deep classification into a file of its own";

class ConfigParser {
 public:
  ConfigParser(const std::string& path, RunConfig* config) : path_(path), config_(config) {
    base_ = fs::path(path).parent_path();
  }

  bool Parse(const std::string& text, std::string* error) {
    YAML::Node root;
    if (!internal::LoadYaml(text, path_, ReadLimits().max_yaml_depth, kConfigDepthAdvice, &root,
                            error)) {
      return false;
    }
    try {
      return ParseRoot(root, error);
    } catch (const YAML::Exception& e) {
      *error = Where(e.mark) + e.msg;
      return false;
    }
  }

 private:
  std::string Where(const YAML::Mark& mark) const { return internal::YamlWhere(path_, mark); }
  std::string Where(const YAML::Node& node) const { return Where(node.Mark()); }

  bool CheckKeys(const YAML::Node& map, const std::vector<std::string>& allowed,
                 const std::string& section, std::string* error) {
    for (const auto& kv : map) {
      const std::string key = kv.first.Scalar();
      bool known = false;
      for (const auto& a : allowed) known = known || a == key;
      if (known) continue;
      *error = Where(kv.first) + "unknown key " +
               QuoteValue((section.empty() ? "" : section + ".") + key);
      const std::string nearest = NearestName(key, allowed);
      if (!nearest.empty()) {
        *error += "; did you mean '" + (section.empty() ? "" : section + ".") + nearest + "'?";
      } else {
        *error += "; valid keys are: " + JoinNames(allowed);
      }
      return false;
    }
    return true;
  }

  bool Scalar(const YAML::Node& node, const std::string& key, std::string* value,
              std::string* error) {
    if (!node.IsScalar()) {
      *error = Where(node) + "'" + key + "' must be a single value";
      return false;
    }
    *value = node.Scalar();
    return true;
  }

  bool Path(const YAML::Node& node, const std::string& key, std::string* value,
            std::string* error) {
    std::string text;
    if (!Scalar(node, key, &text, error)) return false;
    if (text.empty()) {
      *error = Where(node) + "'" + key + "' must be a file path";
      return false;
    }
    *value = Resolve(text);
    return true;
  }

  std::string Resolve(const std::string& text) const {
    fs::path p(text);
    if (p.is_absolute() || base_.empty()) return p.lexically_normal().string();
    return (base_ / p).lexically_normal().string();
  }

  bool Number(const YAML::Node& node, const std::string& key, double* value, std::string* error) {
    std::string text;
    if (!Scalar(node, key, &text, error)) return false;
    if (ParseNumber(text, value) != NumberStatus::kOk) {
      *error = Where(node) + "'" + key + "' must be a number, found '" + text + "'";
      return false;
    }
    return true;
  }

  template <typename Enum>
  bool EnumValue(const YAML::Node& node, const std::string& key, Enum* value,
                 const std::vector<std::string>& names, std::string* error) {
    std::string text;
    if (!Scalar(node, key, &text, error)) return false;
    if (!FromString(text, value)) {
      *error = Where(node) + NotOneOf(key, text, names);
      return false;
    }
    return true;
  }

  // A method name, checked against its registry and stored as the registry spells it.
  template <typename Find>
  bool MethodValue(const YAML::Node& node, const std::string& key, std::string* value, Find find,
                   const std::vector<std::string>& names, std::string* error) {
    std::string text;
    if (!Scalar(node, key, &text, error)) return false;
    const auto* method = find(text);
    if (method == nullptr) {
      *error = Where(node) + NotOneOf(key, text, names);
      return false;
    }
    *value = std::string(method->Name());
    return true;
  }

  // A number above zero.
  bool Positive(const YAML::Node& node, const std::string& key, double* value, std::string* error) {
    if (!Number(node, key, value, error)) return false;
    if (!(*value > 0)) {
      *error = Where(node) + key + " must be positive, found '" + node.Scalar() + "'";
      return false;
    }
    return true;
  }

  // true or false (see ParseFlag for the spellings taken).
  bool Flag(const YAML::Node& node, const std::string& key, bool* value, std::string* error) {
    std::string text;
    if (!Scalar(node, key, &text, error)) return false;
    if (!ParseFlag(text, value)) {
      *error = Where(node) + key + " must be true or false, found '" + text + "'";
      return false;
    }
    return true;
  }

  // Keys are read in a fixed order, so the first error reported does not
  // depend on the order they are written in.
  bool ParseRoot(const YAML::Node& root, std::string* error) {
    if (!root.IsMap()) {
      *error =
          path_ + ": the configuration must be a mapping of keys (survey, classification, ...)";
      return false;
    }
    if (!CheckKeys(root, kTopKeys, "", error)) return false;
    // Limits first: the classification file is read under them.
    if (const YAML::Node node = root["limits"]) {
      if (!ParseLimits(node, error)) return false;
    }
    if (!ParseSurvey(root["survey"], error)) return false;
    if (const YAML::Node node = root["classification"]) {
      if (!ParseClassification(node, error)) return false;
    }
    if (const YAML::Node node = root["checks"]) {
      if (!ParseChecks(node, error)) return false;
    }
    if (const YAML::Node node = root["missing_parities"]) {
      if (!ParseMissingParities(node, error)) return false;
    }
    return ParseMethods(root, error) && ParseOutput(root, error) && ParseSettings(root, error);
  }

  bool ParseSurvey(const YAML::Node& survey, std::string* error) {
    if (!survey) {
      *error = path_ + ": missing key 'survey' (with at least 'prices' and 'expenditure')";
      return false;
    }
    if (!survey.IsMap()) {
      *error = Where(survey) + "'survey' must be a mapping with keys " + JoinNames(kSurveyKeys);
      return false;
    }
    std::vector<std::string> survey_keys = kSurveyKeys;
    survey_keys.insert(survey_keys.end(), kSurveyExtraKeys.begin(), kSurveyExtraKeys.end());
    if (!CheckKeys(survey, survey_keys, "survey", error)) return false;
    if (const YAML::Node node = survey["external_parities"]) {
      if (!SurveyFile(node, "survey.external_parities", &config_->survey.external_parities,
                      &config_->survey.external_parities_format, error)) {
        return false;
      }
    }
    SurveyFiles& files = config_->survey;
    std::string* const paths[] = {&files.prices, &files.expenditure, &files.regions, &files.items};
    CsvFormat* const formats[] = {&files.prices_format, &files.expenditure_format,
                                  &files.regions_format, &files.items_format};
    for (size_t k = 0; k < kSurveyKeys.size(); ++k) {
      const YAML::Node node = survey[kSurveyKeys[k]];
      if (node && !SurveyFile(node, "survey." + kSurveyKeys[k], paths[k], formats[k], error)) {
        return false;
      }
    }
    for (const char* required : {"prices", "expenditure"}) {
      if (!survey[required]) {
        *error = Where(survey) + "missing key 'survey." + required + "'";
        return false;
      }
    }
    return true;
  }

  // A file path, or a mapping {path, delimiter, decimal}.
  bool SurveyFile(const YAML::Node& node, const std::string& key, std::string* path,
                  CsvFormat* format, std::string* error) {
    if (!node.IsMap()) return Path(node, key, path, error);
    if (!CheckKeys(node, kFileKeys, key, error)) return false;
    if (!node["path"]) {
      *error = Where(node) + "missing key '" + key + ".path'";
      return false;
    }
    if (!Path(node["path"], key + ".path", path, error)) return false;
    if (const YAML::Node value = node["delimiter"]) {
      if (!FormatChar(value, key + ".delimiter", {",", ";", "tab"}, &format->delimiter, error)) {
        return false;
      }
    }
    if (const YAML::Node value = node["decimal"]) {
      if (!FormatChar(value, key + ".decimal", {".", ","}, &format->decimal, error)) return false;
    }
    if (!format->IsValid(error)) {
      *error = Where(node) + key + ": " + *error;
      return false;
    }
    return true;
  }

  // One of `allowed` ("tab" also as a tab character).
  bool FormatChar(const YAML::Node& node, const std::string& key,
                  const std::vector<std::string>& allowed, char* value, std::string* error) {
    std::string text;
    if (!Scalar(node, key, &text, error)) return false;
    const std::string word = text == "\t" ? "tab" : ToLower(text);
    if (std::find(allowed.begin(), allowed.end(), word) == allowed.end()) {
      std::vector<std::string> quoted;
      for (const std::string& name : allowed)
        quoted.push_back(name == "tab" ? name : "'" + name + "'");
      *error = Where(node) + key + " " + QuoteValue(VisibleText(text)) +
               " is not one of: " + JoinNames(quoted);
      return false;
    }
    *value = word == "tab" ? '\t' : word[0];
    return true;
  }

  // reference, elementary, aggregation.
  bool ParseMethods(const YAML::Node& root, std::string* error) {
    if (const YAML::Node node = root["reference"]) {
      std::string text;
      if (!Scalar(node, "reference", &text, error)) return false;
      if (!ParseReference("reference", text, &config_->reference, error)) {
        *error = Where(node) + *error;
        return false;
      }
    }
    if (const YAML::Node node = root["elementary"]) {
      if (!MethodValue(node, "elementary", &config_->elementary, FindElementaryMethod,
                       ElementaryMethodNames(), error)) {
        return false;
      }
    }
    if (const YAML::Node node = root["aggregation"]) {
      if (!MethodValue(node, "aggregation", &config_->aggregation, FindAggregationMethod,
                       AggregationMethodNames(), error)) {
        return false;
      }
    }
    return true;
  }

  // invalid_rows, output, matrices.
  bool ParseOutput(const YAML::Node& root, std::string* error) {
    if (const YAML::Node node = root["invalid_rows"]) {
      if (!EnumValue(node, "invalid_rows", &config_->invalid_rows, InvalidRowPolicyNames(),
                     error)) {
        return false;
      }
    }
    if (const YAML::Node node = root["duplicate_quotes"]) {
      if (!EnumValue(node, "duplicate_quotes", &config_->duplicate_quotes,
                     DuplicateQuotePolicyNames(), error)) {
        return false;
      }
    }
    if (const YAML::Node node = root["strict"]) {
      if (!Flag(node, "strict", &config_->strict, error)) return false;
    }
    if (const YAML::Node node = root["output"]) {
      if (!Path(node, "output", &config_->output, error)) return false;
    } else {
      config_->output = Resolve("out");
    }
    if (const YAML::Node node = root["matrices"]) return ParseMatrices(node, error);
    return true;
  }

  // A code, codes separated by commas, or a YAML list of codes.
  bool ParseMatrices(const YAML::Node& node, std::string* error) {
    std::vector<std::string> values;
    if (node.IsScalar()) {
      values.push_back(node.Scalar());
    } else if (node.IsSequence()) {
      for (const auto& entry : node) {
        std::string code;
        if (!Scalar(entry, "matrices", &code, error)) return false;
        values.push_back(code);
      }
    } else {
      *error = Where(node) + "'matrices' must be 'all', a node code, or a list of node codes";
      return false;
    }
    if (!SplitNameList(values, &config_->matrices, error)) {
      *error = Where(node) + "matrices: " + *error;
      return false;
    }
    return true;
  }

  // representative_weight, outlier_threshold, robust_standard_errors,
  // report, threads.
  bool ParseSettings(const YAML::Node& root, std::string* error) {
    if (const YAML::Node node = root["representative_weight"]) {
      if (!Positive(node, "representative_weight", &config_->representative_weight, error)) {
        return false;
      }
    }
    if (const YAML::Node node = root["outlier_threshold"]) {
      if (!Positive(node, "outlier_threshold", &config_->outlier_threshold, error)) return false;
    }
    if (const YAML::Node node = root["outlier_fit"]) {
      std::string text;
      OutlierFit fit;
      if (!Scalar(node, "outlier_fit", &text, error)) return false;
      if (!FromString(text, &fit)) {
        *error = Where(node) + NotOneOf("outlier_fit", text, {"robust", "least-squares"});
        return false;
      }
      config_->outlier_fit = ToString(fit);
    }
    if (const YAML::Node node = root["robust_standard_errors"]) {
      if (!Flag(node, "robust_standard_errors", &config_->robust_standard_errors, error)) {
        return false;
      }
    }
    if (const YAML::Node node = root["report"]) {
      if (!Flag(node, "report", &config_->report, error)) return false;
    }
    if (const YAML::Node node = root["report_region"]) {
      if (!Scalar(node, "report_region", &config_->report_region, error)) return false;
    }
    if (const YAML::Node node = root["threads"]) {
      double threads = 0;
      if (!Number(node, "threads", &threads, error)) return false;
      if (threads < 0 || threads != std::floor(threads) || threads > 1024) {
        *error = Where(node) +
                 "threads must be a whole number from 0 (all cores) to 1024, found '" +
                 node.Scalar() + "'";
        return false;
      }
      config_->threads = static_cast<int>(threads);
    }
    return true;
  }

  // The thresholds of the plausibility checks.
  // missing_parities: {default: <rule>, headings: {<heading>: <rule>, ...}}.
  bool ParseMissingParities(const YAML::Node& node, std::string* error) {
    if (!node.IsMap()) {
      *error = Where(node) + "'missing_parities' must be a mapping with keys " +
               JoinNames(kMissingParityKeys);
      return false;
    }
    if (!CheckKeys(node, kMissingParityKeys, "missing_parities", error)) return false;
    MissingParitiesSettings& settings = config_->missing_parities;
    HeadingRule rule;
    if (const YAML::Node value = node["default"]) {
      if (!Scalar(value, "missing_parities.default", &settings.default_rule, error)) return false;
      if (!HeadingRule::Parse(settings.default_rule, &rule, error)) {
        *error = Where(value) + "missing_parities.default: " + *error;
        return false;
      }
    }
    const YAML::Node headings = node["headings"];
    if (!headings) return true;
    if (!headings.IsMap()) {
      *error = Where(headings) +
               "missing_parities.headings must be a mapping of heading codes to rules";
      return false;
    }
    for (const auto& entry : headings) {
      const std::string code = entry.first.as<std::string>();
      const std::string key = "missing_parities.headings." + code;
      std::string text;
      if (!Scalar(entry.second, key, &text, error)) return false;
      if (!HeadingRule::Parse(text, &rule, error)) {
        *error = Where(entry.second) + key + ": " + *error;
        return false;
      }
      settings.headings.emplace_back(code, text);
    }
    return true;
  }

  bool ParseChecks(const YAML::Node& node, std::string* error) {
    if (!node.IsMap()) {
      *error = Where(node) + "'checks' must be a mapping with keys " + JoinNames(kCheckKeys);
      return false;
    }
    if (!CheckKeys(node, kCheckKeys, "checks", error)) return false;
    CheckThresholds& checks = config_->checks;
    double* const positives[] = {&checks.min_basket_share, &checks.max_level_ratio,
                                 &checks.max_spread_percent, &checks.gross_outlier_ratio};
    const char* const positive_keys[] = {"min_basket_share", "max_level_ratio",
                                         "max_spread_percent", "gross_outlier_ratio"};
    for (size_t k = 0; k < 4; ++k) {
      const YAML::Node value = node[positive_keys[k]];
      if (value && !Positive(value, std::string("checks.") + positive_keys[k], positives[k], error)) {
        return false;
      }
    }
    int* const counts[] = {&checks.min_items, &checks.min_quotes};
    const char* const count_keys[] = {"min_items", "min_quotes"};
    for (size_t k = 0; k < 2; ++k) {
      const YAML::Node value = node[count_keys[k]];
      if (!value) continue;
      double number = 0;
      if (!Number(value, std::string("checks.") + count_keys[k], &number, error)) return false;
      if (number < 1 || number > 1000000 || number != std::floor(number)) {
        *error = Where(value) + "checks." + count_keys[k] +
                 " must be a whole number from 1 to 1000000, found '" + value.Scalar() + "'";
        return false;
      }
      *counts[k] = static_cast<int>(number);
    }
    if (!checks.IsValid(error)) {
      *error = Where(node) + *error;
      return false;
    }
    return true;
  }

  // max_file_bytes, max_yaml_bytes, max_record_bytes, max_field_bytes,
  // max_yaml_depth.
  bool ParseLimits(const YAML::Node& node, std::string* error) {
    if (!node.IsMap()) {
      *error = Where(node) + "'limits' must be a mapping with keys " + JoinNames(kLimitKeys);
      return false;
    }
    if (!CheckKeys(node, kLimitKeys, "limits", error)) return false;
    ReadLimits& limits = config_->limits;
    int64_t* const byte_limits[] = {&limits.max_file_bytes, &limits.max_yaml_bytes,
                                    &limits.max_record_bytes, &limits.max_field_bytes};
    for (size_t k = 0; k < 4; ++k) {
      const YAML::Node value = node[kLimitKeys[k]];
      if (value && !ByteLimit(value, "limits." + kLimitKeys[k], byte_limits[k], error)) {
        return false;
      }
    }
    if (const YAML::Node value = node["max_yaml_depth"]) {
      std::string text;
      if (!Scalar(value, "limits.max_yaml_depth", &text, error)) return false;
      double depth = 0;
      if (ParseNumber(text, &depth) != NumberStatus::kOk || depth != std::floor(depth) ||
          depth < 1 || depth > kMaxYamlDepthLimit) {
        *error = Where(value) + "limits.max_yaml_depth must be a whole number from 1 to " +
                 std::to_string(kMaxYamlDepthLimit) + ", found '" + text + "'";
        return false;
      }
      limits.max_yaml_depth = static_cast<int>(depth);
    }
    return true;
  }

  // A byte count from 1 byte to 1 TiB, with an optional unit.
  bool ByteLimit(const YAML::Node& node, const std::string& key, int64_t* value,
                 std::string* error) {
    std::string text;
    if (!Scalar(node, key, &text, error)) return false;
    int64_t bytes = 0;
    if (!ParseByteSize(text, &bytes) || bytes < 1 || bytes > kMaxByteLimit) {
      *error = Where(node) + key +
               " must be a whole number of bytes from 1 to 1 TiB, optionally with a unit (KiB, "
               "MiB, GiB, TiB), found '" +
               text + "'";
      return false;
    }
    *value = bytes;
    return true;
  }

  bool ParseClassification(const YAML::Node& node, std::string* error) {
    if (node.IsScalar()) {
      const std::string file = Resolve(node.Scalar());
      std::string text;
      const ReadLimits& limits = config_->limits;
      if (!ReadWholeFile(file, limits.max_yaml_bytes, LimitAdvice("limits.max_yaml_bytes"), &text,
                         error)) {
        return false;
      }
      config_->classification_source = file;
      if (!Classification::FromYaml(text, file, &config_->classification, error,
                                    limits.max_yaml_depth)) {
        return false;
      }
    } else {
      config_->classification_source = path_;
      if (!internal::ClassificationFromNode(node, path_, &config_->classification, error))
        return false;
    }
    config_->has_classification = true;
    return true;
  }

  std::string path_;
  fs::path base_;
  RunConfig* config_;
};

}  // namespace

std::string Reference::ToString() const {
  switch (kind) {
    case ReferenceKind::kMean:
      return "mean";
    case ReferenceKind::kWeightedMean:
      return "weighted-mean";
    case ReferenceKind::kCountry:
      return "country";
    case ReferenceKind::kRegion:
      return region;
  }
  return "?";
}

Reference Reference::FromString(const std::string& text) {
  Reference reference;
  const std::string lower = ToLower(Trim(text));
  if (lower == "mean") {
    reference.kind = ReferenceKind::kMean;
  } else if (lower == "weighted-mean") {
    reference.kind = ReferenceKind::kWeightedMean;
  } else if (lower == "country") {
    reference.kind = ReferenceKind::kCountry;
  } else {
    reference.kind = ReferenceKind::kRegion;
    reference.region = std::string(Trim(text));
  }
  return reference;
}

bool ParseReference(std::string_view what, const std::string& text, Reference* reference,
                    std::string* error) {
  if (Trim(text).empty()) {
    *error = std::string(what) + " must be mean, weighted-mean, country or a region code";
    return false;
  }
  const Reference parsed = Reference::FromString(text);
  const std::vector<std::string> names = {"mean", "weighted-mean", "country"};
  const std::string key = NameKey(text);
  for (const std::string& name : names) {
    if (parsed.kind == ReferenceKind::kRegion && key == name) {
      *error = std::string(what) + " " + QuoteValue(text) + " is not one of: " + JoinNames(names) +
               ", or a region code; did you mean '" + name + "'?";
      return false;
    }
  }
  *reference = parsed;
  return true;
}

std::string ToString(InvalidRowPolicy policy) { return NameOf(kPolicyNames, policy); }
bool FromString(const std::string& text, InvalidRowPolicy* policy) {
  return ValueOf(kPolicyNames, text, policy);
}
std::vector<std::string> InvalidRowPolicyNames() { return NamesOf(kPolicyNames); }

std::string ToString(DuplicateQuotePolicy policy) { return NameOf(kDuplicateNames, policy); }
bool FromString(const std::string& text, DuplicateQuotePolicy* policy) {
  return ValueOf(kDuplicateNames, text, policy);
}
std::vector<std::string> DuplicateQuotePolicyNames() { return NamesOf(kDuplicateNames); }

bool CheckThresholds::IsValid(std::string* error) const {
  if (!(min_basket_share > 0 && min_basket_share <= 1)) {
    *error = "checks.min_basket_share must be a share above 0 and at most 1, found " +
             ShortestText(min_basket_share);
    return false;
  }
  if (min_items < 1 || min_quotes < 1) {
    *error = "checks.min_items and checks.min_quotes must be at least 1";
    return false;
  }
  if (!(max_level_ratio > 1) || !std::isfinite(max_level_ratio)) {
    *error = "checks.max_level_ratio must be a factor above 1, found " +
             ShortestText(max_level_ratio);
    return false;
  }
  if (!(max_spread_percent > 0) || !std::isfinite(max_spread_percent)) {
    *error = "checks.max_spread_percent must be a positive number, found " +
             ShortestText(max_spread_percent);
    return false;
  }
  if (!(gross_outlier_ratio > 1) || !std::isfinite(gross_outlier_ratio)) {
    *error = "checks.gross_outlier_ratio must be a factor above 1, found " +
             ShortestText(gross_outlier_ratio);
    return false;
  }
  return true;
}

bool MatricesMeanEveryNode(const std::vector<std::string>& matrices) {
  return matrices.size() == 1 && ToLower(Trim(matrices[0])) == "all";
}

bool SplitNameList(const std::vector<std::string>& values, std::vector<std::string>* names,
                   std::string* error) {
  std::vector<std::string> result;
  for (const std::string& value : values) {
    size_t start = 0;
    for (;;) {
      const size_t comma = value.find(',', start);
      const std::string_view name = Trim(std::string_view(value).substr(
          start, comma == std::string::npos ? std::string::npos : comma - start));
      if (name.empty()) {
        *error = "an empty name in " + QuoteValue(value);
        return false;
      }
      result.emplace_back(name);
      if (comma == std::string::npos) break;
      start = comma + 1;
    }
  }
  *names = std::move(result);
  return true;
}

bool RunConfig::IsValid(std::string* error) const {
  if (survey.prices.empty()) {
    *error = "no prices file given (survey.prices)";
    return false;
  }
  if (survey.expenditure.empty()) {
    *error = "no expenditure file given (survey.expenditure)";
    return false;
  }
  if (reference.kind == ReferenceKind::kRegion && reference.region.empty()) {
    *error = "reference must be mean, weighted-mean, country or a region code";
    return false;
  }
  if (FindElementaryMethod(elementary) == nullptr) {
    *error = NotOneOf("elementary", elementary, ElementaryMethodNames());
    return false;
  }
  if (FindAggregationMethod(aggregation) == nullptr) {
    *error = NotOneOf("aggregation", aggregation, AggregationMethodNames());
    return false;
  }
  if (!(representative_weight > 0) || !std::isfinite(representative_weight)) {
    *error = "representative_weight must be a positive number";
    return false;
  }
  if (!(outlier_threshold > 0) || !std::isfinite(outlier_threshold)) {
    *error = "outlier_threshold must be a positive number";
    return false;
  }
  if (OutlierFit fit; !FromString(outlier_fit, &fit)) {
    *error = NotOneOf("outlier_fit", outlier_fit, {"robust", "least-squares"});
    return false;
  }
  if (threads < 0) {
    *error = "threads must be 0 (all cores) or more";
    return false;
  }
  if (output.empty()) {
    *error = "no output folder given (output)";
    return false;
  }
  const CsvFormat* const formats[] = {&survey.prices_format, &survey.expenditure_format,
                                      &survey.regions_format, &survey.items_format};
  const char* const keys[] = {"prices", "expenditure", "regions", "items"};
  for (int k = 0; k < 4; ++k) {
    if (!formats[k]->IsValid(error)) {
      *error = "survey." + std::string(keys[k]) + ": " + *error;
      return false;
    }
  }
  if (!survey.external_parities_format.IsValid(error)) {
    *error = "survey.external_parities: " + *error;
    return false;
  }
  return checks.IsValid(error) && limits.IsValid(error);
}

bool LoadRunConfig(const std::string& path, RunConfig* config, std::string* error) {
  std::string text;
  if (!ReadWholeFile(path, ReadLimits().max_yaml_bytes, kConfigFileAdvice, &text, error)) {
    return false;
  }
  return ParseRunConfig(text, path, config, error);
}

bool ParseRunConfig(const std::string& yaml_text, const std::string& path, RunConfig* config,
                    std::string* error) {
  RunConfig result;
  result.config_path = path;
  ConfigParser parser(path, &result);
  if (!parser.Parse(yaml_text, error)) return false;
  if (!result.IsValid(error)) {
    *error = path + ": " + *error;
    return false;
  }
  *config = std::move(result);
  return true;
}

}  // namespace paritas
