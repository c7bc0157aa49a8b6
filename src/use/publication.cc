// Publication tables: everything is read and checked first (run record,
// configuration, regions file, parities, intervals), the tables are built in
// memory, and only then are the files written, each whole under a temporary
// name. Figures are rounded once, through their decimal text, so the CSV and
// the workbook hold the same numbers.
#include "paritas/use/publication.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <limits>
#include <map>
#include <nlohmann/json.hpp>
#include <system_error>

#include "base/not_a_number.h"
#include "base/sha256.h"
#include "paritas/aggregation/normalisation.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/output/run_folder.h"
#include "paritas/output/run_record.h"
#include "paritas/survey/config.h"
#include "use/run_tables.h"

namespace paritas {
namespace {

namespace fs = std::filesystem;
using Json = nlohmann::json;
using internal::ParseIntervalBounds;
using internal::ParseNonNegative;
using internal::ParseParity;
using internal::ReadRunTable;
using internal::ReadRunTableAt;
using internal::TableRow;

constexpr int kMaxDecimals = 6;

struct PublicationOrderName {
  PublicationOrder order;
  const char* name;
};
constexpr PublicationOrderName kOrderNames[] = {{PublicationOrder::kCode, "code"},
                                                {PublicationOrder::kLevel, "level"}};

// What parities.csv (and bootstrap.csv) hold, by node and region in file order.
struct RunFigures {
  std::vector<std::string> nodes;    // first appearance order
  std::vector<std::string> regions;  // first appearance order
  std::map<std::pair<int, int>, double> level, real_per_head, lower, upper;
  bool has_real_per_head = false;
};

double Rounded(double value, int decimals) {
  if (!std::isfinite(value)) return kNaN;
  double parsed = kNaN;
  ParseNumber(FormatFixed(value, decimals), &parsed);
  return parsed;
}

double Lookup(const std::map<std::pair<int, int>, double>& values, int node, int region) {
  const auto it = values.find({node, region});
  return it == values.end() ? kNaN : it->second;
}

int IndexOf(std::vector<std::string>* list, std::string_view code) {
  const auto it = std::find(list->begin(), list->end(), code);
  if (it != list->end()) return static_cast<int>(it - list->begin());
  list->emplace_back(code);
  return static_cast<int>(list->size()) - 1;
}

// Reads parities.csv of the run `run_id` (read from run.json before: a
// folder replaced meanwhile is refused).
bool ReadParitiesCsv(const PublishOptions& options, const std::string& run_id, RunFigures* figures,
                     std::string* error) {
  const std::string path = (fs::path(options.run_dir) / "parities.csv").string();
  int64_t num_rows = 0;
  const auto handle = [&](const TableRow& row, std::string* message) {
    const int node = IndexOf(&figures->nodes, row.fields[0]);
    const int region = IndexOf(&figures->regions, row.fields[1]);
    double level = kNaN, per_head = kNaN;
    if (!ParseParity(path, row.line, row.columns[2], "parity", row.fields[2], &level, message) ||
        !ParseNonNegative(path, row.line, row.columns[3], "real_per_capita_index", row.fields[3], &per_head,
                          message)) {
      return false;
    }
    if (!figures->level.emplace(std::make_pair(node, region), level).second) {
      *message = LocatedMessage(path, row.line, row.columns[0],
                                "duplicate row for node " + QuoteValue(row.fields[0]) +
                                    " and region " + QuoteValue(row.fields[1]));
      return false;
    }
    figures->real_per_head[{node, region}] = per_head;
    figures->has_real_per_head = figures->has_real_per_head || std::isfinite(per_head);
    ++num_rows;
    return true;
  };
  if (!ReadRunTable(options.run_dir, "parities.csv", options.limits,
                    {"node", "region", "parity", "real_per_capita_index"},
                    {true, true, true, false}, handle, error, run_id)) {
    return false;
  }
  if (num_rows == 0) {
    *error = path + ": no data rows (only a header)";
    return false;
  }
  return true;
}

bool ReadBootstrapCsv(const PublishOptions& options, const std::string& path, RunFigures* figures,
                      std::string* error) {
  if (!internal::SameRunSettings(options.run_dir, error)) {
    *error += "; or publish without intervals (--no-intervals)";
    return false;
  }
  const auto handle = [&](const TableRow& row, std::string* message) {
    double lower = kNaN, upper = kNaN;
    if (!ParseIntervalBounds(path, row, 2, 3, &lower, &upper, message)) return false;
    const auto node = std::find(figures->nodes.begin(), figures->nodes.end(), row.fields[0]);
    const auto region = std::find(figures->regions.begin(), figures->regions.end(), row.fields[1]);
    // Intervals of pairs the parities do not hold cannot be shown.
    if (node == figures->nodes.end() || region == figures->regions.end()) return true;
    const std::pair<int, int> key(static_cast<int>(node - figures->nodes.begin()),
                                  static_cast<int>(region - figures->regions.begin()));
    figures->lower[key] = lower;
    figures->upper[key] = upper;
    return true;
  };
  return ReadRunTableAt(path, options.limits, {"node", "region", "lower", "upper"},
                        {true, true, true, true}, handle, error);
}

// The SHA-256 of the input of `role` recorded in run.json, or "".
std::string RecordedDigest(const Json& record, const std::string& role) {
  for (const Json& input : record.value("inputs", Json::array())) {
    if (input.is_object() && input.value("role", "") == role) return input.value("sha256", "");
  }
  return "";
}

// Reads region names from the regions file of the run's configuration,
// refusing a file that changed since the run (names could then belong to
// other codes).
bool ReadRegionNames(const RunConfig& config, const Json& record, const ReadLimits& limits,
                     std::map<std::string, std::string>* names, std::string* error) {
  const std::string& path = config.survey.regions;
  if (path.empty()) return true;
  std::string contents;
  if (!ReadWholeFile(path, limits.max_file_bytes, LimitAdvice("limits.max_file_bytes"), &contents,
                     error)) {
    return false;
  }
  internal::Sha256 hasher;
  hasher.Update(contents.data(), contents.size());
  const std::string now = hasher.HexDigest();
  const std::string then = RecordedDigest(record, "regions");
  if (now != then) {
    *error = path + ": the regions file is not the one the run read (SHA-256 " +
             (then.empty() ? std::string("not recorded") : then.substr(0, 12) + "...") +
             " in run.json, " + now.substr(0, 12) +
             "... now); rerun compute or give the "
             "configuration of this run with --config";
    return false;
  }
  CsvReader reader(contents);
  reader.set_limits(limits);
  reader.set_delimiter(config.survey.regions_format.delimiter);
  CsvRecord row;
  if (!reader.Next(&row)) return true;  // compute accepted the file; nothing to name
  const CsvHeader header(row.fields);
  const int code_column = header.Find("region"), name_column = header.Find("name");
  if (code_column < 0 || name_column < 0) return true;
  while (reader.Next(&row)) {
    if (static_cast<int>(row.fields.size()) <= std::max(code_column, name_column)) continue;
    (*names)[std::string(Trim(row.fields[code_column]))] =
        std::string(Trim(row.fields[name_column]));
  }
  return true;
}

// What the run record says, checked to be a compute run.
bool ReadRecord(const PublishOptions& options, Json* record, std::string* run_id,
                std::string* error) {
  std::string json;
  if (!ReadRunRecord(options.run_dir, run_id, &json, error)) return false;
  *record = Json::parse(json, nullptr, /*allow_exceptions=*/false);
  const std::string command = record->value("command", "");
  // A carried run (paritas carry) is a run folder of the same layout.
  if (command != "compute" && command != "carry") {
    *error = (fs::path(options.run_dir) / "run.json").string() + ": a record of '" + command +
             "', not of compute; give the output folder of 'paritas compute'";
    return false;
  }
  return true;
}

std::string RecordText(const Json& section, const char* key) {
  const Json value = section.value(key, Json());
  return value.is_string() ? value.get<std::string>() : (value.is_null() ? "" : value.dump());
}

// Every node of the run must be a node of the configuration's tree (the
// same tree, or the depth and order of the columns would be wrong).
bool CheckNodes(const RunFigures& figures, const RunConfig& config, std::string* error) {
  for (const std::string& code : figures.nodes) {
    if (config.classification.FindNode(code) < 0) {
      *error = "node " + QuoteValue(code) + " of parities.csv is not in the classification of " +
               config.config_path + "; give the configuration of this run with --config";
      return false;
    }
  }
  return true;
}

// Nodes published, in classification order, and region rows in the order asked.
void ChooseNodesAndRegions(const PublishOptions& options, const RunConfig& config,
                           const RunFigures& figures, std::vector<int>* nodes,
                           std::vector<int>* regions) {
  for (const ClassificationNode& node : config.classification.nodes()) {
    if (options.max_depth >= 0 && node.depth > options.max_depth) continue;
    const auto it = std::find(figures.nodes.begin(), figures.nodes.end(), node.code);
    if (it != figures.nodes.end()) nodes->push_back(static_cast<int>(it - figures.nodes.begin()));
  }
  regions->resize(figures.regions.size());
  for (size_t r = 0; r < regions->size(); ++r) (*regions)[r] = static_cast<int>(r);
  const auto root_it =
      std::find(figures.nodes.begin(), figures.nodes.end(), config.classification.nodes()[0].code);
  const int root =
      root_it == figures.nodes.end() ? -1 : static_cast<int>(root_it - figures.nodes.begin());
  const auto by_code = [&](int a, int b) { return figures.regions[a] < figures.regions[b]; };
  if (options.order == PublicationOrder::kCode) {
    std::sort(regions->begin(), regions->end(), by_code);
    return;
  }
  std::sort(regions->begin(), regions->end(), [&](int a, int b) {
    const double x = Lookup(figures.level, root, a), y = Lookup(figures.level, root, b);
    if (std::isnan(x) != std::isnan(y)) return std::isnan(y);
    if (!std::isnan(x) && x != y) return x > y;
    return by_code(a, b);
  });
}

std::string ReferenceTitle(const std::string& reference) {
  if (reference == "mean") return "geometric mean of the regions = 100";
  if (reference == "weighted-mean") return "expenditure-weighted geometric mean = 100";
  if (reference == "country") return "country = 100";
  return "region " + reference + " = 100";
}

void BuildTables(const PublishOptions& options, const RunConfig& config, const RunFigures& figures,
                 const std::map<std::string, std::string>& names, const std::string& reference,
                 PublishSummary* summary) {
  std::vector<int> nodes, regions;
  ChooseNodesAndRegions(options, config, figures, &nodes, &regions);
  const bool intervals = !figures.lower.empty();
  PublicationTable levels;
  levels.sheet = "Price levels";
  levels.title = "Price level indices (" + ReferenceTitle(reference) + ")";
  PublicationTable per_head;
  per_head.sheet = "Real per head";
  per_head.title = "Real expenditure per head, index (country = 100)";
  for (int n : nodes) {
    levels.columns.push_back(figures.nodes[n]);
    if (intervals) {
      levels.columns.push_back(figures.nodes[n] + " lower");
      levels.columns.push_back(figures.nodes[n] + " upper");
    }
    per_head.columns.push_back(figures.nodes[n]);
  }
  for (int r : regions) {
    const std::string& code = figures.regions[r];
    const auto name = names.find(code);
    const std::string shown = name == names.end() || name->second.empty() ? code : name->second;
    std::vector<double> level_row, per_head_row;
    for (int n : nodes) {
      level_row.push_back(Rounded(Lookup(figures.level, n, r), options.decimals));
      if (intervals) {
        level_row.push_back(Rounded(Lookup(figures.lower, n, r), options.decimals));
        level_row.push_back(Rounded(Lookup(figures.upper, n, r), options.decimals));
      }
      per_head_row.push_back(Rounded(Lookup(figures.real_per_head, n, r), options.decimals));
    }
    for (PublicationTable* table : {&levels, &per_head}) {
      table->region_codes.push_back(code);
      table->region_names.push_back(shown);
    }
    levels.values.push_back(std::move(level_row));
    per_head.values.push_back(std::move(per_head_row));
  }
  summary->num_regions = static_cast<int>(regions.size());
  summary->num_nodes_given = static_cast<int>(figures.nodes.size());
  summary->num_nodes_used = static_cast<int>(nodes.size());
  summary->has_intervals = intervals;
  summary->has_real_per_head = figures.has_real_per_head;
  summary->tables.push_back(std::move(levels));
  if (figures.has_real_per_head) summary->tables.push_back(std::move(per_head));
}

// The interval sentence of the notes, from the sensitivity run record.
std::string IntervalNote(const std::string& run_dir) {
  std::string id, json, error;
  if (!ReadRunRecord((fs::path(run_dir) / "sensitivity").string(), &id, &json, &error)) return "";
  const Json record = Json::parse(json, nullptr, false);
  const Json settings =
      record.value("sensitivity", Json::object()).value("settings", Json::object());
  const double level = settings.value("level", 0.0);
  const int replicates = settings.value("replicates", 0);
  // "expanded" or "percentile"; runs from before the choice existed have none.
  const std::string kind = settings.value("interval", "");
  const std::string kind_words = kind == "expanded"     ? "expanded percentile "
                                 : kind == "percentile" ? "percentile "
                                                        : "";
  return FormatShareAsPercent(level) + " % " + kind_words +
         "bootstrap interval over item resamples (" +
         std::to_string(replicates) + " replicates), sensitivity run " + id;
}

void FillNotes(const Json& record, const std::string& run_id, const std::string& run_dir,
               bool intervals, PublicationNotes* notes) {
  const Json configuration = record.value("configuration", Json::object());
  notes->run_id = run_id;
  notes->reference = RecordText(configuration, "reference");
  notes->elementary = RecordText(configuration, "elementary");
  notes->aggregation = RecordText(configuration, "aggregation");
  notes->tool_version = RecordText(record.value("tool", Json::object()), "version");
  for (const Json& input : record.value("inputs", Json::array())) {
    if (!input.is_object() || input.value("path", "").empty()) continue;
    notes->sources.push_back(input.value("role", "") + ": " + input.value("path", "") +
                             " (SHA-256 " + input.value("sha256", "") + ")");
  }
  if (intervals) notes->interval = IntervalNote(run_dir);
  const Json carry = record.value("carry", Json::object());
  if (carry.is_object()) {
    notes->extrapolation = RecordText(carry, "caution");
    notes->extrapolated_to = RecordText(carry, "period");
  }
}

// Outputs may neither be inputs nor lie inside the run folder.
bool CheckPaths(const PublishOptions& options,
                const std::vector<std::pair<std::string, std::string>>& inputs,
                std::string* error) {
  PathGuard guard;
  for (const auto& [path, role] : inputs) guard.AddInput(path, role);
  std::vector<std::pair<std::string, std::string>> outputs;
  if (!options.csv_path.empty()) {
    outputs.push_back({options.csv_path, "--csv"});
    outputs.push_back({RealPerHeadCsvPath(options.csv_path), "--csv (real per head)"});
  }
  if (!options.xlsx_path.empty()) outputs.push_back({options.xlsx_path, "--xlsx"});
  std::error_code ec;
  const fs::path run = fs::weakly_canonical(options.run_dir, ec);
  for (const auto& [path, role] : outputs) {
    guard.AddOutputFile(path, role);
    const fs::path relative = fs::weakly_canonical(path, ec).lexically_relative(run);
    if (!relative.empty() && *relative.begin() != "..") {
      *error = role + " '" + path + "' lies inside the run folder " + options.run_dir +
               ", which compute replaces whole; write the tables elsewhere";
      return false;
    }
  }
  return guard.Check(error);
}

bool WriteFiles(const PublishOptions& options, PublishSummary* summary, std::string* error) {
  const std::vector<std::string> notes = summary->notes.Lines(options.decimals, options.order);
  if (!options.xlsx_path.empty()) {
    if (!WritePublicationWorkbook(options.xlsx_path, summary->tables, notes, options.decimals,
                                  error)) {
      return false;
    }
    summary->files_written.push_back(options.xlsx_path);
  }
  if (options.csv_path.empty()) return true;
  const std::vector<std::string> paths = {options.csv_path, RealPerHeadCsvPath(options.csv_path)};
  for (size_t t = 0; t < summary->tables.size(); ++t) {
    if (!WriteFileAtomically(paths[t], PublicationCsv(summary->tables[t], options.decimals),
                             error)) {
      return false;
    }
    summary->files_written.push_back(paths[t]);
  }
  return true;
}

}  // namespace

std::string ToString(PublicationOrder order) {
  for (const PublicationOrderName& entry : kOrderNames) {
    if (entry.order == order) return entry.name;
  }
  return "code";
}

bool FromString(const std::string& text, PublicationOrder* order) {
  for (const PublicationOrderName& entry : kOrderNames) {
    if (ToLower(text) == entry.name) {
      *order = entry.order;
      return true;
    }
  }
  return false;
}

std::vector<std::string> PublicationOrderNames() {
  std::vector<std::string> names;
  for (const PublicationOrderName& entry : kOrderNames) names.push_back(entry.name);
  return names;
}

bool PublishOptions::IsValid(std::string* error) const {
  if (run_dir.empty()) {
    *error = "the run folder is required (the output folder of 'paritas compute')";
    return false;
  }
  if (csv_path.empty() && xlsx_path.empty()) {
    *error = "nothing to write: give --csv FILE, --xlsx FILE or both";
    return false;
  }
  if (decimals < 0 || decimals > kMaxDecimals) {
    *error = "decimals must be from 0 to " + std::to_string(kMaxDecimals) + ", found " +
             std::to_string(decimals);
    return false;
  }
  if (max_depth < -1) {
    *error = "max_depth must be -1 (every node) or more, found " + std::to_string(max_depth);
    return false;
  }
  const std::string extension = fs::path(xlsx_path).extension().string();
  if (!xlsx_path.empty() && ToLower(extension) != ".xlsx") {
    *error = "--xlsx '" + xlsx_path + "': a workbook's name must end in .xlsx, found '" +
             extension + "'";
    return false;
  }
  return true;
}

std::string RealPerHeadCsvPath(const std::string& csv_path) {
  const std::string suffix = ".csv";
  const bool ends = csv_path.size() >= suffix.size() &&
                    ToLower(csv_path.substr(csv_path.size() - suffix.size())) == suffix;
  return (ends ? csv_path.substr(0, csv_path.size() - suffix.size()) : csv_path) +
         "_real_per_head.csv";
}

std::string PublicationCsv(const PublicationTable& table, int decimals) {
  std::string out = "region,name";
  for (const std::string& column : table.columns) {
    out += ',';
    AppendCsvField(column, &out);
  }
  out += '\n';
  for (size_t r = 0; r < table.values.size(); ++r) {
    AppendCsvField(table.region_codes[r], &out);
    out += ',';
    AppendCsvField(table.region_names[r], &out);
    for (double value : table.values[r]) {
      out += ',';
      AppendFixed(value, decimals, &out);
    }
    out += '\n';
  }
  return out;
}

std::string PublishSummary::BriefReport() const {
  return "published " + std::to_string(num_regions) + " regions x " +
         std::to_string(num_nodes_used) + " nodes of run " + run_id + ": " +
         std::to_string(tables.size()) + (tables.size() == 1 ? " table" : " tables") +
         (has_intervals ? " (price levels with intervals)" : "");
}

bool Publish(const PublishOptions& options, PublishSummary* summary) {
  *summary = PublishSummary();
  const auto fail = [summary](const std::string& message) {
    summary->outcome = PublishOutcome::kInvalidInput;
    summary->message = message;
    return false;
  };
  std::string error;
  if (!options.IsValid(&error)) return fail(error);
  Json record;
  if (!ReadRecord(options, &record, &summary->run_id, &error)) return fail(error);
  const std::string config_path =
      options.config_path.empty() ? RunConfigPath(record.dump()) : options.config_path;
  if (config_path.empty()) {
    return fail((fs::path(options.run_dir) / "run.json").string() +
                ": names no configuration; give it with --config");
  }
  RunConfig config;
  if (!LoadRunConfig(config_path, &config, &error))
    {
    return fail("the run's configuration: " + error +
                "; give the configuration of this run with --config");
  }
  std::map<std::string, std::string> names;
  if (!ReadRegionNames(config, record, options.limits, &names, &error)) return fail(error);
  RunFigures figures;
  if (!ReadParitiesCsv(options, summary->run_id, &figures, &error)) return fail(error);
  // Without a classification compute put every heading under one root, the
  // first node of parities.csv.
  if (!config.has_classification) {
    std::vector<std::string> headings;
    for (size_t k = 1; k < figures.nodes.size(); ++k) {
      const bool is_group =
          std::any_of(config.groups.begin(), config.groups.end(),
                      [&](const GroupDefinition& g) { return g.code.code == figures.nodes[k]; });
      if (!is_group) headings.push_back(figures.nodes[k]);
    }
    config.classification = Classification::Flat(headings, figures.nodes[0]);
  }
  // The run's analytic groups and labels, as compute set them.
  if (!ApplyGroupsAndLabels(config, &config.classification, &error)) {
    return fail("the run's configuration: " + error);
  }
  if (!CheckNodes(figures, config, &error)) return fail(error);
  const std::string bootstrap =
      (fs::path(options.run_dir) / "sensitivity" / "bootstrap.csv").string();
  std::error_code ec;
  const bool intervals = options.intervals && fs::exists(bootstrap, ec);
  if (intervals && !ReadBootstrapCsv(options, bootstrap, &figures, &error)) return fail(error);
  std::vector<std::pair<std::string, std::string>> inputs = {
      {(fs::path(options.run_dir) / "parities.csv").string(), "parities"},
      {(fs::path(options.run_dir) / "run.json").string(), "run record"},
      {config_path, "configuration"}};
  if (!config.survey.regions.empty()) inputs.push_back({config.survey.regions, "regions file"});
  if (intervals) inputs.push_back({bootstrap, "intervals"});
  if (!CheckPaths(options, inputs, &error)) return fail(error);
  const std::string reference =
      RecordText(record.value("configuration", Json::object()), "reference");
  BuildTables(options, config, figures, names, reference, summary);
  FillNotes(record, summary->run_id, options.run_dir, intervals, &summary->notes);
  if (!summary->notes.extrapolated_to.empty()) {
    for (PublicationTable& table : summary->tables) {
      table.title += ", extrapolated to period '" + summary->notes.extrapolated_to +
                     "' by price indices (not measured)";
    }
  }
  if (!WriteFiles(options, summary, &error)) return fail(error);
  summary->outcome = PublishOutcome::kOk;
  summary->message = "ok";
  return true;
}

}  // namespace paritas
