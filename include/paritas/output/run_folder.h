// A run's outputs as one unit. A command writes its whole output tree into a
// fresh staging folder beside the target, then swaps it with the target in
// one atomic step (Linux renameat2 with RENAME_EXCHANGE; a plain rename when
// the target does not exist yet). A reader therefore sees the old run or the
// new one, never a mix, even after kill -9 at any instant; nothing of the old
// run survives that the new run did not write; staging folders of killed
// runs are removed by the next run. Paths a command reads and writes are
// checked against each other before anything is written.
#ifndef PARITAS_OUTPUT_RUN_FOLDER_H_
#define PARITAS_OUTPUT_RUN_FOLDER_H_

#include <cstdint>
#include <functional>
#include <string>
#include <vector>

namespace paritas {

// A file of a run, relative to the run folder ("parities.csv",
// "matrix/food.csv").
struct OutputFile {
  std::string relative_path;
  std::string contents;
};

// How a job hands over its output files.
struct JobOutputOptions {
  // Writes the run folder (default true, as the command line does). False
  // writes nothing and leaves the output folder unchecked: the files are
  // handed back in the job's summary only (`files`), as the Python module
  // takes them.
  bool write_files = true;
};

// What a swap did, for the run record and the terminal.
struct RunFolderSummary {
  int num_files = 0;
  int64_t num_bytes = 0;
  // Staging folders of killed runs removed before this one was written.
  int num_leftovers_removed = 0;
  // True when the target existed and was replaced.
  bool replaced = false;
  // True when the filesystem could not exchange atomically and the old run
  // was moved aside first (a moment without any run in place).
  bool fallback_not_atomic = false;
};

// Writes `files` as the complete content of `folder` (created with its
// parents if needed). An existing `folder` must be empty or a run folder of
// paritas (holding run.json): any other folder is refused, so that pointing
// the output at a folder of other files never deletes them. Duplicate or
// unsafe relative paths (absolute, "..", empty) are refused before anything
// is written. Returns false with a message naming the path on any failure; the
// previous run, if any, is then untouched.
bool WriteRunFolder(const std::string& folder, const std::vector<OutputFile>& files,
                    RunFolderSummary* summary, std::string* error);

// As above, with one more file made by `make_last` once every file of
// `files` is in the staging folder, so that it can record how long writing
// them took (run.json). Its path must not be among `files`' paths.
bool WriteRunFolder(const std::string& folder, const std::vector<OutputFile>& files,
                    const std::function<OutputFile()>& make_last, RunFolderSummary* summary,
                    std::string* error);

// Removes staging folders of runs of `folder` whose process no longer runs.
// Returns how many were removed.
int RemoveRunLeftovers(const std::string& folder);

// A new run id: 32 lowercase hex digits from the clock, the process and the
// system's random source.
std::string NewRunId();

// The paths one command reads and writes. Check() compares them as files on
// the filesystem (the same inode through any spelling, link or "./"), not as
// strings, before anything is written.
class PathGuard {
 public:
  // `role` names the path in messages, e.g. "input prices" or "--output".
  void AddInput(const std::string& path, const std::string& role);
  void AddOutputFile(const std::string& path, const std::string& role);
  // A folder replaced whole: no input may lie inside it.
  void AddOutputFolder(const std::string& path, const std::string& role);
  // False with a message when an output is an input, two outputs are the
  // same file, or an input lies inside an output folder.
  bool Check(std::string* error) const;

 private:
  struct Entry {
    std::string path;
    std::string role;
  };
  std::vector<Entry> inputs_;
  std::vector<Entry> output_files_;
  std::vector<Entry> output_folders_;
};

}  // namespace paritas

#endif  // PARITAS_OUTPUT_RUN_FOLDER_H_
