// Built with nlohmann::ordered_json so keys keep the order written here and
// the record diffs cleanly between runs.
#include "paritas/output/run_record.h"

#include <filesystem>
#include <map>

#include <nlohmann/json.hpp>

#include "base/sha256.h"
#include "paritas/base/csv.h"
#include "paritas/base/read_limits.h"

namespace paritas {
namespace {

using Json = nlohmann::ordered_json;

Json ConfigJson(const RunConfig& config) {
  Json survey = {{"prices", config.survey.prices},
                 {"expenditure", config.survey.expenditure},
                 {"regions", config.survey.regions},
                 {"items", config.survey.items}};
  Json out = {{"config_path", config.config_path},
              {"survey", survey},
              {"classification", config.has_classification ? config.classification_source : "(all headings under 'all')"},
              {"reference", config.reference.ToString()},
              {"elementary", config.elementary},
              {"aggregation", config.aggregation},
              {"invalid_rows", ToString(config.invalid_rows)},
              {"output", config.output},
              {"matrices", config.matrices},
              {"representative_weight", config.representative_weight},
              {"outlier_threshold", config.outlier_threshold},
              {"robust_standard_errors", config.robust_standard_errors},
              {"report", config.report},
              {"threads", config.threads}};
  out["limits"] = {{"max_file_bytes", config.limits.max_file_bytes},
                   {"max_yaml_bytes", config.limits.max_yaml_bytes},
                   {"max_record_bytes", config.limits.max_record_bytes},
                   {"max_field_bytes", config.limits.max_field_bytes},
                   {"max_yaml_depth", config.limits.max_yaml_depth}};
  return out;
}

}  // namespace

std::vector<OutputDigest> DigestOutputs(const std::vector<OutputFile>& files) {
  std::vector<OutputDigest> digests(files.size());
#pragma omp parallel for schedule(dynamic, 1) if (files.size() > 1)
  for (size_t k = 0; k < files.size(); ++k) {
    digests[k] = {files[k].relative_path, static_cast<int64_t>(files[k].contents.size()),
                  internal::Sha256Hex(files[k].contents)};
  }
  return digests;
}

std::string RunRecordJson(const RunRecord& record) {
  Json out;
  out["schema_version"] = kRunRecordSchemaVersion;
  out["tool"] = {{"name", "paritas"}, {"version", PARITAS_VERSION}};
  if (!record.run_id.empty()) out["run_id"] = record.run_id;
  out["command"] = record.command;
  out["outcome"] = record.outcome;
  out["message"] = record.message;
  out["exit_code"] = record.exit_code;
  if (record.config != nullptr) out["configuration"] = ConfigJson(*record.config);
  if (record.load != nullptr) {
    Json inputs = Json::array();
    for (const InputFileSummary& file : record.load->files) {
      if (!file.given) continue;
      inputs.push_back({{"role", file.role},
                        {"path", file.path},
                        {"size_bytes", file.size_bytes},
                        {"sha256", file.sha256},
                        {"rows_read", file.rows_read},
                        {"rows_used", file.rows_used},
                        {"rows_rejected", file.rows_rejected},
                        {"ignored_columns", file.ignored_columns}});
    }
    out["inputs"] = inputs;
    out["rows_rejected"] = record.load->num_rows_rejected;
  }
  if (record.survey != nullptr) {
    const Survey& s = *record.survey;
    out["survey"] = {{"num_regions", s.num_regions()},
                     {"num_items", s.num_items()},
                     {"num_headings", s.num_headings()},
                     {"num_nodes", s.classification.nodes().size()},
                     {"num_quotes", s.num_quotes},
                     {"num_cells", s.cells.size()}};
  }
  if (record.config != nullptr) {
    out["methods"] = {{"cell_price", "geometric mean of the quotes"},
                      {"elementary", record.config->elementary},
                      {"aggregation", record.config->aggregation},
                      {"reference", record.config->reference.ToString()}};
  }
  if (record.compute != nullptr) {
    out["computation"] = {{"num_headings_given", record.compute->num_headings_given},
                          {"num_headings_used", record.compute->num_headings_used},
                          {"num_aggregates", record.compute->num_aggregates}};
  }
  out["warnings"] = record.warnings;
  if (record.output_digests.empty()) {
    out["outputs"] = record.outputs;
  } else {
    Json outputs = Json::array();
    for (const OutputDigest& d : record.output_digests) {
      outputs.push_back({{"path", d.path}, {"bytes", d.bytes}, {"sha256", d.sha256}});
    }
    outputs.push_back({{"path", "run.json"}});
    out["outputs"] = outputs;
  }
  Json stages = Json::object();
  for (const StageTiming& stage : record.stages) stages[stage.stage] = stage.seconds;
  out["seconds"] = stages;
  for (const auto& [key, text] : record.sections) {
    out[key] = Json::parse(text, nullptr, /*allow_exceptions=*/false);
  }
  return out.dump(2) + "\n";
}

bool ReadRunRecord(const std::string& folder, std::string* run_id, std::string* json,
                   std::string* error) {
  const std::string path = (std::filesystem::path(folder) / "run.json").string();
  if (!ReadWholeFile(path, ReadLimits().max_file_bytes, LimitAdvice("limits.max_file_bytes"), json, error)) {
    return false;
  }
  const Json record = Json::parse(*json, nullptr, /*allow_exceptions=*/false);
  if (record.is_discarded() || !record.is_object() || !record.contains("tool")) {
    *error = path + ": not a run record of paritas";
    return false;
  }
  *run_id = record.contains("run_id") && record["run_id"].is_string() ? record["run_id"].get<std::string>() : "";
  return true;
}

std::string RunConfigPath(const std::string& json) {
  const Json record = Json::parse(json, nullptr, /*allow_exceptions=*/false);
  if (!record.is_object()) return "";
  const Json path = record.value("configuration", Json::object()).value("config_path", Json());
  return path.is_string() ? path.get<std::string>() : "";
}

std::vector<std::string> RunDifferences(const std::string& this_json, const std::string& other_json) {
  const Json a = Json::parse(this_json, nullptr, false), b = Json::parse(other_json, nullptr, false);
  std::vector<std::string> out;
  if (a.is_discarded() || b.is_discarded()) return {"a run record is not valid JSON"};
  auto text = [](const Json& v) { return v.is_string() ? v.get<std::string>() : v.dump(); };
  for (const char* key : {"reference", "elementary", "aggregation", "invalid_rows", "representative_weight"}) {
    const Json x = a.value("configuration", Json::object()).value(key, Json());
    const Json y = b.value("configuration", Json::object()).value(key, Json());
    if (x != y) out.push_back(std::string(key) + ": " + text(x) + " in this run, " + text(y) + " in the other");
  }
  auto digests = [](const Json& record) {
    std::map<std::string, std::string> by_role;
    for (const Json& input : record.value("inputs", Json::array())) {
      by_role[input.value("role", "")] = input.value("sha256", "");
    }
    return by_role;
  };
  const auto x = digests(a), y = digests(b);
  for (const auto& [role, sha] : x) {
    const auto found = y.find(role);
    if (found == y.end()) {
      out.push_back("input " + role + ": read by this run only");
    } else if (found->second != sha) {
      out.push_back("input " + role + ": different files (SHA-256 " + sha.substr(0, 12) + "... and " +
                    found->second.substr(0, 12) + "...)");
    }
  }
  for (const auto& [role, sha] : y) {
    if (x.find(role) == x.end()) out.push_back("input " + role + ": read by the other run only");
  }
  return out;
}

}  // namespace paritas
