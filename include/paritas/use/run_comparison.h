// Two output folders of `compute` side by side (last year and this year, a
// first release and a revision): per node and region both parities, the
// change in percent and in logs, the change of rank, whether the change is
// larger than the two runs' uncertainty, and the headings that drove it.
//
// Everything is read back from the folders (parities.csv, run.json,
// contributions.csv, sensitivity/bootstrap.csv), never recomputed, so a
// comparison shows the published numbers. Nodes, regions and headings in
// one run only are listed with their status, never dropped.
//
// The drivers of a change. For region r at aggregate n, with s_h the
// region's expenditure share of heading h within n and l_h = ln(heading
// parity / 100), L = ln(parity / 100) at n (contributions.csv and
// parities.csv of each run), the change L_new - L_old is split into
//   price part   ½ (s_h,old + s_h,new)(l_h,new - l_h,old)
//   weight part  (s_h,new - s_h,old)(½ (l_h,old + l_h,new) - ½ (L_old + L_new))
//   method part  w_h R,  w_h = ½ (s_h,old + s_h,new) / sum_k ½ (s_k,old + s_k,new),
// R being what the price and weight parts leave of L_new - L_old. The price
// and weight parts are the symmetric split of the change of a product of
// Bennet (1920, "The theory of measurement of changes in cost of living",
// Journal of the Royal Statistical Society 83(3), 455-462) applied to
// sum_h s_h l_h, the Törnqvist form of the parity (centring l on L only
// moves weight between headings, since the shares sum to 1 in both runs).
// R is what the aggregation method and the normalisation add beyond that
// form; it is spread as a uniform shift of every heading's price. A heading
// in one run only has share 0 in the other and its one l in both, so its
// price part is 0 and its entry or exit is all weight part. The three parts
// of all headings sum to L_new - L_old exactly (to rounding).
#ifndef PARITAS_USE_RUN_COMPARISON_H_
#define PARITAS_USE_RUN_COMPARISON_H_

#include <string>
#include <vector>

namespace paritas {

struct CompareOptions {
  // Output folders of `compute`: the earlier run and the later one. Required.
  std::string old_dir;
  std::string new_dir;
  // Folder written (changes.csv, drivers.csv, comparison.html, run.json),
  // whole or not at all; it may not hold either input. Empty (default) =
  // nothing written, the terminal summary only.
  std::string output_dir;
  // Regions listed in the terminal summary, largest moves first. Default 10;
  // 1 to 1000.
  int num_movers = 10;
  // Node of the terminal summary and of the page's charts; empty (default) =
  // the root (the first node of parities.csv).
  std::string node;
  // Multiplier of the combined standard error beyond which a change counts
  // as larger than the runs' uncertainty: |log change| > z sqrt(se_old² +
  // se_new²), the two runs' bootstrap standard errors of ln parity taken as
  // independent. Default 1.96 (a two-sided 95 % normal interval); above 0.
  double z = 1.96;

  bool IsValid(std::string* error) const;
};

// Where a node, region or heading appears.
enum class Presence { kBoth, kOldOnly, kNewOnly };
// "both", "old only", "new only".
std::string ToString(Presence presence);

// One node and region.
struct ParityChange {
  std::string node;
  std::string kind;  // "aggregate" or "heading" (parities.csv)
  std::string region;
  Presence presence = Presence::kBoth;
  // Parities on the comparison's scale (reference = 100; rebased when the
  // runs had different references), NaN where none.
  double parity_old = 0.0;
  double parity_new = 0.0;
  double log_change = 0.0;      // ln(parity_new / parity_old); NaN without both
  double percent_change = 0.0;  // 100 (parity_new / parity_old - 1)
  // Ranks (1 = dearest) as parities.csv gives them; 0 = none.
  int rank_old = 0;
  int rank_new = 0;
  // Bootstrap standard errors of ln parity (sensitivity/bootstrap.csv); NaN
  // where a run has none.
  double log_se_old = 0.0;
  double log_se_new = 0.0;
  // z sqrt(se_old² + se_new²); NaN unless both standard errors are known.
  double threshold = 0.0;
  // 1 = |log_change| > threshold, 0 = within, -1 = unknown.
  int beyond_uncertainty = -1;
};

// One heading's part in the change of one region's ln parity at an aggregate.
struct HeadingDriver {
  std::string heading;
  Presence presence = Presence::kBoth;
  double share_old = 0.0;  // 0 where the heading is not in the run
  double share_new = 0.0;
  double heading_parity_old = 0.0;  // NaN where not in the run
  double heading_parity_new = 0.0;
  double price_part = 0.0;
  double weight_part = 0.0;
  double method_part = 0.0;
  double log_change = 0.0;  // the sum of the three parts
};

struct RegionDrivers {
  std::string node;
  std::string region;
  double log_change = 0.0;  // ln(parity_new / parity_old) at the node
  // Sorted by |log_change|, largest first (ties by heading code).
  std::vector<HeadingDriver> headings;
};

struct RunComparison {
  std::string old_dir, new_dir;
  std::string old_run_id, new_run_id;
  std::string old_reference, new_reference;  // run.json configuration.reference
  // Empty when both runs have the same reference; else the region both were
  // re-expressed against (every parity divided by its parity at the node).
  std::string rebased_to;
  // What differs between the runs (settings and input files, from the run
  // records) and what follows for the comparison, one sentence each.
  std::vector<std::string> statements;
  // Nodes in parities.csv order (old run's first, then new-only ones);
  // regions likewise; each change row per node x region in either run.
  std::vector<ParityChange> changes;
  // Nodes and regions found in one run only.
  std::vector<std::string> nodes_old_only, nodes_new_only;
  std::vector<std::string> regions_old_only, regions_new_only;
  // Headings (contributions.csv) found in one run only.
  std::vector<std::string> headings_old_only, headings_new_only;
  // Per aggregate and region in both runs, when both have contributions.csv
  // and the same reference; else empty (a statement says why).
  std::vector<RegionDrivers> drivers;
  bool has_uncertainty = false;  // both runs have usable standard errors
  double z = 1.96;
  std::string summary_node;  // the node of the terminal summary and charts
};

enum class CompareOutcome { kNotRun, kOk, kInvalidInput };

struct CompareSummary {
  CompareOutcome outcome = CompareOutcome::kNotRun;
  std::string message = "not run";
  int num_changes = 0;                     // node x region rows
  int num_beyond_uncertainty = 0;          // rows whose change exceeds the threshold
  std::vector<std::string> files_written;  // relative to output_dir
};

// Reads both folders and compares them. Returns false with a message naming
// the file (and line and column for a bad row) when a folder cannot be
// read, or when the runs have no common scale; never aborts on data.
bool CompareRuns(const CompareOptions& options, RunComparison* comparison, CompareSummary* summary);

// The drift of parities carried from a benchmark (paritas carry) away from
// a new benchmark: with the carried run as OLD and the new benchmark as NEW,
// each region's change ln(new / old) at a node is its drift there
// (changes.csv holds it for every node and region).
struct DriftSummary {
  std::string node;
  int num_regions = 0;  // regions with a parity in both runs
  // Root mean square of ln(new / old) over those regions; NaN when none.
  double rms_log = 0.0;
  // The region drifting most and its ln(new / old).
  std::string largest_region;
  double largest_log = 0.0;
};
// Summarises the drift at `node` from a comparison's changes.
DriftSummary SummariseDrift(const RunComparison& comparison, const std::string& node);

// changes.csv: node,kind,region,presence,parity_old,parity_new,
// percent_change,log_change,rank_old,rank_new,rank_change,log_se_old,
// log_se_new,threshold,beyond_uncertainty (rank_change = rank_old -
// rank_new, places moved towards the dearest; beyond_uncertainty yes, no or
// empty).
std::string ChangesCsv(const RunComparison& comparison);
// drivers.csv: node,region,heading,presence,share_old,share_new,
// heading_parity_old,heading_parity_new,price_part,weight_part,method_part,
// log_change; a region's rows at a node sum (log_change) to its
// ln(parity_new / parity_old).
std::string DriversCsv(const RunComparison& comparison);
// The terminal summary: what differs, the largest movers at the summary
// node with their three main drivers, and what is in one run only.
std::string CompareTable(const RunComparison& comparison, int num_movers);

}  // namespace paritas

#endif  // PARITAS_USE_RUN_COMPARISON_H_
