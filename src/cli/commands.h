// The subcommands of the paritas command line. Each takes parsed arguments,
// calls the library and returns the process exit code.
#ifndef PARITAS_CLI_COMMANDS_H_
#define PARITAS_CLI_COMMANDS_H_

#include <optional>
#include <string>
#include <vector>

namespace paritas::cli {

// Settings given on the command line that override the configuration.
struct Overrides {
  std::optional<std::string> output;
  std::optional<std::string> reference;
  std::optional<std::string> elementary;
  std::optional<std::string> aggregation;
  std::optional<std::string> invalid_rows;
  std::optional<int> threads;
  std::vector<std::string> matrices;
  bool no_report = false;
};

int RunCheckCommand(const std::string& config_path, const Overrides& overrides);
int RunComputeCommand(const std::string& config_path, const Overrides& overrides);

// Prints "paritas: error: <message>" on stderr.
void PrintError(const std::string& message);

}  // namespace paritas::cli

#endif  // PARITAS_CLI_COMMANDS_H_
