// The staging folder sits beside the target, in the same parent, so that the
// final step is a rename within one filesystem; its name carries the process
// id, so a later run can tell a killed run's leftovers from a live one's.
#include "paritas/output/run_folder.h"

#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <condition_variable>
#include <cstring>
#include <deque>
#include <filesystem>
#include <mutex>
#include <random>
#include <set>
#include <thread>

#include "base/sha256.h"

namespace paritas {
namespace {

namespace fs = std::filesystem;

constexpr const char* kStagingTag = ".paritas-staging-";

std::string ErrnoText(int code) { return std::strerror(code); }

// ".<name>.paritas-staging-" for target <parent>/<name>.
std::string StagingPrefix(const fs::path& target) {
  return "." + target.filename().string() + kStagingTag;
}

bool ProcessRuns(long pid) {
  if (pid <= 0) return false;
  return ::kill(static_cast<pid_t>(pid), 0) == 0 || errno == EPERM;
}

bool SafeRelativePath(const std::string& relative) {
  if (relative.empty() || relative.front() == '/') return false;
  for (const fs::path& part : fs::path(relative)) {
    if (part == ".." || part == "." || part.empty()) return false;
  }
  return true;
}

bool CheckFiles(const std::vector<OutputFile>& files, std::string* error) {
  std::set<std::string> seen;
  for (const OutputFile& file : files) {
    if (!SafeRelativePath(file.relative_path)) {
      *error = "output file name '" + file.relative_path + "' is not a plain path inside the output folder";
      return false;
    }
    if (!seen.insert(file.relative_path).second) {
      *error = "two outputs of this run would share the file '" + file.relative_path + "'";
      return false;
    }
  }
  return true;
}

// An existing target may be replaced only when it is a run folder of ours
// (run.json) or empty.
bool CheckReplaceable(const fs::path& target, std::string* error) {
  std::error_code ec;
  if (!fs::exists(fs::symlink_status(target, ec))) return true;
  if (!fs::is_directory(target, ec)) {
    *error = target.string() + ": output folder exists and is not a folder";
    return false;
  }
  if (fs::exists(target / "run.json", ec) || fs::is_empty(target, ec)) return true;
  *error = target.string() +
           ": output folder exists and holds files of something else than a paritas run (no run.json); "
           "choose a new or empty folder";
  return false;
}

// Creates the file at `path` (and its folders); -1 with a reason if not.
int CreateFile(const fs::path& path, std::string* error) {
  std::error_code ec;
  fs::create_directories(path.parent_path(), ec);
  const int fd = ec ? -1 : ::open(path.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
  if (fd < 0) *error = ec ? ec.message() : ErrnoText(errno);
  return fd;
}

bool WriteAll(int fd, std::string_view text, std::string* error) {
  size_t done = 0;
  while (done < text.size()) {
    const ssize_t n = ::write(fd, text.data() + done, text.size() - done);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      *error = ErrnoText(errno);
      return false;
    }
    done += static_cast<size_t>(n);
  }
  return true;
}

bool WriteOneFile(const fs::path& path, const std::string& contents, std::string* error) {
  const int fd = CreateFile(path, error);
  if (fd < 0) return false;
  if (!WriteAll(fd, contents, error)) {
    ::close(fd);
    return false;
  }
  if (::close(fd) != 0) {
    *error = ErrnoText(errno);
    return false;
  }
  return true;
}

// Puts `staging` in place of `target`; afterwards `staging` holds the old
// run (if there was one) for removal.
bool SwapIntoPlace(const fs::path& staging, const fs::path& target, RunFolderSummary* summary,
                   std::string* error) {
  if (::rename(staging.c_str(), target.c_str()) == 0) return true;
  if (errno != EEXIST && errno != ENOTEMPTY && errno != EISDIR) {
    *error = target.string() + ": cannot move the run into place: " + ErrnoText(errno);
    return false;
  }
  summary->replaced = true;
  if (::renameat2(AT_FDCWD, staging.c_str(), AT_FDCWD, target.c_str(), RENAME_EXCHANGE) == 0) return true;
  if (errno != EINVAL && errno != ENOSYS && errno != ENOTSUP) {
    *error = target.string() + ": cannot exchange the old run for the new one: " + ErrnoText(errno);
    return false;
  }
  // No atomic exchange on this filesystem: old run aside, new run in place.
  const fs::path aside = staging.string() + "-old";
  if (::rename(target.c_str(), aside.c_str()) != 0 || ::rename(staging.c_str(), target.c_str()) != 0) {
    *error = target.string() + ": cannot move the run into place: " + ErrnoText(errno);
    return false;
  }
  summary->fallback_not_atomic = true;
  std::error_code ec;
  fs::rename(aside, staging, ec);
  return true;
}

// The path as the filesystem resolves it: symbolic links and "." / ".."
// of the part that exists resolved, the rest appended.
fs::path Resolved(const std::string& path) {
  std::error_code ec;
  fs::path resolved = fs::weakly_canonical(fs::absolute(fs::path(path)), ec);
  return ec ? fs::absolute(fs::path(path)).lexically_normal() : resolved;
}

bool SameFile(const std::string& a, const std::string& b) {
  std::error_code ec;
  if (fs::exists(a, ec) && fs::exists(b, ec)) return fs::equivalent(a, b, ec) && !ec;
  return Resolved(a) == Resolved(b);
}

bool Inside(const fs::path& path, const fs::path& folder) {
  auto p = path.begin();
  for (auto f = folder.begin(); f != folder.end(); ++f, ++p) {
    if (f->empty()) continue;  // a trailing separator
    if (p == path.end() || *p != *f) return false;
  }
  return true;
}

}  // namespace

void PathGuard::AddInput(const std::string& path, const std::string& role) {
  if (!path.empty()) inputs_.push_back({path, role});
}
void PathGuard::AddOutputFile(const std::string& path, const std::string& role) {
  if (!path.empty()) output_files_.push_back({path, role});
}
void PathGuard::AddOutputFolder(const std::string& path, const std::string& role) {
  if (!path.empty()) output_folders_.push_back({path, role});
}

bool PathGuard::Check(std::string* error) const {
  for (size_t k = 0; k < output_files_.size(); ++k) {
    const Entry& out = output_files_[k];
    for (const Entry& in : inputs_) {
      if (SameFile(out.path, in.path)) {
        *error = out.role + " '" + out.path + "' is the " + in.role + " '" + in.path +
                 "': an input is never overwritten; choose another file";
        return false;
      }
    }
    for (size_t j = 0; j < k; ++j) {
      if (SameFile(out.path, output_files_[j].path)) {
        *error = out.role + " '" + out.path + "' and " + output_files_[j].role + " '" + output_files_[j].path +
                 "' are the same file; give them different names";
        return false;
      }
    }
  }
  for (const Entry& folder : output_folders_) {
    const fs::path resolved = Resolved(folder.path);
    for (const Entry& in : inputs_) {
      if (Inside(Resolved(in.path), resolved)) {
        *error = folder.role + " '" + folder.path + "' holds the " + in.role + " '" + in.path +
                 "'; the output folder is replaced whole, so it must not hold inputs: choose another folder";
        return false;
      }
    }
  }
  return true;
}

int RemoveRunLeftovers(const std::string& folder) {
  const fs::path target = fs::absolute(fs::path(folder)).lexically_normal();
  const fs::path parent = target.parent_path();
  const std::string prefix = StagingPrefix(target);
  std::error_code ec;
  int removed = 0;
  for (fs::directory_iterator it(parent, ec), end; !ec && it != end; it.increment(ec)) {
    const std::string name = it->path().filename().string();
    if (name.rfind(prefix, 0) != 0) continue;
    const long pid = std::strtol(name.c_str() + prefix.size(), nullptr, 10);
    if (ProcessRuns(pid) && pid != static_cast<long>(::getpid())) continue;
    std::error_code ignored;
    if (fs::remove_all(it->path(), ignored) != static_cast<std::uintmax_t>(-1)) ++removed;
  }
  // Staging folders of earlier versions lived inside the target.
  for (fs::directory_iterator it(target, ec), end; !ec && it != end; it.increment(ec)) {
    if (it->path().filename().string().rfind(".paritas-staging-", 0) == 0) {
      std::error_code ignored;
      fs::remove_all(it->path(), ignored);
      ++removed;
    }
  }
  return removed;
}

std::string NewRunId() {
  std::random_device device;
  const uint64_t a = (static_cast<uint64_t>(device()) << 32) ^ device() ^
                     static_cast<uint64_t>(std::chrono::system_clock::now().time_since_epoch().count());
  const uint64_t b = (static_cast<uint64_t>(device()) << 32) ^ device() ^ static_cast<uint64_t>(::getpid());
  char text[33];
  std::snprintf(text, sizeof(text), "%016llx%016llx", static_cast<unsigned long long>(a),
                static_cast<unsigned long long>(b));
  return text;
}

bool WriteRunFolder(const std::string& folder, const std::vector<OutputFile>& files,
                    RunFolderSummary* summary, std::string* error) {
  return WriteRunFolder(folder, files, nullptr, summary, error);
}

bool WriteRunFolder(const std::string& folder, const std::vector<OutputFile>& files,
                    const std::function<OutputFile()>& make_last, RunFolderSummary* summary,
                    std::string* error) {
  *summary = RunFolderSummary();
  if (!CheckFiles(files, error)) return false;
  RunFolderWriter writer;
  if (!writer.Open(folder, /*digest=*/false, error)) return false;
  for (const OutputFile& file : files) {
    if (!writer.BeginFile(file.relative_path, error)) return false;
    writer.AppendUnowned(file.contents);
  }
  if (!writer.Finish(nullptr, error)) return false;
  if (!make_last) return writer.Commit(nullptr, summary, error);
  const OutputFile last = make_last();
  return writer.Commit(&last, summary, error);
}

// ---------------------------------------------------------------------------
// RunFolderWriter

struct RunFolderWriter::State {
  // One piece of work, taken in order by the writing thread and, when
  // digests are asked for, by the hashing thread.
  enum class Kind { kBegin, kBlock, kEnd };
  struct Piece {
    Kind kind = Kind::kBlock;
    std::string owned;          // the bytes (or the path) when the writer owns them
    std::string_view unowned;   // the caller's bytes otherwise
    // The memory `owned` holds while queued: its capacity, which can be
    // well above its size (a block reserved for more rows than it got).
    size_t held = 0;
    std::string_view Text() const { return owned.empty() ? unowned : std::string_view(owned); }
  };

  fs::path target, staging;
  bool digest = false;
  bool refused = false;    // a BeginFile failed: nothing more is accepted
  bool finished = false;   // Finish returned true
  bool committed = false;  // the staging folder is in place
  int num_leftovers_removed = 0;
  std::set<std::string> paths_begun;
  bool file_open = false;  // a file was begun and not yet ended (caller's view)

  std::mutex mutex;
  std::condition_variable changed;
  // Guarded by `mutex`. Pieces are numbered from 0 in order; `queue` holds
  // those from `first` on, until both threads are past them (a deque keeps
  // its elements in place as it grows, so a thread reads its piece unlocked).
  std::deque<Piece> queue;
  int64_t first = 0;
  int64_t next_written = 0;  // the writing thread's next piece
  int64_t next_hashed = 0;   // the hashing thread's (unused without digests)
  size_t queued_bytes = 0;   // the queued pieces' `held`
  size_t peak_queued_bytes = 0;  // the most queued_bytes reached
  bool stopping = false;
  std::string failure;

  // The writing thread's own (read by others once it has stopped).
  std::vector<OutputDigest> digests;  // path and bytes
  int fd = -1;
  int num_files = 0;
  int64_t num_bytes = 0;
  // The hashing thread's own.
  std::vector<std::string> hashes;
  std::unique_ptr<internal::Sha256> hasher;
  std::thread writing, hashing;

  int64_t End() const { return first + static_cast<int64_t>(queue.size()); }
  void Push(Piece piece);
  // Takes pieces in order for one thread (`next` its cursor) until stopped.
  void Loop(int64_t State::*next, bool (State::*handle)(const Piece&, std::string*));
  bool Write(const Piece& piece, std::string* why);
  bool Hash(const Piece& piece, std::string* why);
  // Waits until both threads are past every piece queued.
  void WaitUntilDone();
  // Stops the threads (after the pieces queued) and closes a file left open.
  void Stop();
};

void RunFolderWriter::State::Push(Piece piece) {
  std::unique_lock<std::mutex> lock(mutex);
  changed.wait(lock, [&] { return queued_bytes <= kMaxQueuedBytes || !failure.empty(); });
  if (!failure.empty()) return;  // nothing more is written
  piece.held = piece.owned.empty() ? 0 : piece.owned.capacity();
  queued_bytes += piece.held;
  peak_queued_bytes = std::max(peak_queued_bytes, queued_bytes);
  queue.push_back(std::move(piece));
  changed.notify_all();
}

void RunFolderWriter::State::Loop(int64_t State::*next,
                                  bool (State::*handle)(const Piece&, std::string*)) {
  for (;;) {
    const Piece* piece = nullptr;
    {
      std::unique_lock<std::mutex> lock(mutex);
      changed.wait(lock, [&] { return this->*next < End() || stopping; });
      if (this->*next >= End()) return;
      piece = &queue[static_cast<size_t>(this->*next - first)];
      if (!failure.empty()) piece = nullptr;  // the first failure is the one told
    }
    std::string why;
    const bool ok = piece == nullptr || (this->*handle)(*piece, &why);
    std::lock_guard<std::mutex> lock(mutex);
    if (!ok && failure.empty()) {
      failure = (target / digests.back().path).string() + ": cannot write file: " + why;
    }
    ++(this->*next);
    const int64_t done = digest ? std::min(next_written, next_hashed) : next_written;
    while (first < done) {
      queued_bytes -= queue.front().held;
      queue.pop_front();
      ++first;
    }
    changed.notify_all();
  }
}

bool RunFolderWriter::State::Write(const Piece& piece, std::string* why) {
  const std::string_view text = piece.Text();
  switch (piece.kind) {
    case Kind::kBegin:
      digests.push_back({std::string(text), 0, ""});
      fd = CreateFile(staging / digests.back().path, why);
      return fd >= 0;
    case Kind::kBlock:
      if (!WriteAll(fd, text, why)) return false;
      digests.back().bytes += static_cast<int64_t>(text.size());
      num_bytes += static_cast<int64_t>(text.size());
      return true;
    case Kind::kEnd: {
      const int closing = fd;
      fd = -1;
      ++num_files;
      if (::close(closing) == 0) return true;
      *why = ErrnoText(errno);
      return false;
    }
  }
  return true;
}

bool RunFolderWriter::State::Hash(const Piece& piece, std::string* /*why*/) {
  const std::string_view text = piece.Text();
  switch (piece.kind) {
    case Kind::kBegin:
      hasher = std::make_unique<internal::Sha256>();
      break;
    case Kind::kBlock:
      hasher->Update(text.data(), text.size());
      break;
    case Kind::kEnd:
      hashes.push_back(hasher->HexDigest());
      hasher.reset();
      break;
  }
  return true;
}

void RunFolderWriter::State::WaitUntilDone() {
  std::unique_lock<std::mutex> lock(mutex);
  changed.wait(lock, [&] {
    return !failure.empty() || (next_written == End() && (!digest || next_hashed == End()));
  });
}

void RunFolderWriter::State::Stop() {
  {
    std::lock_guard<std::mutex> lock(mutex);
    stopping = true;
    changed.notify_all();
  }
  if (writing.joinable()) writing.join();
  if (hashing.joinable()) hashing.join();
  if (fd >= 0) ::close(fd);
  fd = -1;
}

RunFolderWriter::RunFolderWriter() : state_(std::make_unique<State>()) {}

RunFolderWriter::~RunFolderWriter() {
  {
    // Abandoned before Finish: the blocks still queued may point into text
    // that is gone, so they are dropped unwritten.
    std::lock_guard<std::mutex> lock(state_->mutex);
    if (state_->failure.empty()) state_->failure = "abandoned";
  }
  state_->Stop();
  if (!state_->committed && !state_->staging.empty()) {
    std::error_code ignored;
    fs::remove_all(state_->staging, ignored);
  }
}

bool RunFolderWriter::Open(const std::string& folder, bool digest, std::string* error) {
  State& s = *state_;
  const fs::path target = fs::absolute(fs::path(folder)).lexically_normal();
  if (!CheckReplaceable(target, error)) return false;
  std::error_code ec;
  fs::create_directories(target.parent_path(), ec);
  if (ec) {
    *error = target.parent_path().string() + ": cannot create folder: " + ec.message();
    return false;
  }
  s.num_leftovers_removed = RemoveRunLeftovers(target.string());
  const fs::path staging = target.parent_path() / (StagingPrefix(target) + std::to_string(::getpid()) + "-" +
                                                   NewRunId().substr(0, 8));
  if (!fs::create_directory(staging, ec) || ec) {
    *error = staging.string() + ": cannot create staging folder: " + (ec ? ec.message() : "exists");
    return false;
  }
  s.target = target;
  s.staging = staging;
  s.digest = digest;
  s.writing = std::thread([&s] { s.Loop(&State::next_written, &State::Write); });
  if (digest) s.hashing = std::thread([&s] { s.Loop(&State::next_hashed, &State::Hash); });
  return true;
}

bool RunFolderWriter::BeginFile(const std::string& relative_path, std::string* error) {
  State& s = *state_;
  if (!CheckFiles({OutputFile{relative_path, ""}}, error)) {
    s.refused = true;
    return false;
  }
  if (!s.paths_begun.insert(relative_path).second) {
    *error = "two outputs of this run would share the file '" + relative_path + "'";
    s.refused = true;
    return false;
  }
  if (s.file_open) s.Push({State::Kind::kEnd, "", ""});
  s.Push({State::Kind::kBegin, relative_path, ""});
  s.file_open = true;
  return true;
}

void RunFolderWriter::Append(std::string block) {
  if (block.empty() || !state_->file_open) return;
  state_->Push({State::Kind::kBlock, std::move(block), ""});
}

void RunFolderWriter::AppendUnowned(std::string_view text) {
  if (text.empty() || !state_->file_open) return;
  state_->Push({State::Kind::kBlock, "", text});
}

bool RunFolderWriter::Finish(std::vector<OutputDigest>* digests, std::string* error) {
  State& s = *state_;
  if (s.file_open) s.Push({State::Kind::kEnd, "", ""});
  s.file_open = false;
  s.WaitUntilDone();
  s.Stop();
  if (!s.failure.empty()) {
    *error = s.failure;
    return false;
  }
  if (s.refused || s.staging.empty()) {
    *error = "the run folder was not opened or a file was refused";
    return false;
  }
  if (digests != nullptr) {
    *digests = s.digests;
    for (size_t k = 0; k < digests->size() && k < s.hashes.size(); ++k) (*digests)[k].sha256 = s.hashes[k];
  }
  s.finished = true;
  return true;
}

size_t RunFolderWriter::PeakQueuedBytes() const {
  std::lock_guard<std::mutex> lock(state_->mutex);
  return state_->peak_queued_bytes;
}

bool RunFolderWriter::Commit(const OutputFile* last, RunFolderSummary* summary, std::string* error) {
  State& s = *state_;
  *summary = RunFolderSummary();
  summary->num_leftovers_removed = s.num_leftovers_removed;
  if (!s.finished) {
    *error = "the run folder's files were not all written";
    return false;
  }
  summary->num_files = s.num_files;
  summary->num_bytes = s.num_bytes;
  if (last != nullptr) {
    if (!CheckFiles({OutputFile{last->relative_path, ""}}, error)) return false;
    if (s.paths_begun.count(last->relative_path) > 0) {
      *error = "two outputs of this run would share the file '" + last->relative_path + "'";
      return false;
    }
    std::string why;
    if (!WriteOneFile(s.staging / last->relative_path, last->contents, &why)) {
      *error = (s.target / last->relative_path).string() + ": cannot write file: " + why;
      return false;
    }
    ++summary->num_files;
    summary->num_bytes += static_cast<int64_t>(last->contents.size());
  }
  std::string why;
  if (!SwapIntoPlace(s.staging, s.target, summary, &why)) {
    *error = why;
    return false;
  }
  s.committed = true;
  std::error_code ignored;
  fs::remove_all(s.staging, ignored);  // the old run, if there was one
  return true;
}

}  // namespace paritas
