// The extension `paritas._paritas`: each function reads a configuration,
// applies keyword options through the library's own parsers, runs one library
// job with the GIL released and hands back plain Python values (the output
// files' text, rejected rows, warnings) and read-only numpy arrays over the
// results' own memory, owned by a capsule (no copy). The package around it
// (python/paritas/__init__.py) turns tables into DataFrames and outcomes into
// exceptions; no computing happens in either layer.
#include <pybind11/functional.h>
#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <atomic>
#include <chrono>
#include <condition_variable>
#include <exception>
#include <limits>
#include <memory>
#include <mutex>
#include <string>
#include <thread>
#include <vector>

#include "paritas/base/text.h"
#include "paritas/compute/compute.h"
#include "paritas/elementary/elementary_method.h"
#include "paritas/aggregation/aggregation_method.h"
#include "paritas/jobs/compare_job.h"
#include "paritas/jobs/jobs.h"
#include "paritas/output/output_writers.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/uncertainty/sensitivity.h"
#include "paritas/use/deflation.h"
#include "paritas/use/pair_comparison.h"

namespace py = pybind11;

namespace paritas::python {
namespace {

// An outcome the package raises as InvalidInput or ComputationFailed.
py::dict Failure(int exit_code, const std::string& message, const std::string& key = "",
                 const std::string& value = "") {
  py::dict out;
  out["ok"] = false;
  out["exit_code"] = exit_code;
  out["message"] = message;
  out["key"] = key;
  out["value"] = value;
  return out;
}

// A configuration error with its parts (file, line, column; None where the
// reader has none).
py::dict ConfigFailure(const ConfigError& error) {
  py::dict out = Failure(kExitInvalidInput, error.message, error.key, error.value);
  out["file"] = error.file;
  out["line"] = error.line > 0 ? py::object(py::int_(error.line)) : py::object(py::none());
  out["column"] = error.column > 0 ? py::object(py::int_(error.column)) : py::object(py::none());
  return out;
}

py::list RejectedRows(const std::vector<RejectedRow>& rows) {
  py::list out;
  for (const RejectedRow& row : rows) {
    py::dict d;
    d["file"] = row.file;
    d["line"] = row.line;
    d["reason"] = row.reason;
    d["raw"] = row.raw;
    out.append(d);
  }
  return out;
}

py::list Warnings(const std::vector<RunWarning>& warnings) {
  py::list out;
  for (const RunWarning& w : warnings) {
    py::dict d;
    d["kind"] = w.kind;
    d["node"] = w.node;
    d["region"] = w.region;
    d["text"] = w.text;
    out.append(d);
  }
  return out;
}

py::dict Files(const std::vector<OutputFile>& files) {
  py::dict out;
  for (const OutputFile& f : files) {
    // Binary outputs (replicates.bin) as bytes, every table as text.
    const bool binary = f.relative_path.ends_with(".bin");
    out[py::str(f.relative_path)] =
        binary ? py::object(py::bytes(f.contents)) : py::object(py::str(f.contents));
  }
  return out;
}

// A Python object owning `object`: deleted when the last array over its
// memory (each holds the capsule as its base) is garbage-collected.
template <typename T>
py::capsule Owner(std::unique_ptr<T> object) {
  return py::capsule(object.release(), [](void* p) { delete static_cast<T*>(p); });
}

// A read-only float64 array over `data` (no copy), kept alive by `owner`.
py::array ReadOnlyView(const double* data, std::vector<py::ssize_t> shape,
                       std::vector<py::ssize_t> strides, const py::capsule& owner) {
  py::array view(py::dtype::of<double>(), std::move(shape), std::move(strides), data, owner);
  view.attr("flags").attr("writeable") = false;
  return view;
}

// A view of an Eigen matrix (column-major) as rows x cols; None when empty
// (a part that did not run).
py::object MatrixView(const Eigen::MatrixXd& m, const py::capsule& owner) {
  if (m.size() == 0) return py::none();
  constexpr py::ssize_t kDouble = sizeof(double);
  return ReadOnlyView(m.data(), {m.rows(), m.cols()}, {kDouble, kDouble * m.rows()}, owner);
}

py::list NodeCodes(const Survey& survey) {
  py::list out;
  for (const ClassificationNode& node : survey.classification.nodes()) out.append(node.code);
  return out;
}

py::list RegionCodes(const Survey& survey, const std::vector<int>& regions) {
  py::list out;
  for (int r : regions) out.append(survey.regions.Code(r));
  return out;
}

std::vector<int> EveryRegion(const Survey& survey) {
  std::vector<int> regions(survey.num_regions());
  for (int r = 0; r < survey.num_regions(); ++r) regions[r] = r;
  return regions;
}

// What the arrays of a compute run point into: the parities as one nodes x
// regions matrix (the library holds one vector per node, so this is the one
// copy made, once) and the parity matrix of every node whose matrix/ file
// the run made (ParityMatrix, the file's numbers).
struct ComputeArrays {
  Eigen::MatrixXd parity;
  std::vector<Eigen::MatrixXd> matrices;
};

py::dict ComputeArrayViews(const ComputeJobSummary& summary) {
  const Survey& survey = summary.survey;
  const std::vector<NodeResult>& nodes = summary.result.nodes;
  auto held = std::make_unique<ComputeArrays>();
  held->parity.resize(static_cast<Eigen::Index>(nodes.size()), survey.num_regions());
  held->parity.setConstant(std::numeric_limits<double>::quiet_NaN());
  for (size_t n = 0; n < nodes.size(); ++n) {
    if (nodes[n].parity.size() == held->parity.cols()) {
      held->parity.row(static_cast<Eigen::Index>(n)) = nodes[n].parity.transpose();
    }
  }
  std::vector<bool> has_file;
  for (const NodeResult& node : nodes) {
    const std::string name =
        "matrix/" + NodeFileName(survey.classification.nodes()[node.node].code) + ".csv";
    bool found = false;
    for (const OutputFile& f : summary.files) found = found || f.relative_path == name;
    has_file.push_back(found);
  }
  std::vector<std::vector<int>> matrix_regions;
  std::vector<int> matrix_nodes;
  for (size_t n = 0; n < nodes.size(); ++n) {
    if (!has_file[n]) continue;
    matrix_regions.emplace_back();
    held->matrices.push_back(ParityMatrix(nodes[n], &matrix_regions.back()));
    matrix_nodes.push_back(nodes[n].node);
  }
  const ComputeArrays& arrays = *held;
  const py::capsule owner = Owner(std::move(held));
  py::dict out;
  out["parity"] = MatrixView(arrays.parity, owner);
  out["nodes"] = NodeCodes(survey);
  out["regions"] = RegionCodes(survey, EveryRegion(survey));
  py::dict matrices;
  for (size_t k = 0; k < matrix_nodes.size(); ++k) {
    matrices[py::str(survey.classification.nodes()[matrix_nodes[k]].code)] = py::make_tuple(
        MatrixView(arrays.matrices[k], owner), RegionCodes(survey, matrix_regions[k]));
  }
  out["matrices"] = matrices;
  return out;
}

// Views of a sensitivity run's node x region matrices and, when kept, its
// replicates (node x region x replicate), over the library's result moved
// into the capsule: no copy.
py::dict SensitivityArrayViews(SensitivityJobSummary* summary) {
  auto held = std::make_unique<SensitivityResult>(std::move(summary->result));
  const SensitivityResult& result = *held;
  const py::capsule owner = Owner(std::move(held));
  py::dict out;
  out["nodes"] = NodeCodes(summary->survey);
  out["regions"] = RegionCodes(summary->survey, EveryRegion(summary->survey));
  out["parity"] = MatrixView(result.parity, owner);
  out["median"] = MatrixView(result.boot_median, owner);
  out["lower"] = MatrixView(result.boot_lower, owner);
  out["upper"] = MatrixView(result.boot_upper, owner);
  out["log_se"] = MatrixView(result.boot_log_se, owner);
  out["replicates"] = py::none();
  const py::ssize_t num_b = result.boot_num_replicates_kept;
  if (num_b > 0 && !result.boot_log_parity.empty()) {
    constexpr py::ssize_t kDouble = sizeof(double);
    const py::ssize_t num_regions = result.parity.cols();
    out["replicates"] =
        ReadOnlyView(result.boot_log_parity.data(), {result.parity.rows(), num_regions, num_b},
                     {kDouble * num_regions * num_b, kDouble * num_b, kDouble}, owner);
  }
  return out;
}

// A load failure: the library's message, and the rows that stopped it.
py::dict LoadFailure(int exit_code, const std::string& message, const LoadSummary& load) {
  py::dict out = Failure(exit_code, message);
  out["rejected_rows"] = RejectedRows(load.rejected_rows);
  out["rejections"] = load.num_rows_rejected > 0 ? DescribeRejectedRows(load) : std::string();
  return out;
}

// Keyword options of check, compute, pair and sensitivity: configuration keys.
std::vector<std::string> OptionNames() {
  return {"output", "reference", "elementary", "aggregation", "invalid_rows", "duplicate_quotes",
          "threads", "matrices", "report", "strict", "report_region", "outlier_threshold",
          "representative_weight", "robust_errors", "outlier_fit"};
}

// Sets one configuration key from a keyword option; false with the message
// the configuration would give for the same value.
bool ApplyOption(const std::string& key, const py::handle& value, RunConfig* config,
                 std::string* error) {
  auto text = [&] { return py::cast<std::string>(value); };
  if (key == "output") {
    config->output = text();
  } else if (key == "reference") {
    return ParseReference("reference", text(), &config->reference, error);
  } else if (key == "elementary" || key == "aggregation") {
    const bool elementary = key == "elementary";
    const std::string name = text();
    std::string found;
    if (elementary && FindElementaryMethod(name) != nullptr) {
      found = std::string(FindElementaryMethod(name)->Name());
    } else if (!elementary && FindAggregationMethod(name) != nullptr) {
      found = std::string(FindAggregationMethod(name)->Name());
    }
    if (found.empty()) {
      *error = NotOneOf(key, name, elementary ? ElementaryMethodNames() : AggregationMethodNames());
      return false;
    }
    (elementary ? config->elementary : config->aggregation) = found;
  } else if (key == "invalid_rows") {
    if (!FromString(text(), &config->invalid_rows)) {
      *error = NotOneOf(key, text(), InvalidRowPolicyNames());
      return false;
    }
  } else if (key == "duplicate_quotes") {
    if (!FromString(text(), &config->duplicate_quotes)) {
      *error = NotOneOf(key, text(), DuplicateQuotePolicyNames());
      return false;
    }
  } else if (key == "threads") {
    config->threads = py::cast<int>(value);
  } else if (key == "matrices") {
    std::vector<std::string> given = py::isinstance<py::str>(value)
                                         ? std::vector<std::string>{text()}
                                         : py::cast<std::vector<std::string>>(value);
    return SplitNameList(given, &config->matrices, error);
  } else if (key == "report") {
    config->report = py::cast<bool>(value);
  } else if (key == "strict") {
    config->strict = py::cast<bool>(value);
  } else if (key == "report_region") {
    config->report_region = text();
  } else if (key == "outlier_threshold") {
    config->outlier_threshold = py::cast<double>(value);
  } else if (key == "representative_weight") {
    config->representative_weight = py::cast<double>(value);
  } else if (key == "robust_errors") {
    config->robust_errors = text();
  } else if (key == "outlier_fit") {
    config->outlier_fit = text();
  } else {
    *error = "unknown option '" + key + "'";
    const std::string nearest = NearestName(key, OptionNames());
    if (!nearest.empty()) *error += "; did you mean '" + nearest + "'?";
    return false;
  }
  return true;
}


// Reads the configuration and applies `options`; on failure fills `failure`.
bool LoadConfig(const std::string& path, const py::dict& options, RunConfig* config,
                py::dict* failure) {
  ConfigError config_error;
  if (!LoadRunConfig(path, config, &config_error)) {
    *failure = ConfigFailure(config_error);
    return false;
  }
  std::string error;
  for (const auto& [key, value] : options) {
    const std::string name = py::cast<std::string>(key);
    try {
      if (!ApplyOption(name, value, config, &error)) {
        *failure = Failure(kExitInvalidInput, error, name, py::str(value));
        return false;
      }
    } catch (const py::cast_error&) {
      *failure = Failure(kExitInvalidInput,
                         "option '" + name + "' has the wrong type: found " +
                             std::string(py::str(value.get_type().attr("__name__"))) + " '" +
                             std::string(py::str(value)) + "'",
                         name, py::str(value));
      return false;
    }
  }
  if (!config->IsValid(&error)) {
    *failure = Failure(kExitInvalidInput, error);
    return false;
  }
  return true;
}

// Runs `job` on a thread of its own with the GIL released. Every 50 ms the
// calling (main) thread takes the GIL to let Python run its signal handlers;
// on Ctrl-C it sets `cancel` (when the job has one), waits for the job to
// stop and raises KeyboardInterrupt.
template <typename Job>
void RunInterruptibly(Job job, std::atomic<bool>* cancel) {
  std::mutex mutex;
  std::condition_variable finished;
  bool done = false;
  std::exception_ptr failure;
  bool interrupted = false;
  {
    py::gil_scoped_release release;
    std::thread worker([&] {
      try {
        job();
      } catch (...) {
        failure = std::current_exception();
      }
      std::lock_guard<std::mutex> lock(mutex);
      done = true;
      finished.notify_all();
    });
    std::unique_lock<std::mutex> lock(mutex);
    while (!finished.wait_for(lock, std::chrono::milliseconds(50), [&] { return done; })) {
      if (interrupted) continue;
      lock.unlock();
      {
        py::gil_scoped_acquire acquire;
        if (PyErr_CheckSignals() != 0) {
          interrupted = true;
          if (cancel != nullptr) cancel->store(true);
        }
      }
      lock.lock();
    }
    lock.unlock();
    worker.join();
  }
  if (interrupted) throw py::error_already_set();
  if (failure) std::rethrow_exception(failure);
}

py::dict Check(const std::string& config_path, const py::dict& options) {
  RunConfig config;
  py::dict failure;
  if (!LoadConfig(config_path, options, &config, &failure)) return failure;
  CheckSummary summary;
  RunInterruptibly([&] { RunCheck(config, &summary); }, nullptr);
  if (summary.load.outcome != LoadOutcome::kOk) {
    return LoadFailure(summary.exit_code, summary.message, summary.load);
  }
  py::dict out;
  out["ok"] = true;
  out["exit_code"] = summary.exit_code;
  out["usable"] = summary.usable;
  out["message"] = summary.message;
  out["report"] = summary.FullReport();
  py::list headings;
  for (const HeadingCheck& h : summary.headings) {
    py::dict d;
    d["heading"] = summary.survey.heading_codes[h.heading];
    d["num_regions_priced"] = h.num_regions_priced;
    d["num_items_priced"] = h.num_items_priced;
    d["num_items_listed"] = h.num_items_listed;
    d["num_cells"] = h.num_cells;
    d["num_quotes"] = h.num_quotes;
    d["fill_share"] = h.fill_share;
    d["num_linked_groups"] = static_cast<int>(h.groups.size());
    d["num_flagged_cells"] = h.num_flagged_cells;
    headings.append(d);
  }
  out["headings"] = headings;
  out["compute_warnings_known"] = summary.compute_warnings_known;
  out["warnings"] = Warnings(summary.compute_warnings);
  out["rejected_rows"] = RejectedRows(summary.load.rejected_rows);
  return out;
}

py::dict Compute(const std::string& config_path, const py::dict& options, bool write_files) {
  RunConfig config;
  py::dict failure;
  if (!LoadConfig(config_path, options, &config, &failure)) return failure;
  ComputeJobSummary summary;
  JobOutputOptions output;
  output.write_files = write_files;
  RunInterruptibly([&] { RunCompute(config, &summary, output); }, nullptr);
  if (summary.exit_code != kExitOk && summary.exit_code != kExitStrictWarnings) {
    return LoadFailure(summary.exit_code, summary.message, summary.load);
  }
  py::dict out;
  out["ok"] = true;
  out["exit_code"] = summary.exit_code;
  out["message"] = summary.message;
  out["report"] = summary.FullReport();
  out["files"] = Files(summary.files);
  out["warnings"] = Warnings(summary.warnings);
  out["rejected_rows"] = RejectedRows(summary.load.rejected_rows);
  out["output"] = config.output;
  out["arrays"] = ComputeArrayViews(summary);
  return out;
}

py::dict Pair(const std::string& config_path, const py::dict& options, const std::string& from,
              const std::string& to, const std::string& node, bool every_method) {
  RunConfig config;
  py::dict failure;
  if (!LoadConfig(config_path, options, &config, &failure)) return failure;
  LoadOptions load_options;
  load_options.invalid_rows = config.invalid_rows;
  load_options.num_threads = config.threads;
  Survey survey;
  LoadSummary load;
  ParityResult result;
  ComputeSummary compute;
  PairComparison comparison;
  std::string error;
  int code = kExitOk;
  RunInterruptibly(
      [&] {
        if (!LoadSurvey(config, load_options, &survey, &load)) {
          code = kExitInvalidInput;
          error = load.message;
          return;
        }
        const ComputeOptions compute_options = ComputeOptions::FromConfig(config);
        if (!ComputeParities(survey, compute_options, &result, &compute)) {
          code = compute.outcome == ComputeOutcome::kComputationFailed ? kExitComputationFailed
                                                                       : kExitInvalidInput;
          error = compute.message;
          return;
        }
        if (!ComparePair(survey, result, from, to, node, &comparison, &error)) {
          code = kExitInvalidInput;
          return;
        }
        if (every_method) TransitiveUnderEveryMethod(survey, compute_options, &comparison);
      },
      nullptr);
  if (code != kExitOk) return LoadFailure(code, error, load);
  py::dict out;
  out["ok"] = true;
  out["exit_code"] = kExitOk;
  out["csv"] = PairCsv(comparison);
  out["table"] = PairTable(comparison);
  out["rejected_rows"] = RejectedRows(load.rejected_rows);
  return out;
}

py::dict DeflateFile(const py::dict& given) {
  DeflateOptions options;
  for (const auto& [key, value] : given) {
    const std::string name = py::cast<std::string>(key);
    if (name == "parities_dir") options.parities_dir = py::cast<std::string>(value);
    else if (name == "input_path") options.input_path = py::cast<std::string>(value);
    else if (name == "output_path") options.output_path = py::cast<std::string>(value);
    else if (name == "rejected_path") options.rejected_path = py::cast<std::string>(value);
    else if (name == "region_column") options.region_column = py::cast<std::string>(value);
    else if (name == "value_columns") options.value_columns = py::cast<std::vector<std::string>>(value);
    else if (name == "node") options.node = py::cast<std::string>(value);
    else if (name == "node_column") options.node_column = py::cast<std::string>(value);
    else if (name == "allow_negative") options.allow_negative = py::cast<bool>(value);
    else if (name == "include_parity") options.include_parity = py::cast<bool>(value);
    else if (name == "include_interval") options.include_interval = py::cast<bool>(value);
    else if (name == "decimals") options.decimals = py::cast<int>(value);
    else if (name == "invalid_rows") {
      const std::string text = py::cast<std::string>(value);
      if (!FromString(text, &options.invalid_rows)) {
        return Failure(kExitInvalidInput, NotOneOf("invalid_rows", text, InvalidRowPolicyNames()),
                       name, text);
      }
    } else {
      pybind11::pybind11_fail("deflate: unknown option " + name);
    }
  }
  DeflateSummary summary;
  bool ok = false;
  RunInterruptibly([&] { ok = Deflate(options, &summary); }, nullptr);
  py::dict out = ok ? py::dict() : Failure(kExitInvalidInput, summary.message);
  out["ok"] = ok;
  out["message"] = summary.message;
  out["brief"] = summary.BriefReport();
  out["rejected_rows"] = RejectedRows(summary.rejected_rows);
  out["num_rows_rejected"] = summary.num_rows_rejected;
  out["columns_added"] = summary.columns_added;
  return out;
}

py::dict Sensitivity(const std::string& config_path, const py::dict& options,
                     const py::dict& sensitivity, bool write_files) {
  RunConfig config;
  py::dict failure;
  if (!LoadConfig(config_path, options, &config, &failure)) return failure;
  SensitivityOptions run;
  run.num_threads = config.threads;
  std::string error;
  for (const auto& [key, value] : sensitivity) {
    const std::string name = py::cast<std::string>(key);
    if (name == "replicates") run.replicates = py::cast<int>(value);
    else if (name == "seed") run.seed = py::cast<uint64_t>(value);
    else if (name == "level") {
      const double level = py::cast<double>(value);
      // 95 and 0.95 both mean a 95 % interval, as on the command line.
      run.level = level > 1.0 ? PercentToShare(level) : level;
    } else if (name == "coverage") {
      run.coverage_levels.clear();
      for (double c : py::cast<std::vector<double>>(value)) run.coverage_levels.push_back(c / 100.0);
    } else if (name == "repetitions") run.coverage_repetitions = py::cast<int>(value);
    else if (name == "node") run.node = py::cast<std::string>(value);
    else if (name == "write_replicates") run.write_replicates = py::cast<bool>(value);
    else if (name == "parts") {
      if (!SetSensitivityParts(py::cast<std::vector<std::string>>(value), &run, &error)) {
        return Failure(kExitInvalidInput, "parts: " + error, name, py::str(value));
      }
    } else if (name == "bootstrap") {
      const std::string text = py::cast<std::string>(value);
      if (!FromString(text, &run.bootstrap)) {
        return Failure(kExitInvalidInput,
                       "bootstrap must be one of: rescaled, plain; found '" + text + "'", name, text);
      }
    } else if (name == "interval") {
      const std::string text = py::cast<std::string>(value);
      if (!FromString(text, &run.interval)) {
        return Failure(kExitInvalidInput,
                       "interval must be one of: expanded, percentile; found '" + text + "'", name,
                       text);
      }
    } else {
      pybind11::pybind11_fail("sensitivity: unknown option " + name);
    }
  }
  if (!run.IsValid(&error)) return Failure(kExitInvalidInput, error);
  std::atomic<bool> cancel{false};
  run.cancel = &cancel;
  SensitivityJobSummary summary;
  JobOutputOptions output;
  output.write_files = write_files;
  RunInterruptibly([&] { RunSensitivityJob(config, run, &summary, output); }, &cancel);
  if (summary.exit_code != kExitOk && summary.exit_code != kExitStrictWarnings) {
    return LoadFailure(summary.exit_code, summary.message, summary.load);
  }
  py::dict out;
  out["ok"] = true;
  out["exit_code"] = summary.exit_code;
  out["message"] = summary.message;
  out["report"] = summary.FullReport(run);
  out["files"] = Files(summary.files);
  out["warnings"] = Warnings(summary.warnings);
  out["arrays"] = SensitivityArrayViews(&summary);  // last: moves the result
  return out;
}

py::dict Compare(const std::string& old_dir, const std::string& new_dir, const std::string& node,
                 int top, double z) {
  CompareOptions options;
  options.old_dir = old_dir;
  options.new_dir = new_dir;
  options.node = node;
  options.num_movers = top;
  options.z = z;
  RunComparison comparison;
  CompareSummary summary;
  std::string text;
  int code = kExitInvalidInput;
  RunInterruptibly([&] { code = RunCompare(options, &comparison, &summary, &text); }, nullptr);
  if (code != kExitOk) return Failure(code, summary.message);
  py::dict out;
  out["ok"] = true;
  out["exit_code"] = code;
  out["table"] = text;
  out["changes"] = ChangesCsv(comparison);
  out["drivers"] = DriversCsv(comparison);
  return out;
}

}  // namespace
}  // namespace paritas::python

PYBIND11_MODULE(_paritas, m) {
  using namespace paritas::python;
  m.doc() = "paritas' library jobs; use the package paritas, which wraps them.";
  m.attr("__version__") = PARITAS_VERSION;
  m.def("check", &Check, py::arg("config_path"), py::arg("options"));
  m.def("compute", &Compute, py::arg("config_path"), py::arg("options"), py::arg("write_files"));
  m.def("pair", &Pair, py::arg("config_path"), py::arg("options"), py::arg("from_region"),
        py::arg("to_region"), py::arg("node"), py::arg("every_method"));
  m.def("deflate", &DeflateFile, py::arg("options"));
  m.def("sensitivity", &Sensitivity, py::arg("config_path"), py::arg("options"),
        py::arg("sensitivity"), py::arg("write_files"));
  m.def("compare", &Compare, py::arg("old_dir"), py::arg("new_dir"), py::arg("node"),
        py::arg("top"), py::arg("z"));
  m.def("option_names", &OptionNames);
}
