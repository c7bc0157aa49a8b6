// Both folders are read whole into keyed tables first (parities, standard
// errors, contributions), then every comparison is a lookup: the runs may
// list nodes and regions in different orders or hold different ones, and
// nothing is matched by position.
#include "paritas/use/run_comparison.h"

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <functional>
#include <limits>
#include <map>
#include <nlohmann/json.hpp>
#include <set>
#include <utility>

#include "base/not_a_number.h"
#include "paritas/base/csv.h"
#include "paritas/base/read_limits.h"
#include "paritas/base/text.h"
#include "paritas/output/run_record.h"
#include "paritas/survey/config.h"
#include "use/run_tables.h"

namespace paritas {
namespace {

using internal::TableRow;

namespace fs = std::filesystem;
using Key = std::pair<std::string, std::string>;  // node, region

struct Cell {
  double parity = kNaN;
  int rank = 0;
  double log_se = kNaN;
};

struct ContributionRow {
  std::string heading;
  double share = 0.0;
  double heading_parity = kNaN;
};

// One output folder of compute, as read.
struct RunData {
  std::string dir;
  std::string run_id;
  std::string json;
  std::string reference;
  std::vector<std::string> nodes;    // parities.csv order
  std::vector<std::string> regions;  // order of first appearance
  std::map<std::string, std::string> kind;
  std::map<Key, Cell> cells;
  bool has_se = false;
  bool has_contributions = false;
  std::map<Key, std::vector<ContributionRow>> contributions;
};

// Reads a table of a run folder (`path` = the folder / the file) with every
// wanted column required, as its run wrote it (run_tables.h, shared with
// deflate and publish).
bool ReadTable(const std::string& path, const std::vector<std::string>& wanted,
               const std::function<bool(const TableRow&, std::string*)>& handle,
               std::string* error) {
  return internal::ReadRunTableAt(path, ReadLimits(), wanted,
                                  std::vector<bool>(wanted.size(), true), handle, error);
}

// Parses field k of a row as a number: empty = NaN when `optional`; with
// `positive` it must be above 0, with `share` in [0, 1].
bool ParseField(const std::string& path, const TableRow& row, size_t k, const std::string& what,
                bool positive, double* value, std::string* error) {
  *value = kNaN;
  const std::string_view text = row.fields[k];
  if (text.empty()) return true;
  const NumberStatus status = ParseNumber(text, value);
  if (status != NumberStatus::kOk) {
    *error = LocatedMessage(path, row.line, row.columns[k], NumberProblem(status, what, text));
    return false;
  }
  if (positive && !(*value > 0)) {
    *error = LocatedMessage(path, row.line, row.columns[k],
                            what + " " + QuoteValue(text) + " is not positive");
    return false;
  }
  return true;
}

bool ReadParities(RunData* run, std::string* error) {
  const std::string path = (fs::path(run->dir) / "parities.csv").string();
  std::map<Key, int64_t> first_line;
  std::set<std::string> seen_regions;
  const auto handle = [&](const TableRow& row, std::string* message) {
    const std::string node(row.fields[0]), kind(row.fields[1]), region(row.fields[2]);
    const Key key{node, region};
    const auto [it, inserted] = first_line.emplace(key, row.line);
    if (!inserted) {
      *message = LocatedMessage(path, row.line, row.columns[0],
                                "duplicate row for node " + QuoteValue(node) + " and region " +
                                    QuoteValue(region) + " (first at line " +
                                    std::to_string(it->second) + ")");
      return false;
    }
    if (kind != "aggregate" && kind != "heading" && kind != "group") {
      *message = LocatedMessage(path, row.line, row.columns[1],
                                "kind " + QuoteValue(kind) +
                                    " is not one of: aggregate, heading, group");
      return false;
    }
    Cell cell;
    double rank = kNaN;
    if (!ParseField(path, row, 3, "parity", true, &cell.parity, message) ||
        !ParseField(path, row, 4, "rank", true, &rank, message)) {
      return false;
    }
    if (std::isfinite(rank)) {
      if (rank != std::floor(rank) || rank > 1e9) {
        *message = LocatedMessage(path, row.line, row.columns[4],
                                  "rank " + QuoteValue(row.fields[4]) + " is not a whole number");
        return false;
      }
      cell.rank = static_cast<int>(rank);
    }
    if (run->kind.emplace(node, kind).second) run->nodes.push_back(node);
    if (seen_regions.insert(region).second) run->regions.push_back(region);
    run->cells[key] = cell;
    return true;
  };
  if (!ReadTable(path, {"node", "kind", "region", "parity", "rank"}, handle, error)) return false;
  if (run->cells.empty()) {
    *error = path + ": no data rows (only a header)";
    return false;
  }
  return true;
}

// Standard errors of the sensitivity run beside the parities, when it rests
// on the same inputs and settings (else a statement says why they are not
// used).
bool ReadStandardErrors(RunData* run, const std::string& label,
                        std::vector<std::string>* statements, std::string* error) {
  const std::string dir = (fs::path(run->dir) / "sensitivity").string();
  const std::string path = (fs::path(dir) / "bootstrap.csv").string();
  std::error_code ec;
  if (!fs::exists(path, ec)) return true;
  std::string id, json;
  if (!ReadRunRecord(dir, &id, &json, error)) return false;
  const std::vector<std::string> differences = RunDifferences(run->json, json);
  if (!differences.empty()) {
    statements->push_back("the standard errors in " + path + " are not used: the sensitivity run " +
                          "rests on other inputs or settings than the " + label + " parities (" +
                          JoinNames(differences, "; ") + ")");
    return true;
  }
  const auto handle = [&](const TableRow& row, std::string* message) {
    double se = kNaN;
    if (!ParseField(path, row, 2, "log_se", false, &se, message)) return false;
    const auto it = run->cells.find(Key{std::string(row.fields[0]), std::string(row.fields[1])});
    if (it != run->cells.end()) it->second.log_se = se;
    return true;
  };
  if (!ReadTable(path, {"node", "region", "log_se"}, handle, error)) return false;
  run->has_se = true;
  return true;
}

bool ReadContributions(RunData* run, std::string* error) {
  const std::string path = (fs::path(run->dir) / "contributions.csv").string();
  std::error_code ec;
  if (!fs::exists(path, ec)) return true;
  const auto handle = [&](const TableRow& row, std::string* message) {
    ContributionRow c;
    c.heading = std::string(row.fields[2]);
    if (!ParseField(path, row, 3, "share", false, &c.share, message) ||
        !ParseField(path, row, 4, "heading_parity", true, &c.heading_parity, message)) {
      return false;
    }
    if (!(c.share >= 0 && c.share <= 1)) {
      *message = LocatedMessage(path, row.line, row.columns[3],
                                "share " + QuoteValue(row.fields[3]) + " is not between 0 and 1");
      return false;
    }
    run->contributions[Key{std::string(row.fields[0]), std::string(row.fields[1])}].push_back(c);
    return true;
  };
  if (!ReadTable(path, {"node", "region", "heading", "share", "heading_parity"}, handle, error)) {
    return false;
  }
  run->has_contributions = true;
  return true;
}

std::string ReferenceOf(const std::string& json) {
  const auto record = nlohmann::json::parse(json, nullptr, /*allow_exceptions=*/false);
  if (!record.is_object()) return "";
  const auto value =
      record.value("configuration", nlohmann::json::object()).value("reference", nlohmann::json());
  return value.is_string() ? value.get<std::string>() : "";
}

std::string CommandOf(const std::string& json) {
  const auto record = nlohmann::json::parse(json, nullptr, /*allow_exceptions=*/false);
  if (!record.is_object()) return "";
  const auto value = record.value("command", nlohmann::json());
  return value.is_string() ? value.get<std::string>() : "";
}

// The period a carried run (paritas carry) was extrapolated to, with its
// benchmark run id; both empty for a run of compute.
std::pair<std::string, std::string> CarriedTo(const std::string& json) {
  const auto record = nlohmann::json::parse(json, nullptr, /*allow_exceptions=*/false);
  if (!record.is_object()) return {};
  const auto carry = record.value("carry", nlohmann::json::object());
  if (!carry.is_object()) return {};
  return {carry.value("period", ""), carry.value("benchmark_run_id", "")};
}

// Reads one folder; `label` ("old", "new") names it in messages.
bool ReadRun(const std::string& dir, const std::string& label, RunData* run,
             std::vector<std::string>* statements, std::string* error) {
  run->dir = dir;
  std::error_code ec;
  if (!fs::is_directory(dir, ec)) {
    *error = label + " run '" + dir + "': no such folder (expected an output folder of " +
             "'paritas compute')";
    return false;
  }
  if (!ReadRunRecord(dir, &run->run_id, &run->json, error)) {
    *error = label + " run '" + dir + "' is not an output folder of 'paritas compute': " + *error;
    return false;
  }
  const std::string command = CommandOf(run->json);
  // A carried run (paritas carry) is a run folder of the same layout.
  if (command != "compute" && command != "carry") {
    *error =
        label + " run '" + dir + "': run.json records the command '" + command + "', not 'compute'";
    return false;
  }
  run->reference = ReferenceOf(run->json);
  return ReadParities(run, error) && ReadStandardErrors(run, label, statements, error) &&
         ReadContributions(run, error);
}

// RunDifferences speaks of "this run" and "the other": here the new and the
// old.
std::string OldNewWording(std::string text) {
  const std::pair<std::string, std::string> kWords[] = {
      {" in this run, ", " in the new run, "},
      {" in the other", " in the old run"},
      {"read by this run only", "read by the new run only"},
      {"read by the other run only", "read by the old run only"}};
  for (const auto& [from, to] : kWords) {
    const size_t at = text.find(from);
    if (at != std::string::npos) text.replace(at, from.size(), to);
  }
  return text;
}

bool IsRegionReference(const std::string& reference) {
  return !reference.empty() && Reference::FromString(reference).kind == ReferenceKind::kRegion;
}

double ParityOf(const RunData& run, const std::string& node, const std::string& region) {
  const auto it = run.cells.find(Key{node, region});
  return it == run.cells.end() ? kNaN : it->second.parity;
}

// Chooses the common scale of runs with different references: a region
// reference of one run that has a parity at the first node in both.
bool ChooseScale(const RunData& old_run, const RunData& new_run, RunComparison* out,
                 std::string* error) {
  out->old_reference = old_run.reference;
  out->new_reference = new_run.reference;
  if (old_run.reference == new_run.reference) return true;
  for (const std::string& candidate : {new_run.reference, old_run.reference}) {
    if (!IsRegionReference(candidate)) continue;
    const std::string& root = new_run.nodes.front();
    if (std::isfinite(ParityOf(old_run, root, candidate)) &&
        std::isfinite(ParityOf(new_run, root, candidate))) {
      out->rebased_to = candidate;
      out->statements.push_back(
          "the runs have different references (" + old_run.reference + " in the old run, " +
          new_run.reference + " in the new): both are re-expressed against region '" + candidate +
          "' (each parity divided by that region's parity at the same node); " +
          "standard errors and drivers are left out, since they belong to each run's own " +
          "reference");
      return true;
    }
  }
  *error = "the runs have different references (" + old_run.reference + " in " + old_run.dir +
           ", " + new_run.reference + " in " + new_run.dir +
           ") and neither is a region with a parity in both runs, so their parities have no " +
           "common scale; compute one run again with the other's reference";
  return false;
}

void Statements(const RunData& old_run, const RunData& new_run, RunComparison* out) {
  for (const std::string& line : RunDifferences(new_run.json, old_run.json)) {
    out->statements.push_back(OldNewWording(line));
  }
  const std::string kSettings[] = {"elementary:", "aggregation:", "missing_parities:",
                                   "representative_weight:", "invalid_rows:"};
  const bool settings_differ =
      std::any_of(out->statements.begin(), out->statements.end(), [&](const std::string& line) {
        return std::any_of(std::begin(kSettings), std::end(kSettings),
                           [&](const std::string& s) { return line.rfind(s, 0) == 0; });
      });
  if (settings_differ) {
    out->statements.push_back(
        "the runs were computed with different settings: part of each change comes from the "
        "settings, not from prices or weights");
  }
  const bool mean_like = !IsRegionReference(old_run.reference) && out->rebased_to.empty();
  if (mean_like && (!out->regions_old_only.empty() || !out->regions_new_only.empty())) {
    out->statements.push_back(
        "reference " + old_run.reference + " with regions in one run only: the mean the " +
        "parities are relative to moved with the regions, so every parity shifts with it");
  }
}

// When a run is carried (paritas carry), its changes against a benchmark are
// the extrapolation's drift: said, with its size at the summary node.
void AddDriftStatement(const RunData& old_run, const RunData& new_run, RunComparison* out) {
  const auto [old_period, old_benchmark] = CarriedTo(old_run.json);
  const auto [new_period, new_benchmark] = CarriedTo(new_run.json);
  if (old_period.empty() && new_period.empty()) return;
  if (!old_period.empty() && !new_period.empty()) {
    out->statements.push_back("both runs are extrapolated (paritas carry): their changes compare "
                              "two extrapolations, not an extrapolation with a benchmark");
    return;
  }
  const bool old_carried = !old_period.empty();
  const DriftSummary drift = SummariseDrift(*out, out->summary_node);
  std::string text = std::string("the ") + (old_carried ? "old" : "new") +
                     " run is extrapolated (paritas carry) from benchmark run " +
                     (old_carried ? old_benchmark : new_benchmark) + " to period '" +
                     (old_carried ? old_period : new_period) + "'; the " +
                     (old_carried ? "new" : "old") +
                     " run is taken as the benchmark it is checked against, so each change is " +
                     "the drift of the extrapolation (ln(benchmark / extrapolated) per region in " +
                     "changes.csv" + (old_carried ? "" : ", with the sign reversed") + ")";
  if (drift.num_regions > 0) {
    text += "; at '" + drift.node + "': rms " + FormatFixed(100.0 * drift.rms_log, 2) +
            " log points x100 over " + std::to_string(drift.num_regions) + " regions, largest " +
            FormatFixed(100.0 * drift.largest_log, 2) + " ('" + drift.largest_region + "')";
  }
  out->statements.push_back(text);
}

// The union of two lists, first's order, then the second's new entries.
std::vector<std::string> Union(const std::vector<std::string>& a, const std::vector<std::string>& b,
                               std::vector<std::string>* only_a, std::vector<std::string>* only_b) {
  const std::set<std::string> in_a(a.begin(), a.end()), in_b(b.begin(), b.end());
  std::vector<std::string> out = a;
  for (const std::string& x : a) {
    if (!in_b.count(x)) only_a->push_back(x);
  }
  for (const std::string& x : b) {
    if (!in_a.count(x)) {
      only_b->push_back(x);
      out.push_back(x);
    }
  }
  return out;
}

ParityChange Change(const RunData& old_run, const RunData& new_run, const RunComparison& cmp,
                    const std::string& node, const std::string& region, bool* any) {
  ParityChange c;
  c.node = node;
  c.region = region;
  const auto o = old_run.cells.find(Key{node, region});
  const auto n = new_run.cells.find(Key{node, region});
  *any = o != old_run.cells.end() || n != new_run.cells.end();
  if (!*any) return c;
  c.presence = o == old_run.cells.end()   ? Presence::kNewOnly
               : n == new_run.cells.end() ? Presence::kOldOnly
                                          : Presence::kBoth;
  c.kind = (n != new_run.cells.end() ? new_run : old_run).kind.at(node);
  const Cell none;
  const Cell& co = o == old_run.cells.end() ? none : o->second;
  const Cell& cn = n == new_run.cells.end() ? none : n->second;
  c.parity_old = co.parity;
  c.parity_new = cn.parity;
  if (!cmp.rebased_to.empty()) {
    c.parity_old *= 100.0 / ParityOf(old_run, node, cmp.rebased_to);
    c.parity_new *= 100.0 / ParityOf(new_run, node, cmp.rebased_to);
  }
  c.rank_old = co.rank;
  c.rank_new = cn.rank;
  c.log_change = std::log(c.parity_new / c.parity_old);
  c.percent_change = 100.0 * (c.parity_new / c.parity_old - 1.0);
  c.log_se_old = cmp.has_uncertainty ? co.log_se : kNaN;
  c.log_se_new = cmp.has_uncertainty ? cn.log_se : kNaN;
  c.threshold = cmp.z * std::sqrt(c.log_se_old * c.log_se_old + c.log_se_new * c.log_se_new);
  if (std::isfinite(c.threshold) && std::isfinite(c.log_change)) {
    c.beyond_uncertainty = std::abs(c.log_change) > c.threshold ? 1 : 0;
  }
  return c;
}

// The drivers of one region's change at one aggregate (see the header).
RegionDrivers Drivers(const std::vector<ContributionRow>& old_rows,
                      const std::vector<ContributionRow>& new_rows, const ParityChange& change) {
  RegionDrivers out;
  out.node = change.node;
  out.region = change.region;
  out.log_change = change.log_change;
  std::map<std::string, HeadingDriver> by_heading;
  std::vector<std::string> order;
  auto entry = [&](const std::string& code) -> HeadingDriver& {
    auto [it, inserted] = by_heading.emplace(code, HeadingDriver());
    if (inserted) {
      order.push_back(code);
      it->second.heading = code;
      it->second.heading_parity_old = it->second.heading_parity_new = kNaN;
    }
    return it->second;
  };
  for (const ContributionRow& r : old_rows) {
    HeadingDriver& d = entry(r.heading);
    d.share_old = r.share;
    d.heading_parity_old = r.heading_parity;
    d.presence = Presence::kOldOnly;
  }
  for (const ContributionRow& r : new_rows) {
    HeadingDriver& d = entry(r.heading);
    d.presence = std::isnan(d.heading_parity_old) ? Presence::kNewOnly : Presence::kBoth;
    d.share_new = r.share;
    d.heading_parity_new = r.heading_parity;
  }
  const double level_old = std::log(change.parity_old / 100.0);
  const double level_new = std::log(change.parity_new / 100.0);
  double explained = 0.0, weight_total = 0.0;
  for (const std::string& code : order) {
    HeadingDriver& d = by_heading[code];
    const double l_old = std::log(d.heading_parity_old / 100.0);
    const double l_new = std::log(d.heading_parity_new / 100.0);
    const double lo = std::isnan(l_old) ? l_new : l_old, ln = std::isnan(l_new) ? l_old : l_new;
    d.price_part = 0.5 * (d.share_old + d.share_new) * (ln - lo);
    d.weight_part = (d.share_new - d.share_old) * (0.5 * (lo + ln) - 0.5 * (level_old + level_new));
    explained += d.price_part + d.weight_part;
    weight_total += 0.5 * (d.share_old + d.share_new);
  }
  const double rest = change.log_change - explained;
  const double n = static_cast<double>(order.size());
  for (const std::string& code : order) {
    HeadingDriver& d = by_heading[code];
    const double w = weight_total > 0 ? 0.5 * (d.share_old + d.share_new) / weight_total : 1.0 / n;
    d.method_part = w * rest;
    d.log_change = d.price_part + d.weight_part + d.method_part;
    out.headings.push_back(d);
  }
  std::stable_sort(out.headings.begin(), out.headings.end(),
                   [](const HeadingDriver& a, const HeadingDriver& b) {
                     const double x = std::abs(a.log_change), y = std::abs(b.log_change);
                     if (x != y) return x > y;
                     return a.heading < b.heading;
                   });
  return out;
}

void AddDrivers(const RunData& old_run, const RunData& new_run, RunComparison* out) {
  if (!old_run.has_contributions || !new_run.has_contributions) {
    out->statements.push_back(
        "no drivers by heading: " +
        std::string(!old_run.has_contributions ? old_run.dir : new_run.dir) +
        " has no contributions.csv (compute writes it from this version on; compute that run "
        "again to see which headings drove the changes)");
    return;
  }
  if (!out->rebased_to.empty()) return;  // said in the scale statement
  for (const ParityChange& c : out->changes) {
    if (c.kind == "heading" || !std::isfinite(c.log_change)) continue;
    const Key key{c.node, c.region};
    const auto o = old_run.contributions.find(key), n = new_run.contributions.find(key);
    if (o == old_run.contributions.end() || n == new_run.contributions.end()) continue;
    out->drivers.push_back(Drivers(o->second, n->second, c));
  }
}

}  // namespace

std::string ToString(Presence presence) {
  switch (presence) {
    case Presence::kBoth:
      return "both";
    case Presence::kOldOnly:
      return "old only";
    case Presence::kNewOnly:
      return "new only";
  }
  return "both";
}

bool CompareOptions::IsValid(std::string* error) const {
  if (old_dir.empty() || new_dir.empty()) {
    *error = "two output folders of 'paritas compute' are needed (old and new)";
    return false;
  }
  if (num_movers < 1 || num_movers > 1000) {
    *error =
        "--top must be a whole number from 1 to 1000, found '" + std::to_string(num_movers) + "'";
    return false;
  }
  if (!(z > 0) || !std::isfinite(z)) {
    *error = "--z must be a number above 0, found '" + FormatFixed(z, 6) + "'";
    return false;
  }
  return true;
}

bool CompareRuns(const CompareOptions& options, RunComparison* comparison,
                 CompareSummary* summary) {
  *comparison = RunComparison();
  *summary = CompareSummary();
  RunComparison& out = *comparison;
  auto fail = [&](const std::string& message) {
    summary->outcome = CompareOutcome::kInvalidInput;
    summary->message = message;
    return false;
  };
  std::string error;
  if (!options.IsValid(&error)) return fail(error);
  out.old_dir = options.old_dir;
  out.new_dir = options.new_dir;
  out.z = options.z;
  RunData old_run, new_run;
  std::vector<std::string> se_statements;
  if (!ReadRun(options.old_dir, "old", &old_run, &se_statements, &error) ||
      !ReadRun(options.new_dir, "new", &new_run, &se_statements, &error)) {
    return fail(error);
  }
  out.old_run_id = old_run.run_id;
  out.new_run_id = new_run.run_id;
  if (!ChooseScale(old_run, new_run, &out, &error)) return fail(error);
  const std::vector<std::string> nodes =
      Union(old_run.nodes, new_run.nodes, &out.nodes_old_only, &out.nodes_new_only);
  const std::vector<std::string> regions =
      Union(old_run.regions, new_run.regions, &out.regions_old_only, &out.regions_new_only);
  for (const std::string& node : out.nodes_old_only) {
    if (old_run.kind.at(node) == "heading") out.headings_old_only.push_back(node);
  }
  for (const std::string& node : out.nodes_new_only) {
    if (new_run.kind.at(node) == "heading") out.headings_new_only.push_back(node);
  }
  out.summary_node = options.node.empty() ? new_run.nodes.front() : options.node;
  if (std::find(nodes.begin(), nodes.end(), out.summary_node) == nodes.end()) {
    std::string message = "--node '" + options.node + "' is in neither run";
    const std::string nearest = NearestName(options.node, nodes);
    if (!nearest.empty()) message += "; did you mean '" + nearest + "'?";
    return fail(message);
  }
  Statements(old_run, new_run, &out);
  for (const std::string& s : se_statements) out.statements.push_back(s);
  out.has_uncertainty = old_run.has_se && new_run.has_se && out.rebased_to.empty();
  if (!out.has_uncertainty && out.rebased_to.empty()) {
    out.statements.push_back(
        "no test against the runs' uncertainty: it needs sensitivity/bootstrap.csv from "
        "'paritas sensitivity' in both folders");
  }
  for (const std::string& node : nodes) {
    for (const std::string& region : regions) {
      bool any = false;
      ParityChange c = Change(old_run, new_run, out, node, region, &any);
      if (!any) continue;
      if (c.beyond_uncertainty == 1) ++summary->num_beyond_uncertainty;
      out.changes.push_back(std::move(c));
    }
  }
  AddDrivers(old_run, new_run, &out);
  AddDriftStatement(old_run, new_run, &out);
  summary->num_changes = static_cast<int>(out.changes.size());
  summary->outcome = CompareOutcome::kOk;
  summary->message = "ok";
  return true;
}

DriftSummary SummariseDrift(const RunComparison& comparison, const std::string& node) {
  DriftSummary drift;
  drift.node = node;
  double sum_squares = 0.0;
  for (const ParityChange& c : comparison.changes) {
    if (c.node != node || !std::isfinite(c.log_change)) continue;
    ++drift.num_regions;
    sum_squares += c.log_change * c.log_change;
    if (drift.largest_region.empty() || std::abs(c.log_change) > std::abs(drift.largest_log)) {
      drift.largest_region = c.region;
      drift.largest_log = c.log_change;
    }
  }
  drift.rms_log = drift.num_regions > 0 ? std::sqrt(sum_squares / drift.num_regions) : kNaN;
  return drift;
}

std::string ChangesCsv(const RunComparison& comparison) {
  std::string out =
      "node,kind,region,presence,parity_old,parity_new,percent_change,log_change,rank_old,"
      "rank_new,rank_change,log_se_old,log_se_new,threshold,beyond_uncertainty\n";
  for (const ParityChange& c : comparison.changes) {
    AppendCsvField(c.node, &out);
    out += ',' + c.kind + ',';
    AppendCsvField(c.region, &out);
    out += ',' + ToString(c.presence);
    for (double v : {c.parity_old, c.parity_new, c.percent_change, c.log_change}) {
      out += ',';
      AppendShortest(v, &out);
    }
    out += ',' + (c.rank_old > 0 ? std::to_string(c.rank_old) : "");
    out += ',' + (c.rank_new > 0 ? std::to_string(c.rank_new) : "");
    out += ',' + (c.rank_old > 0 && c.rank_new > 0 ? std::to_string(c.rank_old - c.rank_new) : "");
    for (double v : {c.log_se_old, c.log_se_new, c.threshold}) {
      out += ',';
      AppendShortest(v, &out);
    }
    out += c.beyond_uncertainty == 1 ? ",yes\n" : c.beyond_uncertainty == 0 ? ",no\n" : ",\n";
  }
  return out;
}

std::string DriversCsv(const RunComparison& comparison) {
  std::string out =
      "node,region,heading,presence,share_old,share_new,heading_parity_old,heading_parity_new,"
      "price_part,weight_part,method_part,log_change\n";
  for (const RegionDrivers& r : comparison.drivers) {
    for (const HeadingDriver& d : r.headings) {
      AppendCsvField(r.node, &out);
      out += ',';
      AppendCsvField(r.region, &out);
      out += ',';
      AppendCsvField(d.heading, &out);
      out += ',' + ToString(d.presence);
      for (double v : {d.share_old, d.share_new, d.heading_parity_old, d.heading_parity_new,
                       d.price_part, d.weight_part, d.method_part, d.log_change}) {
        out += ',';
        AppendShortest(v, &out);
      }
      out += '\n';
    }
  }
  return out;
}

namespace {

std::string Pad(const std::string& text, size_t width, bool right = false) {
  if (text.size() >= width) return text;
  const std::string fill(width - text.size(), ' ');
  return right ? fill + text : text + fill;
}

// A signed figure; one that rounds to zero gets no sign.
std::string Signed(double value, int decimals) {
  if (!std::isfinite(value)) return "-";
  const std::string text = FormatFixed(value, decimals);
  const bool zero = text.find_first_not_of("-0.") == std::string::npos;
  return zero ? FormatFixed(0.0, decimals) : (value > 0 ? "+" : "") + text;
}

std::string ListLine(const std::string& what, const std::vector<std::string>& names) {
  if (names.empty()) return "";
  constexpr size_t kMaxListed = 20;
  std::vector<std::string> shown(names.begin(), names.begin() + std::min(names.size(), kMaxListed));
  std::string line = "  " + what + " (" + std::to_string(names.size()) + "): " + JoinNames(shown);
  if (names.size() > kMaxListed) line += ", ...";
  return line + "\n";
}

// The three headings with the largest parts in a region's change.
std::string TopDrivers(const RunComparison& comparison, const ParityChange& c) {
  for (const RegionDrivers& r : comparison.drivers) {
    if (r.node != c.node || r.region != c.region) continue;
    std::string text;
    for (size_t k = 0; k < r.headings.size() && k < 3; ++k) {
      const HeadingDriver& d = r.headings[k];
      text += (k ? ", " : "") + d.heading + " " + Signed(100.0 * d.log_change, 3);
    }
    return text;
  }
  return "";
}

}  // namespace

std::string CompareTable(const RunComparison& comparison, int num_movers) {
  std::string out = "comparing " + comparison.old_dir + " (old, reference " +
                    comparison.old_reference + ") with " + comparison.new_dir +
                    " (new, reference " + comparison.new_reference + ")\n";
  if (!comparison.statements.empty()) {
    out += "what differs and what follows:\n";
    for (const std::string& s : comparison.statements) out += "  - " + s + "\n";
  }
  std::vector<const ParityChange*> movers;
  for (const ParityChange& c : comparison.changes) {
    if (c.node == comparison.summary_node && std::isfinite(c.log_change)) movers.push_back(&c);
  }
  std::stable_sort(movers.begin(), movers.end(), [](const ParityChange* a, const ParityChange* b) {
    return std::abs(a->log_change) > std::abs(b->log_change);
  });
  const size_t shown = std::min(movers.size(), static_cast<size_t>(num_movers));
  out += "\nlargest moves at '" + comparison.summary_node + "' (" + std::to_string(shown) + " of " +
         std::to_string(movers.size()) + " regions in both runs)" +
         (comparison.rebased_to.empty() ? "" : ", against region '" + comparison.rebased_to + "'") +
         ":\n";
  size_t width = 6;
  for (size_t k = 0; k < shown; ++k) width = std::max(width, movers[k]->region.size());
  out += "  " + Pad("region", width) + Pad("old", 10, true) + Pad("new", 10, true) +
         Pad("change %", 10, true) + Pad("rank", 10, true) +
         (comparison.has_uncertainty ? Pad("beyond", 8, true) : "") +
         "  main headings (log points x100)\n";
  for (size_t k = 0; k < shown; ++k) {
    const ParityChange& c = *movers[k];
    const std::string rank = c.rank_old > 0 && c.rank_new > 0
                                 ? std::to_string(c.rank_old) + "->" + std::to_string(c.rank_new)
                                 : "-";
    out += "  " + Pad(c.region, width) + Pad(FormatFixed(c.parity_old, 2), 10, true) +
           Pad(FormatFixed(c.parity_new, 2), 10, true) +
           Pad(Signed(c.percent_change, 2), 10, true) + Pad(rank, 10, true);
    if (comparison.has_uncertainty) {
      out += Pad(c.beyond_uncertainty == 1   ? "yes"
                 : c.beyond_uncertainty == 0 ? "no"
                                             : "-",
                 8, true);
    }
    const std::string drivers = TopDrivers(comparison, c);
    out += drivers.empty() ? "\n" : "  " + drivers + "\n";
  }
  if (comparison.has_uncertainty) {
    out += "(beyond: |ln(new / old)| > " + FormatFixed(comparison.z, 2) +
           " x sqrt(se_old^2 + se_new^2), the bootstrap standard errors of both runs taken as "
           "independent)\n";
  }
  std::string only = ListLine("regions in the old run only", comparison.regions_old_only) +
                     ListLine("regions in the new run only", comparison.regions_new_only) +
                     ListLine("headings in the old run only", comparison.headings_old_only) +
                     ListLine("headings in the new run only", comparison.headings_new_only);
  std::vector<std::string> aggregates_old, aggregates_new;
  for (const std::string& n : comparison.nodes_old_only) {
    if (std::find(comparison.headings_old_only.begin(), comparison.headings_old_only.end(), n) ==
        comparison.headings_old_only.end()) {
      aggregates_old.push_back(n);
    }
  }
  for (const std::string& n : comparison.nodes_new_only) {
    if (std::find(comparison.headings_new_only.begin(), comparison.headings_new_only.end(), n) ==
        comparison.headings_new_only.end()) {
      aggregates_new.push_back(n);
    }
  }
  only += ListLine("aggregates in the old run only", aggregates_old) +
          ListLine("aggregates in the new run only", aggregates_new);
  if (!only.empty())
    out += "\nin one run only (listed in changes.csv with their presence):\n" + only;
  return out;
}

}  // namespace paritas
