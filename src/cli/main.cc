// The paritas command line: parses arguments with CLI11 and dispatches to a
// subcommand. CLI11's own exit codes (100+) are mapped to ours: 0 ok,
// 1 invalid input or arguments, 2 computation failed.
#include <CLI/CLI.hpp>
#include <iostream>
#include <optional>
#include <string>

#include "cli/commands.h"
#include "paritas/base/text.h"
#include "paritas/jobs/jobs.h"
#include "paritas/survey/config.h"
#include "paritas/use/deflation.h"

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
                      "nodes whose matrices and bilateral tables are written, separated by spaces "
                      "or commas (food,housing); 'all' alone = every node, beside other names it "
                      "is a node code");
  command->add_flag("--no-report", overrides->no_report, "do not write report.html");
}

void AddDeflateOptions(CLI::App* command, paritas::DeflateOptions* options,
                       paritas::cli::Overrides* overrides, std::optional<std::string>* decimals) {
  command->add_option("--parities", options->parities_dir, "output folder of 'paritas compute'")
      ->required();
  command->add_option("--input", options->input_path, "CSV file with a region and money columns")
      ->required();
  command->add_option("--output", options->output_path, "CSV file written: the input plus <column>_real")
      ->required();
  command->add_option("--region-column", options->region_column, "column of region codes (default region)");
  command->add_option("--value-column", options->value_columns, "a money column to deflate (repeatable)")
      ->required();
  CLI::Option* node =
      command->add_option("--node", options->node, "node deflating every row (default: the root)");
  command->add_option("--node-column", options->node_column, "column naming the node of each row")
      ->excludes(node);
  command->add_option("--invalid-rows", overrides->invalid_rows,
                      "what to do with invalid rows: " + JoinNames(paritas::InvalidRowPolicyNames()));
  command->add_option("--rejected", options->rejected_path,
                      "rejected rows under skip (default <output>_rejected.csv)");
  command->add_flag("--with-parity", options->include_parity, "add the parity used as a column");
  command->add_flag("--interval", options->include_interval,
                    "add <column>_real_lower/_upper from sensitivity/bootstrap.csv");
  command->add_flag("--allow-negative", options->allow_negative, "accept negative values (e.g. net incomes)");
  command
      ->add_option("--decimals", *decimals,
                   "round real values to this many digits (default: exact, the shortest text "
                   "that reads back to the same number)")
      ->type_name("INT");
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
        ->type_name("INT");
  };

  CLI::App* check = app.add_subcommand("check", "validate the survey and describe its structure");
  add_common(check);
  CLI::App* compute = app.add_subcommand("compute", "compute parities, matrices and real expenditure");
  add_common(compute);
  AddComputeOverrides(compute, &overrides);
  paritas::DeflateOptions deflate_options;
  CLI::App* deflate = app.add_subcommand("deflate", "express money values of a CSV file in reference prices");
  std::optional<std::string> deflate_decimals;
  AddDeflateOptions(deflate, &deflate_options, &overrides, &deflate_decimals);
  std::string pair_from, pair_to, pair_node, pair_csv;
  CLI::App* pair = app.add_subcommand("pair", "compare two regions with every index formula");
  add_common(pair);
  pair->add_option("--from", pair_from, "base region (a)")->required();
  pair->add_option("--to", pair_to, "region compared (b)")->required();
  pair->add_option("--node", pair_node, "classification node (default: the root)");
  pair->add_option("--csv", pair_csv, "also write the comparison as CSV (measure,value)");
  paritas::cli::SensitivityArguments sensitivity_arguments;
  CLI::App* sensitivity =
      app.add_subcommand("sensitivity", "bootstrap, leave-one-out, coverage curve and method spread");
  add_common(sensitivity);
  sensitivity->add_option("--output", overrides.output, "output folder (overrides 'output')");
  sensitivity->add_option("--reference", overrides.reference,
                          "mean, weighted-mean, or a region code (overrides 'reference')");
  sensitivity->add_option("--elementary", overrides.elementary,
                          "elementary method: " + JoinNames(paritas::ElementaryMethodNames()));
  sensitivity->add_option("--aggregation", overrides.aggregation,
                          "aggregation method: " + JoinNames(paritas::AggregationMethodNames()));
  sensitivity->add_option("--replicates", sensitivity_arguments.replicates, "bootstrap replicates (default 500)");
  sensitivity->add_option("--seed", sensitivity_arguments.seed, "seed of the resampling (default 1)");
  sensitivity->add_option("--level", sensitivity_arguments.level, "interval level in % (default 95)");
  sensitivity->add_option("--coverage", sensitivity_arguments.coverage,
                          "percentages of items kept (default 90,75,50,25)");
  sensitivity->add_option("--repetitions", sensitivity_arguments.repetitions,
                          "subsamples per coverage level (default 20)");
  sensitivity->add_option("--parts", sensitivity_arguments.parts,
                          "parts to run (default all): bootstrap,leave-one-out,coverage,methods");

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

  // One list syntax everywhere: names separated by spaces or commas.
  std::string list_error;
  if (!paritas::SplitNameList(overrides.matrices, &overrides.matrices, &list_error)) {
    paritas::cli::PrintError("--matrices: " + list_error);
    return paritas::kExitInvalidInput;
  }

  if (check->parsed()) return paritas::cli::RunCheckCommand(config_path, overrides);
  if (compute->parsed()) return paritas::cli::RunComputeCommand(config_path, overrides);
  if (deflate->parsed()) {
    double decimals = 0;
    if (deflate_decimals &&
        !paritas::cli::ParseWholeOption("--decimals", *deflate_decimals, 0, 17, &decimals)) {
      return paritas::kExitInvalidInput;
    }
    if (deflate_decimals) deflate_options.decimals = static_cast<int>(decimals);
    return paritas::cli::RunDeflateCommand(deflate_options, overrides);
  }
  if (sensitivity->parsed()) {
    return paritas::cli::RunSensitivityCommand(config_path, overrides, sensitivity_arguments);
  }
  if (pair->parsed()) {
    return paritas::cli::RunPairCommand(config_path, overrides, pair_from, pair_to, pair_node, pair_csv);
  }
  return paritas::kExitInvalidInput;
}
