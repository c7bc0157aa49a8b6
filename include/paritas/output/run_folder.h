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
#include <memory>
#include <string>
#include <string_view>
#include <vector>

namespace paritas {

// A file of a run, relative to the run folder ("parities.csv",
// "matrix/food.csv").
struct OutputFile {
  std::string relative_path;
  std::string contents;
};

// Takes a file's text block by block, in order (the blocks joined are the
// file), e.g. into RunFolderWriter::Append.
using TextBlocks = std::function<void(std::string block)>;

// A file of a run with its size and SHA-256, for the run record.
struct OutputDigest {
  std::string path;  // relative to the output folder
  int64_t bytes = 0;
  std::string sha256;  // 64 lowercase hex digits
};

// How a job hands over its output files.
struct JobOutputOptions {
  // Writes the run folder (default true, as the command line does). False
  // writes nothing and leaves the output folder unchecked: the files are
  // handed back in the job's summary only (`files`), as the Python module
  // takes them.
  bool write_files = true;
  // Keeps every file's text in the job's summary (`files`) besides writing
  // it (default true, as the Python module takes them). False (the command
  // line) streams the large tables into the run folder block by block and
  // keeps only the paths: no file is ever held whole, which lowers the peak.
  // Without write_files the texts are always kept.
  bool keep_texts = true;
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

// Writes a run folder as its files are made, with the same checks and the
// same whole-or-nothing swap as WriteRunFolder: Open makes the staging
// folder; each file's text is handed over in blocks, in order, and written
// on a thread of its own (and digested on another) while the caller makes
// the next blocks, so the kernel's copy into the page cache overlaps the formatting;
// Finish waits for them; Commit writes the last file (run.json) and swaps
// the folder into place. A writer destroyed without a successful Commit
// removes its staging folder, and a killed process leaves only a staging
// folder that the next run removes: the previous run stays as it was.
class RunFolderWriter {
 public:
  RunFolderWriter();
  ~RunFolderWriter();
  RunFolderWriter(const RunFolderWriter&) = delete;
  RunFolderWriter& operator=(const RunFolderWriter&) = delete;

  // Checks `folder` as WriteRunFolder does, removes staging folders of
  // killed runs and makes this run's. `digest` asks for each file's SHA-256
  // (Finish). False with a message when the folder may not be written.
  bool Open(const std::string& folder, bool digest, std::string* error);
  // Starts the file `relative_path` (the one before it ends). False with a
  // message, and nothing more accepted, for an unsafe path or a repeat.
  bool BeginFile(const std::string& relative_path, std::string* error);
  // Appends a block to the file begun last. Waits while more than
  // kMaxQueuedBytes of blocks are waiting to be written.
  void Append(std::string block);
  // As Append, for text the caller keeps unchanged until Finish returns.
  void AppendUnowned(std::string_view text);
  // Waits until every file begun is written. Returns false with the first
  // failure ("<path>: cannot write file: <reason>"); else the digests (when
  // asked for in Open) in the order the files were begun.
  bool Finish(std::vector<OutputDigest>* digests, std::string* error);
  // After a successful Finish: writes `last` when given (its path must be
  // new) and swaps the staging folder into place.
  bool Commit(const OutputFile* last, RunFolderSummary* summary, std::string* error);

  // The most memory the blocks waiting to be written held at once (the
  // capacity of each owned block, not only its text): at most
  // kMaxQueuedBytes plus the block that went over it. A diagnostic.
  size_t PeakQueuedBytes() const;

  // Blocks waiting to be written hold at most this many bytes (owned ones,
  // counted by the memory they reserved), plus the one that goes over.
  static constexpr size_t kMaxQueuedBytes = size_t{64} << 20;

 private:
  // The staging folder, the queue and the writing thread (run_folder.cc).
  struct State;
  std::unique_ptr<State> state_;
};

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
