// `pair`'s interval of the ratio, read from the sensitivity results beside
// the run only when they are of the same run: an interval from another
// comparison would bracket the wrong ratio, so a mismatch is refused with
// the reason rather than used.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "paritas/base/text.h"
#include "paritas/output/run_record.h"
#include "paritas/uncertainty/pair_ratios.h"
#include "paritas/use/pair_comparison.h"
#include "use/run_tables.h"

namespace paritas {
namespace {

namespace fs = std::filesystem;
using Json = nlohmann::json;

// Finds the pair in pair_ratios.csv; the row may hold it either way round
// (a = to, b = from is the comparison's ratio; the other way is inverted,
// exactly, see PairRatio).
bool FromPairTable(const std::string& path, const std::string& node, const std::string& to,
                   const std::string& from, PairComparison* c, bool* found, std::string* error) {
  *found = false;
  auto handle = [&](const internal::TableRow& row, std::string* message) {
    if (row.fields[0] != node) return true;
    const bool direct = row.fields[1] == to && row.fields[2] == from;
    const bool swapped = row.fields[1] == from && row.fields[2] == to;
    if (!direct && !swapped) return true;
    double lower = NAN, upper = NAN, count = 0;
    if (!internal::ParseIntervalBounds(path, row, 3, 4, &lower, &upper, message)) return false;
    if (std::isnan(lower) || std::isnan(upper) || ParseNumber(row.fields[5], &count) != NumberStatus::kOk) {
      return true;  // no interval in this row (too few replicates): not found
    }
    c->ratio_lower = direct ? lower : 1.0 / upper;
    c->ratio_upper = direct ? upper : 1.0 / lower;
    c->ratio_num_replicates = static_cast<int>(count);
    *found = true;
    return false;
  };
  std::string message;
  const bool ok = internal::ReadRunTableAt(
      path, ReadLimits(), {"node", "region_a", "region_b", "lower", "upper", "num_replicates"},
      {true, true, true, true, true, true}, handle, &message);
  if (!ok && !*found) {
    *error = message;
    return false;
  }
  return true;
}

// Reads num_replicates doubles at value index `first` of replicates.bin.
bool ReadRun(std::ifstream* in, int64_t first, int num_b, std::vector<double>* out) {
  out->assign(num_b, 0.0);
  in->seekg(24 + 8 * first);
  std::vector<unsigned char> bytes(8 * static_cast<size_t>(num_b));
  if (!in->read(reinterpret_cast<char*>(bytes.data()), static_cast<std::streamsize>(bytes.size())))
    return false;
  for (int b = 0; b < num_b; ++b) {
    uint64_t bits = 0;
    for (int k = 7; k >= 0; --k) bits = (bits << 8) | bytes[8 * b + k];
    std::memcpy(&(*out)[b], &bits, 8);
  }
  return true;
}

uint32_t Uint32At(const unsigned char* p) {
  return p[0] | (p[1] << 8) | (p[2] << 16) | (static_cast<uint32_t>(p[3]) << 24);
}

// The expansion of the pair's interval (PairExpansion) from the two regions'
// interval_df and interval_scale at the node in bootstrap.csv; none (NaN, 1)
// when the table lacks the columns (a run of the plain percentile interval
// before they were written) or the rows.
bool ExpansionFromTable(const std::string& path, const std::string& node, const std::string& a,
                        const std::string& b, double* df, double* scale, std::string* error) {
  double df_a = NAN, df_b = NAN, scale_a = 1.0, scale_b = 1.0;
  auto handle = [&](const internal::TableRow& row, std::string*) {
    if (row.fields[0] != node || (row.fields[1] != a && row.fields[1] != b)) return true;
    double row_df = NAN, row_scale = 1.0;
    if (!row.fields[2].empty()) ParseNumber(row.fields[2], &row_df);
    if (!row.fields[3].empty()) ParseNumber(row.fields[3], &row_scale);
    (row.fields[1] == a ? df_a : df_b) = row_df;
    (row.fields[1] == a ? scale_a : scale_b) = row_scale;
    return true;
  };
  if (!internal::ReadRunTableAt(path, ReadLimits(),
                                {"node", "region", "interval_df", "interval_scale"},
                                {true, true, false, false}, handle, error)) {
    return false;
  }
  PairExpansion(df_a, scale_a, df_b, scale_b, df, scale);
  return true;
}

// Computes the interval from replicates.bin, whose shape must match the
// survey, expanded as bootstrap.csv beside it says.
bool FromReplicates(const std::string& path, const Survey& survey, double level,
                    PairComparison* c, std::string* error) {
  std::ifstream in(path, std::ios::binary);
  unsigned char header[24];
  if (!in.read(reinterpret_cast<char*>(header), 24) || std::memcmp(header, "PRTSREP1", 8) != 0) {
    *error = path + ": not a replicates file of paritas (it must start with PRTSREP1)";
    return false;
  }
  const int64_t num_nodes = Uint32At(header + 8), num_regions = Uint32At(header + 12);
  const int num_b = static_cast<int>(Uint32At(header + 16));
  if (num_nodes != static_cast<int64_t>(survey.classification.nodes().size()) ||
      num_regions != survey.num_regions() || num_b < 2) {
    *error = path + ": holds " + std::to_string(num_nodes) + " nodes and " +
             std::to_string(num_regions) + " regions, the survey " +
             std::to_string(survey.classification.nodes().size()) + " and " +
             std::to_string(survey.num_regions());
    return false;
  }
  const int n = survey.classification.FindNode(c->node);
  const int a = survey.regions.Find(c->to), b = survey.regions.Find(c->from);
  std::vector<double> log_a, log_b;
  if (!ReadRun(&in, (n * num_regions + a) * num_b, num_b, &log_a) ||
      !ReadRun(&in, (n * num_regions + b) * num_b, num_b, &log_b)) {
    *error = path + ": ends before the " + std::to_string(num_b) + " replicates of node '" +
             c->node + "'";
    return false;
  }
  double df = NAN, scale = 1.0;
  const std::string table = (fs::path(path).parent_path() / "bootstrap.csv").string();
  if (fs::exists(table) &&
      !ExpansionFromTable(table, c->node, c->to, c->from, &df, &scale, error)) {
    return false;
  }
  const PairRatio pair = PairRatioFromReplicates(log_a.data(), log_b.data(), num_b, level,
                                                 c->transitive, df, scale);
  c->ratio_lower = pair.lower;
  c->ratio_upper = pair.upper;
  c->ratio_num_replicates = pair.num_replicates;
  return true;
}

// The sensitivity run must be of the same run as the comparison; "" if so,
// else why not.
std::string OtherRunReason(const std::string& run_folder, const std::string& sensitivity_dir,
                           const std::string& this_run_json, const std::string& sensitivity_id,
                           const std::string& sensitivity_json) {
  const std::vector<std::string> differences = RunDifferences(this_run_json, sensitivity_json);
  if (!differences.empty()) {
    return "the sensitivity results in " + sensitivity_dir + " (run " + sensitivity_id +
           ") rest on other inputs or settings than this comparison (\"this run\"): " +
           JoinNames(differences, "; ");
  }
  std::string compute_id, compute_json, error;
  if (!ReadRunRecord(run_folder, &compute_id, &compute_json, &error)) return "";
  const Json record = Json::parse(sensitivity_json, nullptr, false);
  const Json link = record.is_object() ? record.value("compute_run", Json::object()) : Json();
  const std::string linked =
      link.is_object() && link.value("run_id", Json()).is_string() ? link["run_id"].get<std::string>()
                                                                   : "";
  if (linked == compute_id) return "";
  return "the sensitivity results in " + sensitivity_dir + " (run " + sensitivity_id +
         ") belong to another run than the parities in " + run_folder + " (run " + compute_id +
         "): they were made " +
         (linked.empty() ? std::string("before that compute run") : "beside run " + linked);
}

}  // namespace

PairIntervalStatus LookUpPairInterval(const std::string& run_folder,
                                      const std::string& this_run_json, const Survey& survey,
                                      PairComparison* c) {
  const std::string dir = (fs::path(run_folder) / "sensitivity").string();
  std::string id, json, error;
  if (!fs::exists(fs::path(dir) / "run.json") || !ReadRunRecord(dir, &id, &json, &error)) {
    c->ratio_note = "no sensitivity results in " + dir;
    return PairIntervalStatus::kNoResults;
  }
  const Json record = Json::parse(json, nullptr, false);
  const Json settings = record.value("sensitivity", Json::object()).value("settings", Json::object());
  const Json parts = settings.value("parts", Json::array());
  const bool bootstrap = parts.is_array() && std::find(parts.begin(), parts.end(), "bootstrap") != parts.end();
  if (!bootstrap || !settings.value("level", Json()).is_number()) {
    c->ratio_note = "the sensitivity run in " + dir + " (run " + id + ") ran no bootstrap";
    return PairIntervalStatus::kNoResults;
  }
  const std::string reason = OtherRunReason(run_folder, dir, this_run_json, id, json);
  if (!reason.empty()) {
    c->ratio_note = reason + "; its intervals are not used; run 'paritas sensitivity' again "
                             "with this configuration";
    return PairIntervalStatus::kOtherRun;
  }
  c->ratio_level = settings["level"].get<double>();
  c->ratio_run_id = id;
  const fs::path table = fs::path(dir) / "pair_ratios.csv";
  bool found = false;
  if (fs::exists(table)) {
    if (!FromPairTable(table.string(), c->node, c->to, c->from, c, &found, &error)) {
      c->ratio_note = error;
      return PairIntervalStatus::kUnreadable;
    }
    if (found) {
      c->ratio_source = "pair_ratios.csv";
      return PairIntervalStatus::kFound;
    }
  }
  const fs::path replicates = fs::path(dir) / "replicates.bin";
  if (fs::exists(replicates)) {
    if (!FromReplicates(replicates.string(), survey, c->ratio_level, c, &error)) {
      c->ratio_note = error;
      return PairIntervalStatus::kUnreadable;
    }
    c->ratio_source = "replicates.bin";
    return PairIntervalStatus::kFound;
  }
  const std::vector<int> covered = PairRatioNodes(survey.classification);
  const bool in_table = std::find(covered.begin(), covered.end(),
                                  survey.classification.FindNode(c->node)) != covered.end();
  c->ratio_note = "the sensitivity run " + id + " holds no interval for '" + c->to + "' and '" +
                  c->from + "' at '" + c->node + "': " +
                  (in_table && !fs::exists(table)
                       ? std::string("it wrote no pair_ratios.csv; run sensitivity again")
                   : in_table ? "above " + std::to_string(kAllPairsMaxRegions) +
                                  " regions pair_ratios.csv holds only neighbours in rank; run "
                                  "sensitivity with --all-pairs"
                            : std::string("pair_ratios.csv covers the root and the top-level "
                                          "aggregates; run sensitivity with --write-replicates "
                                          "for every node"));
  return PairIntervalStatus::kNotCovered;
}

}  // namespace paritas
