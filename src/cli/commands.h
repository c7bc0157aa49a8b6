// The subcommands of the paritas command line. Each takes parsed arguments,
// calls the library and returns the process exit code.
#ifndef PARITAS_CLI_COMMANDS_H_
#define PARITAS_CLI_COMMANDS_H_

#include <optional>
#include <sstream>
#include <string>
#include <vector>

namespace paritas { struct DeflateOptions; }
namespace paritas {
struct RunConfig;
}

namespace paritas::cli {

// Settings given on the command line that override the configuration.
struct Overrides {
  std::optional<std::string> output;
  std::optional<std::string> reference;
  std::optional<std::string> elementary;
  std::optional<std::string> aggregation;
  std::optional<std::string> invalid_rows;
  std::optional<std::string> threads;  // as typed; parsed by LoadConfigWithOverrides
  std::vector<std::string> matrices;
  bool no_report = false;
  bool strict = false;
};

int RunCheckCommand(const std::string& config_path, const Overrides& overrides);
int RunComputeCommand(const std::string& config_path, const Overrides& overrides);
int RunDeflateCommand(const DeflateOptions& options, const Overrides& overrides);
// every_method: also the pair's transitive parity under every method of the
// node's family (pair --every-method).
int RunPairCommand(const std::string& config_path, const Overrides& overrides, const std::string& from,
                   const std::string& to, const std::string& node, const std::string& csv_path,
                   bool every_method);

// Values of the `sensitivity` options as typed; the command parses and checks them.
struct SensitivityArguments {
  std::optional<std::string> replicates;
  std::optional<std::string> seed;
  std::optional<std::string> level;
  std::optional<std::string> coverage;
  std::optional<std::string> repetitions;
  std::optional<std::string> parts;
  std::optional<std::string> node;
  std::optional<std::string> bootstrap;
  std::optional<std::string> interval;
  std::optional<std::string> target_se;
  bool write_replicates = false;
  bool all_pairs = false;
};
int RunSensitivityCommand(const std::string& config_path, const Overrides& overrides,
                          const SensitivityArguments& arguments);

// Values of the `publish` options as typed; the command parses and checks them.
struct PublishArguments {
  std::string run_dir;
  std::string csv_path;
  std::string xlsx_path;
  std::string config_path;
  std::optional<std::string> decimals;
  std::optional<std::string> sort;
  std::optional<std::string> depth;
  bool no_intervals = false;
};
int RunPublishCommand(const PublishArguments& arguments);
// Arguments of `compare` as typed; numbers are parsed by the command.
struct CompareArguments {
  std::string old_dir;
  std::string new_dir;
  std::string output;
  std::string node;
  std::optional<std::string> top;
  std::optional<std::string> z;
};
int RunCompareCommand(const CompareArguments& arguments);
// Arguments of `carry` as typed; the command parses and checks them.
struct CarryArguments {
  std::string benchmark_dir;
  std::string indices;
  std::string period;
  std::string output;
  std::string expenditure;
  std::string config;
  std::optional<std::string> missing_index;
  std::optional<std::string> threads;
  bool no_report = false;
};
int RunCarryCommand(const CarryArguments& arguments);

// Loads the configuration and applies the command-line overrides. Returns
// false after printing the problem.
bool LoadConfigWithOverrides(const std::string& path, const Overrides& overrides, RunConfig* config);

// Reads a whole number option typed as text. Prints "<option> must be a
// whole number from <min><min_note> to <max>, found '<text>'" and returns
// false when it is not one in range (min_note e.g. " (all cores)").
bool ParseWholeOption(const std::string& option, const std::string& text, double min, double max,
                      double* value, const std::string& min_note = "");

// Prints "paritas: error: <message>" on stderr.
void PrintError(const std::string& message);

// Write text to standard output / standard error with control and
// bidirectional formatting characters shown as escapes (VisibleText): codes
// and values from data files can neither drive the terminal nor reorder
// what is displayed. Every line the commands print goes through these.
void PrintOut(const std::string& text);
void PrintErr(const std::string& text);

}  // namespace paritas::cli

#endif  // PARITAS_CLI_COMMANDS_H_
