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

// Beyond a factor of 1000 either way the other cells have almost no say in
// the CPD, and its normal equations lose digits (a weight of 1e-300 gave
// standard errors of 1e147).
bool RepresentativeWeightInRange(double weight) { return weight >= 1e-3 && weight <= 1e3; }

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

constexpr EnumName<CpdCellWeights> kCellWeightNames[] = {
    {CpdCellWeights::kEqual, "equal"},
    {CpdCellWeights::kQuoteWeights, "quote-weights"},
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
                                           "matrices_up_to_regions",
                                           "representative_weight",
                                           "cpd_cell_weights",
                                           "outlier_threshold",
                                           "outlier_fit",
                                           "robust_errors",
                                           "report",
                                           "report_region",
                                           "threads",
                                           "limits",
                                           "duplicate_quotes",
                                           "strict",
                                           "checks",
                                           "missing_parities",
                                           "groups",
                                           "labels"};
const std::vector<std::string> kGroupKeys = {"label", "of", "from", "without"};
const std::vector<std::string> kCheckKeys = {"min_basket_share",   "min_items",
                                             "min_quotes",         "max_level_ratio",
                                             "max_spread_percent", "gross_outlier_ratio"};
const std::vector<std::string> kSurveyKeys = {"prices", "expenditure", "regions", "items"};
// Optional survey files read apart from the four above.
const std::vector<std::string> kSurveyExtraKeys = {"external_parities"};
const std::vector<std::string> kMissingParityKeys = {"default", "headings"};
// Keys of a survey file given as a mapping.
const std::vector<std::string> kFileKeys = {"path", "delimiter", "decimal"};
// Keys of a price file given as a mapping.
const std::vector<std::string> kPriceFileKeys = {"path", "delimiter", "decimal", "columns"};
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

  // The error's parts as far as the parser knows them: where (the last
  // place an error message was started with), the key and the value.
  const ConfigError& failure() const { return failure_; }

 private:
  // Returns the prefix "path:line:column: " of an error message at `mark`,
  // and records the place (every message starts with it, and the first error
  // ends the parse, so the last place recorded is the error's). When `mark`
  // is that of the value last read by Scalar, the error is about that
  // value: its key and text are recorded too.
  std::string Where(const YAML::Mark& mark) {
    failure_.line = mark.line < 0 ? 0 : mark.line + 1;
    failure_.column = mark.line < 0 ? 0 : mark.column + 1;
    const bool about_read_value = read_ && mark.pos == read_mark_.pos &&
                                  mark.line == read_mark_.line && mark.column == read_mark_.column;
    failure_.key = about_read_value ? read_key_ : "";
    failure_.value = about_read_value ? read_value_ : "";
    return internal::YamlWhere(path_, mark);
  }
  std::string Where(const YAML::Node& node) { return Where(node.Mark()); }

  bool CheckKeys(const YAML::Node& map, const std::vector<std::string>& allowed,
                 const std::string& section, std::string* error) {
    for (const auto& kv : map) {
      const std::string key = kv.first.Scalar();
      bool known = false;
      for (const auto& a : allowed) known = known || a == key;
      if (known) continue;
      *error = Where(kv.first) + "unknown key " +
               QuoteValue((section.empty() ? "" : section + ".") + key);
      failure_.key = (section.empty() ? "" : section + ".") + key;
      failure_.value = kv.second.IsScalar() ? kv.second.Scalar() : "";
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

  // Reads a single value; an error about this node names `key` and the text.
  bool Scalar(const YAML::Node& node, const std::string& key, std::string* value,
              std::string* error) {
    read_ = true;
    read_mark_ = node.Mark();
    read_key_ = key;
    read_value_ = node.IsScalar() ? node.Scalar() : "";
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
    // The boolean that gave HC0 errors is refused rather than mapped: HC0 is
    // biased low on heading-sized samples, and silently changing what
    // 'true' meant would change the numbers of an old configuration.
    for (const auto& kv : root) {
      if (kv.first.Scalar() == "robust_standard_errors") {
        *error = Where(kv.first) +
                 "robust_standard_errors was replaced by robust_errors (off, hc0, hc1, hc3); "
                 "write 'robust_errors: hc0' for what 'true' gave, or 'robust_errors: hc1', "
                 "which is not biased low on few items";
        return false;
      }
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
    if (const YAML::Node node = root["labels"]) {
      if (!ParseLabels(node, error)) return false;
    }
    if (const YAML::Node node = root["groups"]) {
      if (!ParseGroups(node, error)) return false;
    }
    // With a tree given, unknown codes are found now, before any data is
    // read; under the flat tree the loader checks them against the headings.
    if (config_->has_classification) {
      Classification copy = config_->classification;
      if (!ApplyGroupsAndLabels(*config_, &copy, error)) return false;
    }
    return ParseMethods(root, error) && ParseOutput(root, error) && ParseSettings(root, error);
  }

  ConfigPlace Place(const YAML::Node& node) const {
    const YAML::Mark mark = node.Mark();
    if (mark.line < 0) return {};
    return {mark.line + 1, mark.column + 1};
  }

  bool Code(const YAML::Node& node, const std::string& key, PlacedCode* code, std::string* error) {
    if (!Scalar(node, key, &code->code, error)) return false;
    if (code->code.empty()) {
      *error = Where(node) + "'" + key + "' must be a node code, found an empty value";
      return false;
    }
    code->place = Place(node);
    return true;
  }

  // A mapping of node code -> label text.
  bool ParseLabels(const YAML::Node& node, std::string* error) {
    if (!node.IsMap()) {
      *error = Where(node) + "'labels' must be a mapping of node codes to labels";
      return false;
    }
    for (const auto& kv : node) {
      NodeLabel label;
      if (!Code(kv.first, "labels", &label.code, error) ||
          !Scalar(kv.second, "labels." + kv.first.Scalar(), &label.label, error)) {
        return false;
      }
      config_->labels.push_back(std::move(label));
    }
    return true;
  }

  // A node code, or a list of node codes.
  bool CodeList(const YAML::Node& node, const std::string& key, std::vector<PlacedCode>* codes,
                std::string* error) {
    if (node.IsScalar()) {
      codes->emplace_back();
      return Code(node, key, &codes->back(), error);
    }
    if (!node.IsSequence() || node.size() == 0) {
      *error = Where(node) + "'" + key + "' must be a node code or a list of node codes";
      return false;
    }
    for (const auto& entry : node) {
      codes->emplace_back();
      if (!Code(entry, key, &codes->back(), error)) return false;
    }
    return true;
  }

  // A mapping of group code -> {label, of, from, without}.
  bool ParseGroups(const YAML::Node& node, std::string* error) {
    if (!node.IsMap()) {
      *error = Where(node) + "'groups' must be a mapping of group codes to definitions";
      return false;
    }
    for (const auto& kv : node) {
      GroupDefinition group;
      if (!Code(kv.first, "groups", &group.code, error)) return false;
      const std::string key = "groups." + group.code.code;
      const YAML::Node& body = kv.second;
      if (!body.IsMap()) {
        *error = Where(body) + "'" + key + "' must be a mapping with keys " + JoinNames(kGroupKeys);
        return false;
      }
      if (!CheckKeys(body, kGroupKeys, key, error)) return false;
      if (const YAML::Node value = body["label"]) {
        if (!Scalar(value, key + ".label", &group.label, error)) return false;
      }
      if (const YAML::Node value = body["of"]) {
        if (!CodeList(value, key + ".of", &group.of, error)) return false;
      }
      if (const YAML::Node value = body["from"]) {
        if (!Code(value, key + ".from", &group.from, error)) return false;
      }
      if (const YAML::Node value = body["without"]) {
        if (!CodeList(value, key + ".without", &group.without, error)) return false;
      }
      config_->groups.push_back(std::move(group));
    }
    return true;
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
    if (const YAML::Node node = survey["prices"]) {
      if (!ParsePriceSources(node, error)) return false;
    }
    std::string* const paths[] = {nullptr, &files.expenditure, &files.regions, &files.items};
    CsvFormat* const formats[] = {nullptr, &files.expenditure_format, &files.regions_format,
                                  &files.items_format};
    for (size_t k = 1; k < kSurveyKeys.size(); ++k) {
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

  // survey.prices: one file (a path or a mapping) or a list of them; each
  // entry of a list is named survey.prices[k] (0-based, as YAML counts).
  bool ParsePriceSources(const YAML::Node& node, std::string* error) {
    std::vector<PriceSource>& sources = config_->survey.prices;
    if (!node.IsSequence()) {
      sources.resize(1);
      return PriceFile(node, "survey.prices", &sources[0], error);
    }
    if (node.size() == 0) {
      *error = Where(node) + "'survey.prices' lists no files";
      return false;
    }
    sources.resize(node.size());
    for (size_t k = 0; k < node.size(); ++k) {
      const std::string key = "survey.prices[" + std::to_string(k) + "]";
      if (!PriceFile(node[k], key, &sources[k], error)) return false;
    }
    for (size_t k = 1; k < sources.size(); ++k) {
      for (size_t j = 0; j < k; ++j) {
        if (sources[j].path == sources[k].path) {
          *error = Where(node[k]) + "survey.prices[" + std::to_string(k) + "] " +
                   QuoteValue(sources[k].path) + " is already listed as survey.prices[" +
                   std::to_string(j) + "]";
          return false;
        }
      }
    }
    return true;
  }

  // A price file: a path, or a mapping {path, delimiter, decimal, columns}.
  bool PriceFile(const YAML::Node& node, const std::string& key, PriceSource* source,
                 std::string* error) {
    if (!node.IsMap()) return SurveyFile(node, key, &source->path, &source->format, error);
    if (!CheckKeys(node, kPriceFileKeys, key, error)) return false;
    if (!SurveyFile(node, key, &source->path, &source->format, error, /*keys_checked=*/true)) {
      return false;
    }
    if (const YAML::Node columns = node["columns"]) {
      return ColumnMap(columns, key + ".columns", &source->columns, error);
    }
    return true;
  }

  // columns: {our name: the file's header, ...}.
  bool ColumnMap(const YAML::Node& node, const std::string& key,
                 std::vector<std::pair<std::string, std::string>>* columns, std::string* error) {
    if (!node.IsMap()) {
      *error = Where(node) + "'" + key + "' must be a mapping of our column names to the file's "
               "headers, e.g. {region: area_code, price: amount}";
      return false;
    }
    if (!CheckKeys(node, PriceColumnNames(), key, error)) return false;
    for (const auto& kv : node) {
      const std::string name = kv.first.Scalar();
      std::string header;
      if (!Scalar(kv.second, key + "." + name, &header, error)) return false;
      header = std::string(Trim(header));
      if (header.empty()) {
        *error = Where(kv.second) + "'" + key + "." + name + "' must name a column of the file";
        return false;
      }
      columns->emplace_back(name, header);
    }
    // Two of our columns may not read the same header, mapped or not.
    PriceSource probe;
    probe.columns = *columns;
    const std::vector<std::string>& names = PriceColumnNames();
    for (size_t a = 0; a < names.size(); ++a) {
      for (size_t b = a + 1; b < names.size(); ++b) {
        if (probe.HeaderOf(names[a]) == probe.HeaderOf(names[b])) {
          *error = Where(node) + key + ": columns " + QuoteValue(names[a]) + " and " +
                   QuoteValue(names[b]) + " would both read the file's column " +
                   QuoteValue(probe.HeaderOf(names[a]));
          return false;
        }
      }
    }
    return true;
  }

  // A file path, or a mapping {path, delimiter, decimal}; a caller that
  // takes more keys checks them itself (`keys_checked`).
  bool SurveyFile(const YAML::Node& node, const std::string& key, std::string* path,
                  CsvFormat* format, std::string* error, bool keys_checked = false) {
    if (!node.IsMap()) return Path(node, key, path, error);
    if (!keys_checked && !CheckKeys(node, kFileKeys, key, error)) return false;
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
    if (const YAML::Node node = root["matrices_up_to_regions"]) {
      double limit = 0;
      if (!Number(node, "matrices_up_to_regions", &limit, error)) return false;
      if (limit < 0 || limit != std::floor(limit) || limit > 1e9) {
        *error = Where(node) +
                 "matrices_up_to_regions must be a whole number from 0 to 1000000000, found '" +
                 node.Scalar() + "'";
        return false;
      }
      config_->matrices_up_to_regions = static_cast<int>(limit);
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

  // representative_weight, outlier_threshold, robust_errors,
  // report, threads.
  bool ParseSettings(const YAML::Node& root, std::string* error) {
    if (const YAML::Node node = root["representative_weight"]) {
      if (!Positive(node, "representative_weight", &config_->representative_weight, error)) {
        return false;
      }
      if (!RepresentativeWeightInRange(config_->representative_weight)) {
        *error = Where(node) + "representative_weight must be a number from 0.001 to 1000, found '" +
                 node.Scalar() + "'";
        return false;
      }
    }
    if (const YAML::Node node = root["cpd_cell_weights"]) {
      if (!EnumValue(node, "cpd_cell_weights", &config_->cpd_cell_weights, CpdCellWeightsNames(),
                     error)) {
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
    if (const YAML::Node node = root["robust_errors"]) {
      std::string text;
      RobustErrors kind;
      if (!Scalar(node, "robust_errors", &text, error)) return false;
      if (!FromString(text, &kind)) {
        *error = Where(node) + NotOneOf("robust_errors", text, {"off", "hc0", "hc1", "hc3"});
        return false;
      }
      config_->robust_errors = ToString(kind);
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
  // The value Scalar read last: its place, key and text.
  bool read_ = false;
  YAML::Mark read_mark_;
  std::string read_key_;
  std::string read_value_;
  ConfigError failure_;
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

std::string ToString(CpdCellWeights weights) { return NameOf(kCellWeightNames, weights); }

bool FromString(const std::string& text, CpdCellWeights* weights) {
  return ValueOf(kCellWeightNames, text, weights);
}

std::vector<std::string> CpdCellWeightsNames() { return NamesOf(kCellWeightNames); }

const std::vector<std::string>& PriceColumnNames() {
  static const std::vector<std::string> kNames = {"region",         "item",   "price",   "heading",
                                                  "representative", "weight", "quantity"};
  return kNames;
}

std::string PriceSource::HeaderOf(std::string_view name) const {
  for (const auto& [ours, header] : columns) {
    if (ours == name) return header;
  }
  return std::string(name);
}

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

bool ApplyGroupsAndLabels(const RunConfig& config, Classification* classification,
                          std::string* error) {
  const std::string& source = config.config_path.empty() ? "<config>" : config.config_path;
  return classification->SetGroups(config.groups, source, error) &&
         classification->SetLabels(config.labels, source, error);
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
  for (size_t k = 0; k < survey.prices.size(); ++k) {
    const PriceSource& source = survey.prices[k];
    const std::string key =
        survey.prices.size() == 1 ? "survey.prices" : "survey.prices[" + std::to_string(k) + "]";
    if (source.path.empty()) {
      *error = "no path given for " + key;
      return false;
    }
    if (!source.format.IsValid(error)) {
      *error = key + ": " + *error;
      return false;
    }
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
  if (!RepresentativeWeightInRange(representative_weight)) {
    *error = "representative_weight must be a number from 0.001 to 1000, found " +
             ShortestText(representative_weight);
    return false;
  }
  if (!(outlier_threshold > 0) || !std::isfinite(outlier_threshold)) {
    *error = "outlier_threshold must be a positive number";
    return false;
  }
  if (RobustErrors kind; !FromString(robust_errors, &kind)) {
    *error = NotOneOf("robust_errors", robust_errors, {"off", "hc0", "hc1", "hc3"});
    return false;
  }
  if (OutlierFit fit; !FromString(outlier_fit, &fit)) {
    *error = NotOneOf("outlier_fit", outlier_fit, {"robust", "least-squares"});
    return false;
  }
  if (matrices_up_to_regions < 0) {
    *error = "matrices_up_to_regions must be 0 or more";
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
  const CsvFormat* const formats[] = {&survey.expenditure_format, &survey.regions_format,
                                      &survey.items_format};
  const char* const keys[] = {"expenditure", "regions", "items"};
  for (int k = 0; k < 3; ++k) {
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

bool LoadRunConfig(const std::string& path, RunConfig* config, ConfigError* error) {
  *error = ConfigError();
  error->file = path;
  std::string text;
  if (!ReadWholeFile(path, ReadLimits().max_yaml_bytes, kConfigFileAdvice, &text,
                     &error->message)) {
    return false;
  }
  return ParseRunConfig(text, path, config, error);
}

bool LoadRunConfig(const std::string& path, RunConfig* config, std::string* error) {
  ConfigError failure;
  if (LoadRunConfig(path, config, &failure)) return true;
  *error = std::move(failure.message);
  return false;
}

bool ParseRunConfig(const std::string& yaml_text, const std::string& path, RunConfig* config,
                    ConfigError* error) {
  *error = ConfigError();
  error->file = path;
  RunConfig result;
  result.config_path = path;
  ConfigParser parser(path, &result);
  std::string message;
  if (!parser.Parse(yaml_text, &message)) {
    *error = parser.failure();
    error->file = path;
    error->message = std::move(message);
    return false;
  }
  if (!result.IsValid(&error->message)) {
    error->message = path + ": " + error->message;
    return false;
  }
  *config = std::move(result);
  return true;
}

bool ParseRunConfig(const std::string& yaml_text, const std::string& path, RunConfig* config,
                    std::string* error) {
  ConfigError failure;
  if (ParseRunConfig(yaml_text, path, config, &failure)) return true;
  *error = std::move(failure.message);
  return false;
}

}  // namespace paritas
