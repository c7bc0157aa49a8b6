// The items-needed simulation: the survey analysed and the pool are two
// generated surveys with the same seed, so they share regional price levels
// and expenditure (the generator draws those from streams of their own) and
// differ only in how many items each heading has.
#include "items_needed_sim.h"

#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cmath>
#include <filesystem>
#include <numeric>

#include "paritas/compute/compute.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/uncertainty/items_needed.h"
#include "paritas/uncertainty/sensitivity.h"
#include "synthetic_survey.h"

namespace paritas::synthetic {
namespace {

double Median(std::vector<double> values) {
  if (values.empty()) return std::nan("");
  std::sort(values.begin(), values.end());
  return PercentileType7(values, 0.5);
}

// Generates a complete survey (every region prices every item once) with
// `items` items per heading and loads it as the command line would.
bool MakeSurvey(const ItemsNeededSimOptions& options, int items, Survey* survey,
                RunConfig* config, std::string* error) {
  SyntheticOptions synth;
  synth.num_regions = options.num_regions;
  synth.num_headings = options.num_headings;
  synth.num_groups = options.num_groups;
  synth.items_per_heading = items;
  synth.coverage = 1.0;
  synth.quotes_per_cell = 1;
  synth.noise_sd = options.noise_sd;
  synth.seed = options.seed;
  static std::atomic<int> counter{0};
  const std::string folder =
      (std::filesystem::temp_directory_path() /
       ("paritas-items-needed-" + std::to_string(::getpid()) + "-" + std::to_string(++counter)))
          .string();
  LoadSummary load;
  const bool ok = WriteSurvey(Generate(synth), folder, error) &&
                  LoadRunConfig(folder + "/config.yaml", config, error) &&
                  LoadSurvey(*config, LoadOptions(), survey, &load);
  std::filesystem::remove_all(folder);
  if (!ok && error->empty()) *error = load.message;
  return ok;
}

// Weight 1 on `keep` items of each heading drawn without replacement.
void DrawItems(const Survey& pool, int keep, RandomStream* stream, std::vector<double>* weight) {
  weight->assign(pool.num_items(), 0.0);
  std::vector<int> items;
  for (int h = 0; h < pool.num_headings(); ++h) {
    const HeadingRange& range = pool.heading_range[h];
    items.resize(range.num_items());
    std::iota(items.begin(), items.end(), range.item_begin);
    const int n = static_cast<int>(items.size());
    for (int k = 0; k < std::min(keep, n); ++k) {
      const int pick = k + static_cast<int>(stream->NextUniform() * (n - k));
      std::swap(items[k], items[pick]);
      (*weight)[items[k]] = 1.0;
    }
  }
}

}  // namespace

bool ItemsNeededSimOptions::IsValid(std::string* error) const {
  if (num_regions < 3 || num_headings < 2 || num_groups < 1 || num_groups > num_headings ||
      items_now < 3 || pool_items < 4 * items_now || !(noise_sd > 0) ||
      !(target_share > 0 && target_share <= 1) || replicates < 50 || samples < 10) {
    *error = "items-needed simulation: options out of range";
    return false;
  }
  return true;
}

bool SimulateItemsNeeded(const ItemsNeededSimOptions& options, ItemsNeededSimResult* result,
                         std::string* error) {
  *result = ItemsNeededSimResult();
  if (!options.IsValid(error)) return false;
  // The survey analysed: the bootstrap and the table.
  Survey survey;
  RunConfig config;
  if (!MakeSurvey(options, options.items_now, &survey, &config, error)) return false;
  const ComputeOptions compute = ComputeOptions::FromConfig(config);
  SensitivityOptions sensitivity;
  sensitivity.replicates = options.replicates;
  sensitivity.seed = options.seed;
  sensitivity.num_threads = options.num_threads;
  sensitivity.run_leave_one_out = sensitivity.run_coverage = sensitivity.run_methods = false;
  SensitivityResult analysed;
  SensitivitySummary summary;
  if (!RunSensitivity(survey, compute, sensitivity, &analysed, &summary)) {
    *error = summary.message;
    return false;
  }
  // The target is set from the root's standard error now, then planned for.
  const double root_se = ItemsNeeded(survey, analysed, 1.0).front().log_se_median;
  result->target_log_se = options.target_share * root_se;
  const std::vector<ItemsNeededRow> plan = ItemsNeeded(survey, analysed, result->target_log_se);
  if (!plan.front().items_for_median) {
    *error = "the plan asks for over 10^12 items per heading";
    return false;
  }
  result->items_priced = static_cast<int>(*plan.front().items_for_median);

  // The pool, priced `samples` times with items_priced items per heading.
  Survey pool;
  RunConfig pool_config;
  if (!MakeSurvey(options, options.pool_items, &pool, &pool_config, error)) return false;
  const int num_nodes = static_cast<int>(pool.classification.nodes().size());
  std::vector<Eigen::MatrixXd> runs(options.samples);
  std::vector<double> weight;
  for (int s = 0; s < options.samples; ++s) {
    RandomStream stream(options.seed, 1000 + static_cast<uint64_t>(s));
    DrawItems(pool, result->items_priced, &stream, &weight);
    if (!ReplicateParities(pool, compute, weight, &runs[s], nullptr, error)) return false;
  }
  const double fpc =
      std::sqrt(1.0 - static_cast<double>(result->items_priced) / options.pool_items);
  for (const ItemsNeededRow& row : plan) {
    ItemsNeededSimRow out;
    out.node = survey.classification.nodes()[row.node].code;
    out.is_heading = row.is_heading;
    out.items_now = row.items_now;
    out.log_se_now = row.log_se_median;
    std::vector<double> predicted, reached;
    const int n = pool.classification.FindNode(out.node);
    if (n < 0 || n >= num_nodes) continue;
    for (int r = 0; r < pool.num_regions(); ++r) {
      const double se = analysed.boot_log_se(row.node, r);
      if (!std::isfinite(se) || se <= 0.0) continue;
      predicted.push_back(se * std::sqrt(row.items_now / result->items_priced));
      double mean = 0.0;
      for (const Eigen::MatrixXd& run : runs) mean += run(n, r);
      mean /= options.samples;
      double ss = 0.0;
      for (const Eigen::MatrixXd& run : runs) ss += (run(n, r) - mean) * (run(n, r) - mean);
      reached.push_back(std::sqrt(ss / (options.samples - 1.0)) / fpc);
    }
    out.log_se_predicted = Median(predicted);
    out.log_se_reached = Median(reached);
    result->rows.push_back(out);
  }
  return true;
}

}  // namespace paritas::synthetic
