// Options, summary and the driver of a sensitivity run: the full sample
// first, then each part asked for (bootstrap.cc, leave_one_out.cc,
// coverage_curve.cc, method_spread.cc), all on the chain of replicate_chain.h.
// Replicates draw from their own random streams and write only their own
// slots, so results do not depend on the number of threads or on scheduling.
#include "paritas/uncertainty/sensitivity.h"

#include <cassert>
#include <chrono>
#include <cmath>
#include <string>
#include <vector>

#include "paritas/base/text.h"
#include "uncertainty/replicate_chain.h"
#include "uncertainty/sensitivity_parts.h"

namespace paritas {
namespace {

std::string Plural(int64_t n, const std::string& word) {
  return std::to_string(n) + " " + word + (n == 1 ? "" : "s");
}

}  // namespace

std::string ToString(BootstrapKind kind) {
  return kind == BootstrapKind::kPlain ? "plain" : "rescaled";
}

bool FromString(const std::string& text, BootstrapKind* kind) {
  const std::string lower = ToLower(Trim(text));
  for (BootstrapKind candidate : {BootstrapKind::kRescaled, BootstrapKind::kPlain}) {
    if (lower == ToString(candidate)) {
      *kind = candidate;
      return true;
    }
  }
  return false;
}

double PercentileType7(const std::vector<double>& sorted_values, double p) {
  assert(!sorted_values.empty());
  const double h = (static_cast<double>(sorted_values.size()) - 1.0) * p;
  const size_t lo = static_cast<size_t>(std::floor(h));
  if (lo + 1 >= sorted_values.size()) return sorted_values.back();
  return sorted_values[lo] +
         (h - static_cast<double>(lo)) * (sorted_values[lo + 1] - sorted_values[lo]);
}

bool SensitivityOptions::IsValid(std::string* error) const {
  if (replicates < 2 || replicates > 100000) {
    *error =
        "replicates must be a whole number from 2 to 100000, found " + std::to_string(replicates);
    return false;
  }
  if (!(level >= kMinIntervalLevel && level <= kMaxIntervalLevel)) {
    *error = "level must be a share from " + FormatFixed(kMinIntervalLevel, 2) + " to " +
             FormatFixed(kMaxIntervalLevel, 3) + ", e.g. 0.95, found ";
    AppendShortest(level, error);
    return false;
  }
  if (coverage_levels.empty() && run_coverage) {
    *error = "coverage needs at least one level, e.g. 90,75,50,25";
    return false;
  }
  for (size_t k = 0; k < coverage_levels.size(); ++k) {
    const double c = coverage_levels[k];
    if (!(c > 0.0 && c <= 1.0)) {
      *error =
          "coverage levels must be shares of items in (0, 1], i.e. percentages above 0 and up to "
          "100, found " +
          FormatFixed(100.0 * c, 4) + " %";
      return false;
    }
    for (size_t j = 0; j < k; ++j) {
      if (coverage_levels[j] == c) {
        *error = "coverage level " + FormatFixed(100.0 * c, 4) + " % is given twice";
        return false;
      }
    }
  }
  if (coverage_repetitions < 2 || coverage_repetitions > 10000) {
    *error = "repetitions must be a whole number from 2 to 10000, found " +
             std::to_string(coverage_repetitions);
    return false;
  }
  if (!run_bootstrap && !run_leave_one_out && !run_coverage && !run_methods) {
    *error =
        "no part to run; parts must name at least one of: " + JoinNames(SensitivityPartNames());
    return false;
  }
  if (!(target_log_se >= kMinTargetLogSe && target_log_se < 1.0)) {
    *error = "target standard error must be at least " + FormatFixed(kMinTargetLogSe, 6) +
             " and below 1 (log points, e.g. 0.01), found ";
    AppendShortest(target_log_se, error);
    return false;
  }
  if (num_threads < 0) {
    *error = "threads must be 0 (all cores) or more, found " + std::to_string(num_threads);
    return false;
  }
  return true;
}

std::vector<std::string> SensitivityPartNames() {
  return {"bootstrap", "leave-one-out", "coverage", "methods"};
}

bool SetSensitivityParts(const std::vector<std::string>& parts, SensitivityOptions* options,
                         std::string* error) {
  SensitivityOptions chosen = *options;
  chosen.run_bootstrap = chosen.run_leave_one_out = chosen.run_coverage = chosen.run_methods =
      false;
  for (const std::string& part : parts) {
    const std::string name = ToLower(Trim(part));
    if (name == "bootstrap") {
      chosen.run_bootstrap = true;
    } else if (name == "leave-one-out") {
      chosen.run_leave_one_out = true;
    } else if (name == "coverage") {
      chosen.run_coverage = true;
    } else if (name == "methods") {
      chosen.run_methods = true;
    } else {
      *error = "part '" + part + "' is not one of: " + JoinNames(SensitivityPartNames());
      const std::string nearest = NearestName(name, SensitivityPartNames());
      if (!nearest.empty()) *error += "; did you mean '" + nearest + "'?";
      return false;
    }
  }
  if (parts.empty()) {
    *error = "parts must name at least one of: " + JoinNames(SensitivityPartNames());
    return false;
  }
  options->run_bootstrap = chosen.run_bootstrap;
  options->run_leave_one_out = chosen.run_leave_one_out;
  options->run_coverage = chosen.run_coverage;
  options->run_methods = chosen.run_methods;
  return true;
}

std::string SensitivitySummary::BriefReport() const {
  std::vector<std::string> parts;
  if (num_replicates > 0) parts.push_back(Plural(num_replicates, "bootstrap replicate"));
  if (num_items_dropped > 0 || num_headings_dropped > 0) {
    parts.push_back(Plural(num_items_dropped, "item") + " and " +
                    Plural(num_headings_dropped, "heading") + " left out in turn");
  }
  if (num_coverage_runs > 0) parts.push_back(Plural(num_coverage_runs, "coverage run"));
  if (num_method_runs > 0) {
    parts.push_back(Plural(num_method_runs, "method run") +
                    (num_method_runs_failed > 0
                         ? " (" + std::to_string(num_method_runs_failed) + " failed)"
                         : ""));
  }
  const double seconds = full_sample_seconds + bootstrap_seconds + leave_one_out_seconds +
                         coverage_seconds + methods_seconds;
  return (parts.empty() ? std::string("nothing run") : JoinNames(parts)) + " in " +
         FormatFixed(seconds, 1) + " s";
}

namespace {

// Full sample: the values every part is compared with.
bool RunFullSample(const Survey& survey, const ComputeOptions& compute,
                   const SensitivityOptions& options, internal::FullSample* full,
                   SensitivityResult* result, SensitivitySummary* summary) {
  const auto start = std::chrono::steady_clock::now();
  full->survey = &survey;
  full->compute = compute;
  if (options.num_threads > 0) full->compute.num_threads = options.num_threads;
  ParityResult parities;
  if (!ComputeParities(survey, full->compute, &parities, &summary->full_sample)) {
    summary->outcome = summary->full_sample.outcome == ComputeOutcome::kInvalidOptions
                           ? SensitivityOutcome::kInvalidOptions
                           : SensitivityOutcome::kComputationFailed;
    summary->message = summary->full_sample.message;
    return false;
  }
  const int num_nodes = static_cast<int>(parities.nodes.size());
  result->parity.resize(num_nodes, survey.num_regions());
  result->rank.resize(num_nodes, survey.num_regions());
  for (int n = 0; n < num_nodes; ++n) {
    result->parity.row(n) = parities.nodes[n].parity.transpose();
    result->rank.row(n) = parities.nodes[n].rank.transpose();
  }
  full->chain = internal::MakeChain(survey, compute);
  full->node_expenditure = internal::NodeExpenditures(survey);
  const std::vector<double> ones(survey.num_items(), 1.0);
  ImputationResult imputation;
  full->num_imputed =
      internal::RunChain(full->chain, full->node_expenditure, ones, &full->heading_log_parity,
                         &full->node_log_parity, nullptr, &full->priced_log_parity, &imputation)
          .num_imputed;
  full->highest_proxy_node = imputation.highest_proxy_node;
  for (size_t h = 0; h < imputation.imputed.size(); ++h) {
    const bool rule_fills = h < full->chain.rules.size() && full->chain.rules[h].rule != ImputationRule::kLeave;
    const bool to_fill = !imputation.imputed[h].empty() || !imputation.left_missing[h].empty();
    full->heading_to_fill.push_back(rule_fills && to_fill ? 1 : 0);
  }
  full->num_threads = internal::ThreadsFor(options.num_threads);
  for (int h = 0; h < full->chain.num_headings; ++h) {
    result->heading_num_items.push_back(static_cast<int>(full->chain.heading_items[h].size()));
    result->heading_external.push_back(internal::HeadingFromFile(full->chain, h) ? 1 : 0);
  }
  result->region_num_items = Eigen::MatrixXi::Zero(survey.num_regions(), survey.num_headings());
  for (size_t k = 0; k < survey.cells.size(); ++k) {
    ++result->region_num_items(survey.cells.region[k], survey.item_heading[survey.cells.item[k]]);
  }
  summary->full_sample_seconds = internal::SecondsSince(start);
  return true;
}

}  // namespace

bool RunSensitivity(const Survey& survey, const ComputeOptions& compute,
                    const SensitivityOptions& options, SensitivityResult* result,
                    SensitivitySummary* summary) {
  *summary = SensitivitySummary();
  *result = SensitivityResult();
  internal::FixEigenBlockSizes();
  std::string error;
  if (!options.IsValid(&error)) {
    summary->outcome = SensitivityOutcome::kInvalidOptions;
    summary->message = error;
    return false;
  }
  internal::FullSample full;
  if (!RunFullSample(survey, compute, options, &full, result, summary)) return false;
  auto cancelled = [&] {
    if (!internal::Cancelled(options)) return false;
    summary->outcome = SensitivityOutcome::kCancelled;
    summary->message = "cancelled";
    return true;
  };
  if (options.run_bootstrap) internal::RunBootstrap(full, options, result, summary);
  if (cancelled()) return false;
  if (options.run_leave_one_out) internal::RunLeaveOneOut(full, options, result, summary);
  if (cancelled()) return false;
  if (options.run_coverage) internal::RunCoverageCurve(full, options, result, summary);
  if (cancelled()) return false;
  if (options.run_methods) internal::RunMethodSpread(full, options, result, summary);
  if (cancelled()) return false;
  summary->outcome = SensitivityOutcome::kOk;
  summary->message = summary->BriefReport();
  return true;
}

}  // namespace paritas
