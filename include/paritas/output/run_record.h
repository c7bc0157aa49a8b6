// The machine-readable run record (run.json): what was read, how it was
// computed, what came out, and how long each stage took.
#ifndef PARITAS_OUTPUT_RUN_RECORD_H_
#define PARITAS_OUTPUT_RUN_RECORD_H_

#include <cstdint>
#include <string>
#include <utility>
#include <vector>

#include "paritas/compute/compute.h"
#include "paritas/output/run_folder.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey.h"
#include "paritas/survey/survey_loader.h"

namespace paritas {

// Bumped whenever a field changes meaning or is removed.
// 2: run_id; outputs as objects with bytes and SHA-256.
inline constexpr int kRunRecordSchemaVersion = 2;

struct StageTiming {
  std::string stage;  // "read", "cells", "elementary", "aggregation", "write", ...
  double seconds = 0.0;
};

// Digests of the files of a run, in the order given.
std::vector<OutputDigest> DigestOutputs(const std::vector<OutputFile>& files);

struct RunRecord {
  std::string command;  // "check", "compute", "sensitivity"
  // Identifies this run (NewRunId()); empty for commands that write no folder.
  std::string run_id;
  const RunConfig* config = nullptr;
  const LoadSummary* load = nullptr;
  const Survey* survey = nullptr;        // may be null when loading failed
  const ComputeSummary* compute = nullptr;  // may be null
  std::string outcome;  // "ok", "invalid input", "computation failed"
  std::string message;
  int exit_code = 0;
  // Warning sentences; run.json lists the first kMaxRecordedWarnings.
  std::vector<std::string> warnings;
  // Warnings per kind (compute/plausibility.h); written when not empty.
  std::vector<std::pair<std::string, int64_t>> warning_counts;
  std::vector<std::string> outputs;  // files written, relative to the output folder
  // When given, "outputs" lists these (path, bytes, sha256) instead of names;
  // run.json itself is listed by name last.
  std::vector<OutputDigest> output_digests;
  std::vector<StageTiming> stages;
  // Further top-level sections as (key, JSON text), e.g. sensitivity settings.
  std::vector<std::pair<std::string, std::string>> sections;
};

// Warning sentences listed in run.json at most (all are in warnings.csv).
inline constexpr size_t kMaxRecordedWarnings = 1000;

// Returns the run record's `missing_parities` section: one entry per basic
// heading, {"heading", "rule", "regions_imputed": [codes], "regions_missing":
// [codes]}, the rule applied and the regions it filled or could not fill
// (ParityResult::heading_rules, imputed_regions, missing_regions). "[]" when
// the result carries no rules.
std::string MissingParitiesRecordJson(const Survey& survey, const ParityResult& result);

// Returns the record as pretty-printed JSON with keys in a fixed order.
std::string RunRecordJson(const RunRecord& record);

// Reads the run record of an output folder: its run id and the JSON text.
// False with a message naming the file when it is missing or not a run
// record of ours.
bool ReadRunRecord(const std::string& folder, std::string* run_id, std::string* json,
                   std::string* error);

// Returns the configuration file named in a run record's JSON
// (configuration.config_path), or "" when it names none.
std::string RunConfigPath(const std::string& json);

// What makes the results of two run records incomparable: different input
// files (by SHA-256, per role) or different settings that change parities
// (reference, elementary, aggregation, invalid_rows, representative_weight,
// missing_parities).
// Each difference as one line, e.g. "reference: mean in this run, cap in the
// other"; empty when the two rest on the same inputs and settings.
std::vector<std::string> RunDifferences(const std::string& this_json, const std::string& other_json);

}  // namespace paritas

#endif  // PARITAS_OUTPUT_RUN_RECORD_H_
