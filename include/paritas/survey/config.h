// The run configuration: which survey files to read, how to compute, where to
// write. Read from YAML (our own keys, documented in the README); every enum
// has ToString and a case-insensitive FromString shared with the command line.
#ifndef PARITAS_SURVEY_CONFIG_H_
#define PARITAS_SURVEY_CONFIG_H_

#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "paritas/base/csv.h"
#include "paritas/base/read_limits.h"
#include "paritas/survey/classification.h"

namespace paritas {

// How parities are normalised at every node.
enum class ReferenceKind {
  kMean,          // geometric mean of the regions present = 100 (default)
  kWeightedMean,  // expenditure-weighted geometric mean = 100
  kRegion,        // one region = 100
  // The country as a whole = 100: total real expenditure over the regions
  // equals total nominal expenditure, sum_r e_r / (PPP_r / 100) = sum_r e_r,
  // so deflated regional values add up to the national total. The parities
  // are an expenditure-weighted harmonic mean of 100 (kWeightedMean's
  // geometric mean leaves the sums 0.1-2 % apart).
  kCountry,
};

struct Reference {
  ReferenceKind kind = ReferenceKind::kMean;
  // Region code when kind == kRegion.
  std::string region;

  // "mean", "weighted-mean", "country", or the region code.
  std::string ToString() const;
  // Any text that is not "mean", "weighted-mean" or "country"
  // (case-insensitive) is a region code, checked against the survey later.
  static Reference FromString(const std::string& text);
};

// Reads a reference as Reference::FromString does, but refuses empty text and
// text spelt like mean, weighted-mean or country but for case, '_' or ' ' (no
// region code may be, so "weighted_mean" is a slip, not a region): "reference
// 'weighted_mean' is not one of: mean, weighted-mean, country, or a region
// code; did you mean 'weighted-mean'?". `what` names the setting ("reference",
// "--reference").
bool ParseReference(std::string_view what, const std::string& text, Reference* reference,
                    std::string* error);

// What to do with an invalid data row.
enum class InvalidRowPolicy {
  kStop,  // report up to 20 bad rows and stop with exit code 1 (default)
  kSkip,  // leave them out, list them in rejected.csv, and go on
};

std::string ToString(InvalidRowPolicy policy);
// Case-insensitive; returns false for unknown names.
bool FromString(const std::string& text, InvalidRowPolicy* policy);
// The allowed names, for --help and messages.
std::vector<std::string> InvalidRowPolicyNames();

// What to do with quote rows of prices.csv that repeat an earlier row field
// for field (same region, item, price and every other column).
enum class DuplicateQuotePolicy {
  kKeep,    // keep them as quotes, with a warning (default: results as given)
  kDrop,    // leave the repeats out (counted as rejected), with a warning
  kReject,  // treat the repeats as invalid rows (invalid_rows decides)
};

std::string ToString(DuplicateQuotePolicy policy);
// Case-insensitive; returns false for unknown names.
bool FromString(const std::string& text, DuplicateQuotePolicy* policy);
std::vector<std::string> DuplicateQuotePolicyNames();

// How CPD weighs a cell (region x item) when prices.csv carries quote weights.
enum class CpdCellWeights {
  kEqual,         // every cell weighs 1 (times representative_weight); default
  kQuoteWeights,  // a cell weighs the sum of its quote weights
};

std::string ToString(CpdCellWeights weights);
// Case-insensitive ("equal", "quote-weights"); returns false for unknown names.
bool FromString(const std::string& text, CpdCellWeights* weights);
std::vector<std::string> CpdCellWeightsNames();

// Thresholds of the plausibility checks run after compute (the `checks:`
// section). Each check raises a warning (compute/plausibility.h).
struct CheckThresholds {
  // Warns when less than this share of a region's spending on an aggregate
  // rests on headings where the region has a parity of its own (the rest is
  // in effect imputed from its other headings). Default 0.9, our choice: a
  // missing heading of 10 % of spending whose level differs by 30 % from the
  // region's other headings moves the aggregate by about 3 %.
  double min_basket_share = 0.9;
  // Warns when a region's heading parity rests on fewer items than this, or
  // on fewer quotes than min_quotes. Defaults 2 and 2, our choice (one item
  // or one quote is no evidence on its spread).
  int min_items = 2;
  int min_quotes = 2;
  // Warns when a region's heading parity is more than this factor above or
  // below the region's level in the other headings of the same parent
  // (expenditure-weighted geometric mean). Default 3, our choice: regional
  // relative prices rarely differ threefold, keying errors of x10 do.
  double max_level_ratio = 3.0;
  // Warns when the Paasche-Laspeyres spread 100 |ln(L/P)| of a region
  // against another exceeds this, in percent. Default 20, our choice: spreads
  // within a country are typically a few percent; beyond 20 the formula
  // choice moves the parity by about 10 %.
  double max_spread_percent = 20.0;
  // Outliers whose observed price is at least this factor away from the
  // prediction are gross (a warning, and exit code 3 under strict). Default
  // 3, our choice: the keying errors seen (x10, x100, x0.1) and wrong units.
  double gross_outlier_ratio = 3.0;

  bool IsValid(std::string* error) const;
};

// The columns of a price file paritas reads, in the order quotes are compared
// for duplicates: region, item, price, heading, representative, weight,
// quantity (see the README for what each holds).
const std::vector<std::string>& PriceColumnNames();

// One file of `survey.prices`: a path, or a mapping {path, delimiter,
// decimal, columns}. Several files (a main survey, a rent file, a tariff
// file) are read in the order given, as if one file.
struct PriceSource {
  std::string path;  // required
  // Delimiter and decimal mark; default ',' and '.'.
  CsvFormat format;
  // Our column name -> the file's header, for the columns whose header
  // differs (`columns: {region: area_code, price: amount}`); a column not
  // listed is found under our name. Keys are among PriceColumnNames(), the
  // headers distinct; in the order written.
  std::vector<std::pair<std::string, std::string>> columns;

  // Returns the file's header for our column `name` (`name` when not mapped).
  std::string HeaderOf(std::string_view name) const;
};

// Paths of the survey files (absolute, or relative to the working folder
// after resolution against the configuration's folder). Empty = not given.
struct SurveyFiles {
  // One or more price files (required); a single path reads exactly as a
  // list of that one path.
  std::vector<PriceSource> prices;
  std::string expenditure;  // required
  std::string regions;      // optional
  std::string items;        // optional
  // How each file is written: a file given as a mapping {path, delimiter,
  // decimal} in the configuration; default ',' and '.'.
  CsvFormat expenditure_format;
  CsvFormat regions_format;
  CsvFormat items_format;
  // Optional file of heading parities made elsewhere
  // (heading,region,parity[,log_se]; survey.external_parities).
  std::string external_parities;
  CsvFormat external_parities_format;
};

// The `missing_parities:` section: the rule for a region that spends on a
// heading without a parity there (compute/imputation.h), as written.
struct MissingParitiesSettings {
  // Rule of every heading not listed: "leave" (default), "parent",
  // "external" or "like:<heading>".
  std::string default_rule = "leave";
  // (heading code, rule), in the order written.
  std::vector<std::pair<std::string, std::string>> headings;
};

struct RunConfig {
  // The configuration file read; empty when built in code.
  std::string config_path;
  SurveyFiles survey;
  // True when the configuration gives a classification; otherwise a root
  // `all` holding every heading is used.
  bool has_classification = false;
  Classification classification;
  // Where the classification came from (a file path, or "<config>:classification").
  std::string classification_source;
  // Analytic groups (the `groups:` section), in the order written: named
  // aggregates of headings outside the tree, computed like every aggregate
  // and appended to the survey's classification after its tree nodes
  // (Classification::SetGroups). Default none.
  std::vector<GroupDefinition> groups;
  // Labels of classification nodes (the `labels:` section: code -> text).
  // Default none: a node is shown by its code.
  std::vector<NodeLabel> labels;
  Reference reference;
  // Registry names of the methods (elementary_method.h,
  // aggregation_method.h), as the registry spells them.
  std::string elementary = "cpd";
  std::string aggregation = "geks-fisher";
  InvalidRowPolicy invalid_rows = InvalidRowPolicy::kStop;
  // Output folder; default "out" beside the configuration.
  std::string output = "out";
  // Nodes whose matrices and bilateral tables are written: empty = the root
  // only; {"all"} (the only value) = every node. With other names beside it,
  // "all" is a node code like any other (the default root is called "all").
  std::vector<std::string> matrices;
  // With `matrices` empty, the root's matrix/ and bilateral/ tables, whose
  // rows grow as the square of the regions, are written only when the
  // survey has at most this many regions; `matrices` asks for them at any
  // size. Default 500 (250,000 pairs, a bilateral table of about 20 MB).
  int matrices_up_to_regions = 500;
  // CPD weight of a representative cell relative to 1 for the others. 1 =
  // unweighted (default); 3 is common practice in international comparisons.
  double representative_weight = 1.0;
  // CPD weight of a cell when the price files carry a `weight` column:
  // equal (default; the quote weights enter the cell's geometric mean only)
  // or quote-weights (also weigh each cell by the sum of its quote weights,
  // times representative_weight). Why equal is the default: README, "Quote
  // weights and quantities".
  CpdCellWeights cpd_cell_weights = CpdCellWeights::kEqual;
  // Cells whose |standardised residual| exceeds this are listed as outliers.
  // 3.5 (default): beyond what normal errors give more than about once in
  // 2,000 cells, yet catches the gross errors (wrong unit, misplaced decimal)
  // seen in practice.
  double outlier_threshold = 3.5;
  // Fit the outlier screen compares cells with: "robust" (default; Huber
  // weights with the scale re-estimated as the fit iterates, so an error
  // cannot hide by moving its own fit) or "least-squares" (the classic
  // residuals, for comparison with earlier runs).
  std::string outlier_fit = "robust";
  // Heteroskedasticity-consistent (sandwich) standard errors of CPD parities,
  // column log_se_robust: "off", "hc0", "hc1" (default) or "hc3" (see
  // RobustErrors in paritas/elementary/cpd.h). hc1 by default: on a complete
  // heading every cell has the same hat value p / n, so HC1 equals HC2,
  // unbiased under equal variances (MacKinnon and White 1985), while HC0 is
  // biased low by (n - p) / n and HC3 high by n / (n - p). Measured on 10
  // regions x 8 items (issue 14): variance 0.72x (HC0), 1.01x (HC1), 1.38x
  // (HC3) the true one. Cost: about doubles the elementary stage on 1,000
  // regions x 100 headings x 50 items (README, "Methods"). The old boolean
  // robust_standard_errors is refused with a message saying how to write it.
  std::string robust_errors = "hc1";
  // Writes report.html (default true).
  bool report = true;
  // Region whose root parity the report explains heading by heading ("Why
  // regions are dear"); checked against the survey by compute. Empty
  // (default) = the dearest region at the root.
  std::string report_region;
  // Worker threads; 0 = all cores.
  int threads = 0;
  // Repeated quote rows: keep (default), drop or reject.
  DuplicateQuotePolicy duplicate_quotes = DuplicateQuotePolicy::kKeep;
  // Thresholds of the plausibility warnings (the `checks:` section).
  CheckThresholds checks;
  // Rules for missing heading parities.
  MissingParitiesSettings missing_parities;
  // Exit with code 3, after writing every output, when the run raised any
  // warning or found a gross outlier (default false).
  bool strict = false;
  // Limits on the input files (the `limits:` section): every file named
  // above, and the classification file, is read under them. The
  // configuration file itself is read under the defaults.
  ReadLimits limits;

  bool IsValid(std::string* error) const;
};

// Returns true when a `matrices` setting asks for every node: the single
// value "all" (any case). Beside other names "all" is a node code.
bool MatricesMeanEveryNode(const std::vector<std::string>& matrices);

// Splits each value on commas into `names`, trimming spaces: {"food,
// housing", "all"} gives {"food", "housing", "all"}, the one list syntax of
// the configuration and the command line. Returns false with "an empty name
// in 'food,,housing'" when a name is empty.
bool SplitNameList(const std::vector<std::string>& values, std::vector<std::string>* names,
                   std::string* error);

// A configuration error in parts, beside its message: where it is and which
// setting and value it is about, as far as the reader knows them (for
// callers that show them apart, such as the Python module's exceptions).
struct ConfigError {
  // The message, exactly as the std::string overloads give it.
  std::string message;
  // The configuration file's path, as given.
  std::string file;
  // 1-based line and column of the key or value at fault in `file`; 0 when
  // the reader has no place in the configuration for it (a file that cannot
  // be read, a YAML syntax error, a problem in the classification file or
  // between settings: the message then names its place itself, if any).
  int line = 0;
  int column = 0;
  // The setting at fault as a dotted path, as the message names it
  // ("survey.prices.delimiter", "checks.min_items", "aggregation"; for an
  // unknown key the key as written, "survey.delimter"); empty when the
  // problem is not about one setting.
  std::string key;
  // The text found under `key` as written (YAML scalar); empty when it is
  // not a single value.
  std::string value;
};

// Reads a run configuration. Paths inside are resolved against the folder of
// `path`. Returns false with a message naming file, line and key on any
// problem; an unknown key suggests the nearest valid one. The file is read
// under the default limits.max_yaml_bytes and limits.max_yaml_depth, the
// classification file it names under its own `limits:`.
bool LoadRunConfig(const std::string& path, RunConfig* config, std::string* error);
// Same, with the error's parts.
bool LoadRunConfig(const std::string& path, RunConfig* config, ConfigError* error);
// Same from text; `path` names the file and sets the base folder.
bool ParseRunConfig(const std::string& yaml_text, const std::string& path, RunConfig* config,
                    std::string* error);
bool ParseRunConfig(const std::string& yaml_text, const std::string& path, RunConfig* config,
                    ConfigError* error);

// Sets the configuration's labels and groups on `classification` (the
// survey's: the configuration's tree, or the flat one built from the
// headings found). Returns false with a message naming the configuration
// file, line and column on an unknown code or a group code that clashes.
bool ApplyGroupsAndLabels(const RunConfig& config, Classification* classification,
                          std::string* error);

}  // namespace paritas

#endif  // PARITAS_SURVEY_CONFIG_H_
