// Built with nlohmann::ordered_json so keys keep the order written here and
// the record diffs cleanly between runs.
#include "paritas/output/run_record.h"

#include <filesystem>
#include <map>
#include <nlohmann/json.hpp>

#include "base/dense_kernels.h"
#include "base/sha256.h"
#include "paritas/base/csv.h"
#include "paritas/base/read_limits.h"
#include "paritas/base/text.h"

namespace paritas {
namespace {

using Json = nlohmann::ordered_json;

// Text from outside (paths given on the command line, messages quoting
// data) may hold bytes that are not UTF-8, on which nlohmann::json throws:
// those bytes are written as "\xNN".
std::vector<std::string> ValidTexts(const std::vector<std::string>& texts) {
  std::vector<std::string> out;
  out.reserve(texts.size());
  for (const std::string& text : texts) out.push_back(ValidUtf8(text));
  return out;
}

// One price file as its path; several, or one with a column mapping, as a
// list of {path, columns}.
Json PricesJson(const std::vector<PriceSource>& sources) {
  if (sources.size() == 1 && sources[0].columns.empty()) return ValidUtf8(sources[0].path);
  Json list = Json::array();
  for (const PriceSource& source : sources) {
    Json columns = Json::object();
    for (const auto& [ours, header] : source.columns) columns[ours] = ValidUtf8(header);
    list.push_back({{"path", ValidUtf8(source.path)}, {"columns", columns}});
  }
  return list;
}

Json ConfigJson(const RunConfig& config) {
  Json survey = {{"prices", PricesJson(config.survey.prices)},
                 {"expenditure", ValidUtf8(config.survey.expenditure)},
                 {"regions", ValidUtf8(config.survey.regions)},
                 {"items", ValidUtf8(config.survey.items)},
                 {"external_parities", ValidUtf8(config.survey.external_parities)}};
  Json out = {{"config_path", ValidUtf8(config.config_path)},
              {"survey", survey},
              {"classification", config.has_classification ? ValidUtf8(config.classification_source)
                                                           : "(all headings under 'all')"},
              {"reference", config.reference.ToString()},
              {"elementary", config.elementary},
              {"aggregation", config.aggregation},
              {"invalid_rows", ToString(config.invalid_rows)},
              {"output", ValidUtf8(config.output)},
              {"matrices", ValidTexts(config.matrices)},
              {"matrices_up_to_regions", config.matrices_up_to_regions},
              {"representative_weight", config.representative_weight},
              {"outlier_threshold", config.outlier_threshold},
              {"outlier_fit", config.outlier_fit},
              {"robust_errors", config.robust_errors},
              {"report", config.report},
              {"report_region", ValidUtf8(config.report_region)},
              {"threads", config.threads}};
  Json rules = Json::object();
  for (const auto& [heading, rule] : config.missing_parities.headings) {
    rules[ValidUtf8(heading)] = ValidUtf8(rule);
  }
  out["missing_parities"] = {{"default", ValidUtf8(config.missing_parities.default_rule)},
                             {"headings", rules}};
  Json groups = Json::array();
  auto codes = [](const std::vector<PlacedCode>& list) {
    Json array = Json::array();
    for (const PlacedCode& c : list) array.push_back(ValidUtf8(c.code));
    return array;
  };
  for (const GroupDefinition& g : config.groups) {
    groups.push_back({{"code", ValidUtf8(g.code.code)},
                      {"label", ValidUtf8(g.label)},
                      {"of", codes(g.of)},
                      {"from", ValidUtf8(g.from.code)},
                      {"without", codes(g.without)}});
  }
  out["groups"] = groups;
  Json labels = Json::object();
  for (const NodeLabel& l : config.labels) labels[ValidUtf8(l.code.code)] = ValidUtf8(l.label);
  out["labels"] = labels;
  // Written only when set, so records of runs without quote weights keep their bytes.
  if (config.cpd_cell_weights != CpdCellWeights::kEqual) {
    out["cpd_cell_weights"] = ToString(config.cpd_cell_weights);
  }
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

std::string MissingParitiesRecordJson(const Survey& survey, const ParityResult& result) {
  Json out = Json::array();
  if (result.heading_rules.size() != static_cast<size_t>(survey.num_headings())) return out.dump();
  auto codes = [&](const std::vector<int>& regions) {
    Json list = Json::array();
    for (int r : regions) list.push_back(ValidUtf8(std::string(survey.regions.Code(r))));
    return list;
  };
  for (int h = 0; h < survey.num_headings(); ++h) {
    Json entry = Json::object();
    entry["heading"] = ValidUtf8(survey.heading_codes[h]);
    entry["rule"] = ValidUtf8(result.heading_rules[h].ToString());
    entry["regions_imputed"] = codes(result.imputed_regions[h]);
    entry["regions_missing"] = codes(result.missing_regions[h]);
    out.push_back(entry);
  }
  return out.dump();
}

std::string RunRecordJson(const RunRecord& record) {
  Json out;
  out["schema_version"] = kRunRecordSchemaVersion;
  // The kernels of the dense products: runs on CPUs with and without AVX2 +
  // FMA may differ in the last digits of the outlier screen's figures.
  out["tool"] = {{"name", "paritas"},
                 {"version", PARITAS_VERSION},
                 {"dense_kernels", internal::ToString(internal::ActiveDenseKernels())}};
  if (!record.run_id.empty()) out["run_id"] = record.run_id;
  out["command"] = record.command;
  out["outcome"] = record.outcome;
  out["message"] = ValidUtf8(record.message);
  out["exit_code"] = record.exit_code;
  if (record.config != nullptr) out["configuration"] = ConfigJson(*record.config);
  if (record.load != nullptr) {
    Json inputs = Json::array();
    for (const InputFileSummary& file : record.load->files) {
      if (!file.given) continue;
      inputs.push_back({{"role", file.role},
                        {"path", ValidUtf8(file.path)},
                        {"delimiter", std::string(1, file.format.delimiter)},
                        {"decimal", std::string(1, file.format.decimal)},
                        {"size_bytes", file.size_bytes},
                        {"sha256", file.sha256},
                        {"rows_read", file.rows_read},
                        {"rows_used", file.rows_used},
                        {"rows_rejected", file.rows_rejected},
                        {"rows_rejected_by_cascade", file.rows_rejected_by_cascade},
                        {"ignored_columns", ValidTexts(file.ignored_columns)}});
      // Only for a price file read through a column mapping.
      if (!file.columns.empty()) {
        Json columns = Json::object();
        for (const auto& [ours, header] : file.columns) columns[ours] = ValidUtf8(header);
        inputs.back()["columns"] = columns;
      }
    }
    out["inputs"] = inputs;
    out["rows_rejected"] = record.load->num_rows_rejected;
    out["rows_rejected_by_cascade"] = record.load->num_rows_rejected_by_cascade;
    Json codes = Json::array();
    for (const RejectedCode& code : record.load->rejected_codes) {
      codes.push_back({{"kind", code.kind},
                       {"code", ValidUtf8(code.code)},
                       {"file", ValidUtf8(code.file)},
                       {"line", code.line},
                       {"reason", ValidUtf8(code.reason)},
                       {"price_rows", code.num_price_rows},
                       {"expenditure_rows", code.num_expenditure_rows},
                       {"external_parity_rows", code.num_external_parity_rows}});
    }
    out["rejected_codes"] = codes;
  }
  if (record.survey != nullptr) {
    const Survey& s = *record.survey;
    out["survey"] = {{"num_regions", s.num_regions()},
                     {"num_items", s.num_items()},
                     {"num_headings", s.num_headings()},
                     {"num_nodes", s.classification.nodes().size()},
                     {"num_quotes", s.num_quotes},
                     {"num_cells", s.cells.size()},
                     {"weights", s.national_weights ? "national" : "regional"}};
  }
  if (record.config != nullptr) {
    const bool weighted = record.survey != nullptr && !record.survey->cells.weight.empty();
    out["methods"] = {{"cell_price", weighted
                                         ? "geometric mean of the quotes weighted by their weight"
                                         : "geometric mean of the quotes"},
                      {"elementary", record.config->elementary},
                      {"aggregation", record.config->aggregation},
                      {"reference", record.config->reference.ToString()}};
  }
  if (record.compute != nullptr) {
    out["computation"] = {{"num_headings_given", record.compute->num_headings_given},
                          {"num_headings_used", record.compute->num_headings_used},
                          {"num_aggregates", record.compute->num_aggregates},
                          {"num_parities_imputed", record.compute->num_parities_imputed},
                          {"num_parities_missing", record.compute->num_parities_missing},
                          {"num_groups", record.compute->num_groups}};
  }
  out["num_warnings"] = record.warnings.size();
  if (!record.warning_counts.empty()) {
    Json counts = Json::object();
    for (const auto& [kind, count] : record.warning_counts) counts[kind] = count;
    out["warning_counts"] = counts;
  }
  const size_t listed = std::min(record.warnings.size(), kMaxRecordedWarnings);
  out["warnings"] = ValidTexts(std::vector<std::string>(
      record.warnings.begin(), record.warnings.begin() + listed));
  if (record.output_digests.empty()) {
    out["outputs"] = record.outputs;
  } else {
    Json outputs = Json::array();
    for (const OutputDigest& d : record.output_digests) {
      outputs.push_back({{"path", ValidUtf8(d.path)}, {"bytes", d.bytes}, {"sha256", d.sha256}});
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
  // Every string above is valid UTF-8; should one slip through, it is
  // written with U+FFFD rather than abort the run (dump throws by default).
  return out.dump(2, ' ', false, Json::error_handler_t::replace) + "\n";
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
  for (const char* key : {"reference", "elementary", "aggregation", "invalid_rows",
                          "representative_weight", "cpd_cell_weights", "missing_parities",
                          "groups"}) {
    const Json x = a.value("configuration", Json::object()).value(key, Json());
    const Json y = b.value("configuration", Json::object()).value(key, Json());
    if (x != y) out.push_back(std::string(key) + ": " + text(x) + " in this run, " + text(y) + " in the other");
  }
  auto digests = [](const Json& record) {
    // Several price files: the second is "prices[1]", and so on.
    std::map<std::string, std::string> by_role;
    std::map<std::string, int> seen;
    for (const Json& input : record.value("inputs", Json::array())) {
      const std::string role = input.value("role", "");
      const int k = seen[role]++;
      by_role[k == 0 ? role : role + "[" + std::to_string(k) + "]"] = input.value("sha256", "");
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
