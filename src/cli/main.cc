// The paritas command line: parses arguments with CLI11 and dispatches to a
// subcommand. CLI11's own exit codes (100+) are mapped to ours: 0 ok,
// 1 invalid input or arguments, 2 computation failed, 3 warnings under
// --strict. Every help page shows each option's default, the exit codes and
// an example that runs on the demo.
#include <CLI/CLI.hpp>
#include <iostream>
#include <optional>
#include <string>

#include "base/memory_reuse.h"
#include "cli/commands.h"
#include "paritas/base/text.h"
#include "paritas/jobs/jobs.h"
#include "paritas/survey/config.h"
#include "paritas/use/deflation.h"
#include "paritas/use/publication.h"

namespace {

using paritas::JoinNames;

// The end of every help page.
std::string HelpFooter(const std::string& example) {
  return "exit codes:\n"
         "  0  ok\n"
         "  1  invalid input or configuration\n"
         "  2  computation failed\n"
         "  3  warnings or gross outliers under --strict (compute, sensitivity)\n"
         "\nexample:\n  " +
         example + "\n";
}

// The configuration, the row policy and threads: every command that reads a survey.
void AddCommon(CLI::App* command, std::string* config_path, paritas::cli::Overrides* overrides) {
  command->add_option("config", *config_path, "run configuration (YAML)")->required();
  command->add_option(
      "--invalid-rows", overrides->invalid_rows,
      "what to do with invalid rows: " + JoinNames(paritas::InvalidRowPolicyNames()) +
          " (default: invalid_rows of the configuration, else stop)");
  command
      ->add_option("--threads", overrides->threads,
                   "worker threads, 0 = all cores (default: threads of the configuration, else "
                   "0)")
      ->type_name("INT");
}

// Settings of the computation, shared by compute and sensitivity.
void AddMethodOverrides(CLI::App* command, paritas::cli::Overrides* overrides) {
  command->add_option("--output", overrides->output,
                      "output folder (default: output of the configuration, else out beside it)");
  command->add_option("--reference", overrides->reference,
                      "mean, weighted-mean, country, or a region code (default: reference of the "
                      "configuration, else mean)");
  command->add_option("--elementary", overrides->elementary,
                      "elementary method: " + JoinNames(paritas::ElementaryMethodNames()) +
                          " (default: elementary of the configuration, else cpd)");
  command->add_option("--aggregation", overrides->aggregation,
                      "aggregation method: " + JoinNames(paritas::AggregationMethodNames()) +
                          " (default: aggregation of the configuration, else geks-fisher)");
}

void AddComputeOverrides(CLI::App* command, paritas::cli::Overrides* overrides) {
  AddMethodOverrides(command, overrides);
  command->add_option("--matrices", overrides->matrices,
                      "nodes whose matrices and bilateral tables are written, separated by spaces "
                      "or commas (food,housing); 'all' alone = every node, beside other names it "
                      "is a node code (default: matrices of the configuration, else the root when "
                      "the survey has at most matrices_up_to_regions regions, 500 by default)");
  command->add_flag("--no-report", overrides->no_report, "do not write report.html");
  command->add_flag("--strict", overrides->strict,
                    "exit with code 3, after writing everything, when the run raised a warning "
                    "(overrides 'strict')");
}

void AddSensitivityOptions(CLI::App* command, paritas::cli::Overrides* overrides,
                           paritas::cli::SensitivityArguments* arguments) {
  AddMethodOverrides(command, overrides);
  command->add_option("--replicates", arguments->replicates, "bootstrap replicates (default 500)")
      ->type_name("INT");
  command->add_option("--seed", arguments->seed, "seed of the resampling (default 1)")
      ->type_name("INT");
  command->add_option("--level", arguments->level, "interval level: a percentage above 1 and at most 99.9, or a share from 0.01 to 0.999 (default 95)")
      ->type_name("NUMBER");
  command->add_option("--coverage", arguments->coverage,
                      "percentages of items kept (default 90,75,50,25)");
  command
      ->add_option("--repetitions", arguments->repetitions,
                   "subsamples per coverage level (default 20)")
      ->type_name("INT");
  command->add_option("--parts", arguments->parts,
                      "parts to run: bootstrap,leave-one-out,coverage,methods (default all)");
  command->add_option("--node", arguments->node,
                      "node or group whose results the table shows; every node is in the files "
                      "(default: the root)");
  command->add_option("--bootstrap", arguments->bootstrap,
                      "bootstrap draws: rescaled (n - 1 of n items; default) or plain (n of n)");
  command->add_option("--interval", arguments->interval,
                      "bootstrap interval: expanded (percentiles widened for the items' degrees "
                      "of freedom; default) or percentile");
  command->add_option("--target-se", arguments->target_se,
                      "standard error of ln parity that items_needed.csv plans for, at least 0.000001 and "
                      "below 1 (default 0.01)");
  command->add_flag("--write-replicates", arguments->write_replicates,
                    "also write every replicate's ln parities (sensitivity/replicates.bin and "
                    "replicates_key.csv)");
  command->add_flag("--all-pairs", arguments->all_pairs,
                    "write the ratio interval of every pair of regions (sensitivity/"
                    "pair_ratios.csv) even above 60 regions, where only neighbours in rank are "
                    "computed by default");
  command->add_flag("--strict", overrides->strict,
                    "exit with code 3, after writing everything, when the run raised a warning "
                    "(overrides 'strict')");
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
  command
      ->add_option("--node-column", options->node_column,
                   "column naming the node of each row (default: none, --node)")
      ->excludes(node);
  command->add_option("--invalid-rows", overrides->invalid_rows,
                      "what to do with invalid rows: " +
                          JoinNames(paritas::InvalidRowPolicyNames()) + " (default stop)");
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

void AddPublishOptions(CLI::App* command, paritas::cli::PublishArguments* arguments) {
  command->add_option("run_folder", arguments->run_dir, "output folder of 'paritas compute'")
      ->required();
  command->add_option("--csv", arguments->csv_path,
                      "price level table as CSV; the real-per-head table goes beside it as "
                      "<name>_real_per_head.csv when the survey has populations (default: none)");
  command->add_option("--xlsx", arguments->xlsx_path,
                      "workbook with one sheet per table and a notes sheet (default: none)");
  command->add_option("--decimals", arguments->decimals,
                      "digits after the point of every figure, 0 to 6 (default 1)")
      ->type_name("INT");
  command->add_option("--sort", arguments->sort,
                      "order of the regions: " + JoinNames(paritas::PublicationOrderNames()) +
                          " (level: dearest at the root first) (default code)");
  command->add_option("--depth", arguments->depth,
                      "nodes down to this depth below the root, 0 = the root only (default: every "
                      "node)")
      ->type_name("INT");
  command->add_flag("--no-intervals", arguments->no_intervals,
                    "leave out the interval columns even when sensitivity/bootstrap.csv exists");
  command->add_option("--config", arguments->config_path,
                      "configuration of the run, for region names and the tree (default: the one "
                      "named in run.json)");
}

// compare OLD NEW's options.
void AddCompareOptions(CLI::App* compare, paritas::cli::CompareArguments* arguments) {
  compare->add_option("old", arguments->old_dir, "output folder of the earlier run")
      ->required();
  compare->add_option("new", arguments->new_dir, "output folder of the later run")
      ->required();
  compare->add_option("--output", arguments->output,
                      "folder written: changes.csv, drivers.csv, comparison.html, run.json "
                      "(default: none, the terminal summary only)");
  compare->add_option("--node", arguments->node,
                      "node of the summary and the page's charts (default: the root)");
  compare->add_option("--top", arguments->top,
                      "regions listed in the summary, largest moves first (default 10)")
      ->type_name("INT");
  compare->add_option("--z", arguments->z,
                      "a change counts as beyond the runs' uncertainty above z x sqrt(se_old^2 + "
                      "se_new^2) (default 1.96)")
      ->type_name("NUMBER");
}

// carry BENCHMARK's options.
void AddCarryOptions(CLI::App* carry, paritas::cli::CarryArguments* arguments) {
  carry->add_option("benchmark", arguments->benchmark_dir,
                    "output folder of compute for the benchmark period")
      ->required();
  carry->add_option("--indices", arguments->indices,
                    "price index file: region,node,period,index (benchmark period = reference)")
      ->required();
  carry->add_option("--period", arguments->period,
                    "period of the index file to carry to (default: the file's only period)");
  carry->add_option("--output", arguments->output, "folder of the carried run")->required();
  carry->add_option("--expenditure", arguments->expenditure,
                    "expenditure of the later period, region,heading,expenditure (default: "
                    "aggregate with the benchmark's weights)");
  carry->add_option("--missing-index", arguments->missing_index,
                    "a region and heading without an index: stop or country (moved as the "
                    "country; default stop)");
  carry->add_option("--config", arguments->config,
                    "configuration of the benchmark run (default: the one its run.json names)");
  carry->add_option("--threads", arguments->threads,
                    "threads for reading the benchmark's survey, 0 = all cores (default 0)");
  carry->add_flag("--no-report", arguments->no_report, "do not write report.html");
}

}  // namespace

int main(int argc, char** argv) {
  paritas::internal::KeepFreedMemoryForReuse();
  CLI::App app{"paritas: regional price parities (PPPs) from a regional price survey", "paritas"};
  app.require_subcommand(1);
  app.set_version_flag("--version", std::string("paritas ") + PARITAS_VERSION);
  app.footer(HelpFooter("paritas compute config/demo.yaml --output out/demo"));

  paritas::cli::Overrides overrides;
  std::string config_path;
  CLI::App* check = app.add_subcommand("check", "validate the survey and describe its structure");
  AddCommon(check, &config_path, &overrides);
  check->footer(HelpFooter("paritas check config/demo.yaml --invalid-rows skip"));
  CLI::App* compute = app.add_subcommand("compute", "compute parities, matrices and real expenditure");
  AddCommon(compute, &config_path, &overrides);
  AddComputeOverrides(compute, &overrides);
  compute->footer(
      HelpFooter("paritas compute config/demo.yaml --output out/demo --matrices food,housing"));
  paritas::DeflateOptions deflate_options;
  CLI::App* deflate = app.add_subcommand("deflate", "express money values of a CSV file in reference prices");
  std::optional<std::string> deflate_decimals;
  AddDeflateOptions(deflate, &deflate_options, &overrides, &deflate_decimals);
  deflate->footer(
      HelpFooter("paritas deflate --parities out/demo --input data/demo/wages.csv --output "
                 "wages_real.csv --value-column hourly_wage"));
  std::string pair_from, pair_to, pair_node, pair_csv;
  bool pair_every_method = false;
  CLI::App* pair = app.add_subcommand("pair", "compare two regions with every index formula");
  AddCommon(pair, &config_path, &overrides);
  pair->add_option("--from", pair_from, "base region (a)")->required();
  pair->add_option("--to", pair_to, "region compared (b)")->required();
  pair->add_option("--node", pair_node, "classification node (default: the root)");
  pair->add_option("--csv", pair_csv,
                   "also write the comparison as CSV (measure,value) (default: terminal only)");
  pair->add_flag("--every-method", pair_every_method,
                  "also the transitive parity under every aggregation method (at an aggregate) "
                  "or elementary method (at a basic heading); one compute per method");
  pair->add_option("--output", overrides.output,
                   "run folder whose sensitivity results (OUTPUT/sensitivity) give the interval "
                   "of the ratio (default: output of the configuration, else out beside it)");
  pair->footer(HelpFooter("paritas pair config/demo.yaml --from cap --to har --node food"));
  paritas::cli::SensitivityArguments sensitivity_arguments;
  CLI::App* sensitivity =
      app.add_subcommand("sensitivity", "bootstrap, leave-one-out, coverage curve and method spread");
  AddCommon(sensitivity, &config_path, &overrides);
  AddSensitivityOptions(sensitivity, &overrides, &sensitivity_arguments);
  sensitivity->footer(
      HelpFooter("paritas sensitivity config/demo.yaml --output out/demo --replicates 200 --parts "
                 "bootstrap,coverage"));
  paritas::cli::PublishArguments publish_arguments;
  CLI::App* publish = app.add_subcommand(
      "publish", "publication tables of a compute run: CSV and a workbook (.xlsx) with notes");
  AddPublishOptions(publish, &publish_arguments);
  publish->footer(HelpFooter(
      "paritas publish out/demo --xlsx demo_tables.xlsx --csv demo_levels.csv --sort level"));

  paritas::cli::CompareArguments compare_arguments;
  CLI::App* compare = app.add_subcommand("compare", "compare two output folders of compute");
  AddCompareOptions(compare, &compare_arguments);
  compare->footer(HelpFooter("paritas compare out/last-year out/demo --output out/changes"));

  paritas::cli::CarryArguments carry_arguments;
  CLI::App* carry = app.add_subcommand(
      "carry", "carry a benchmark run's parities to a later period with regional price indices");
  AddCarryOptions(carry, &carry_arguments);
  carry->footer(HelpFooter(
      "paritas carry out/demo --indices data/demo/price_indices.csv --output out/demo-2026"));

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
  if (publish->parsed()) return paritas::cli::RunPublishCommand(publish_arguments);
  if (compare->parsed()) return paritas::cli::RunCompareCommand(compare_arguments);
  if (carry->parsed()) return paritas::cli::RunCarryCommand(carry_arguments);
  if (pair->parsed()) {
    return paritas::cli::RunPairCommand(config_path, overrides, pair_from, pair_to, pair_node, pair_csv,
                                        pair_every_method);
  }
  return paritas::kExitInvalidInput;
}
