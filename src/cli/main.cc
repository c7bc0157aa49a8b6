// The paritas command line: parses arguments with CLI11 and dispatches to a
// subcommand. CLI11's own exit codes (100+) are mapped to ours: 0 ok,
// 1 invalid input or arguments, 2 computation failed.
#include <iostream>
#include <string>

#include <CLI/CLI.hpp>

#include "cli/commands.h"
#include "paritas/config.h"
#include "paritas/jobs.h"
#include "paritas/text.h"

namespace {

using paritas::JoinNames;

void AddComputeOverrides(CLI::App* command, paritas::cli::Overrides* overrides) {
  command->add_option("--output", overrides->output, "output folder (overrides 'output')");
  command->add_option("--reference", overrides->reference,
                      "mean, weighted-mean, or a region code (overrides 'reference')");
  command->add_option("--elementary", overrides->elementary,
                      "elementary method: " + JoinNames(paritas::ElementaryMethodNames()));
  command->add_option("--aggregation", overrides->aggregation,
                      "aggregation method: " + JoinNames(paritas::AggregationMethodNames()));
  command->add_option("--matrices", overrides->matrices,
                      "nodes whose matrices and bilateral tables are written, or 'all'");
  command->add_flag("--no-report", overrides->no_report, "do not write report.html");
}

}  // namespace

int main(int argc, char** argv) {
  CLI::App app{"paritas: regional price parities (PPPs) from a regional price survey"};
  app.require_subcommand(1);
  app.set_version_flag("--version", std::string("paritas ") + PARITAS_VERSION);

  paritas::cli::Overrides overrides;
  std::string config_path;
  auto add_common = [&](CLI::App* command) {
    command->add_option("config", config_path, "run configuration (YAML)")->required();
    command->add_option("--invalid-rows", overrides.invalid_rows,
                        "what to do with invalid rows: " + JoinNames(paritas::InvalidRowPolicyNames()));
    command->add_option("--threads", overrides.threads, "worker threads (0 = all cores)")
        ->check(CLI::Range(0, 1024));
  };

  CLI::App* check = app.add_subcommand("check", "validate the survey and describe its structure");
  add_common(check);
  CLI::App* compute = app.add_subcommand("compute", "compute parities, matrices and real expenditure");
  add_common(compute);
  AddComputeOverrides(compute, &overrides);

  try {
    app.parse(argc, argv);
  } catch (const CLI::CallForHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForAllHelp& e) {
    return app.exit(e);
  } catch (const CLI::CallForVersion& e) {
    return app.exit(e);
  } catch (const CLI::ParseError& e) {
    paritas::cli::PrintError(e.what());
    std::cerr << "run 'paritas --help' for usage\n";
    return paritas::kExitInvalidInput;
  }

  if (check->parsed()) return paritas::cli::RunCheckCommand(config_path, overrides);
  if (compute->parsed()) return paritas::cli::RunComputeCommand(config_path, overrides);
  return paritas::kExitInvalidInput;
}
