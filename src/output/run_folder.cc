// The staging folder sits beside the target, in the same parent, so that the
// final step is a rename within one filesystem; its name carries the process
// id, so a later run can tell a killed run's leftovers from a live one's.
#include "paritas/output/run_folder.h"

#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <unistd.h>

#include <cerrno>
#include <chrono>
#include <cstring>
#include <filesystem>
#include <random>
#include <set>

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

bool WriteOneFile(const fs::path& path, const std::string& contents, std::string* error) {
  std::error_code ec;
  fs::create_directories(path.parent_path(), ec);
  const int fd = ec ? -1 : ::open(path.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
  if (fd < 0) {
    *error = ec ? ec.message() : ErrnoText(errno);
    return false;
  }
  size_t done = 0;
  while (done < contents.size()) {
    const ssize_t n = ::write(fd, contents.data() + done, contents.size() - done);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      *error = ErrnoText(errno);
      ::close(fd);
      return false;
    }
    done += static_cast<size_t>(n);
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
  const fs::path target = fs::absolute(fs::path(folder)).lexically_normal();
  if (!CheckReplaceable(target, error)) return false;
  std::error_code ec;
  fs::create_directories(target.parent_path(), ec);
  if (ec) {
    *error = target.parent_path().string() + ": cannot create folder: " + ec.message();
    return false;
  }
  summary->num_leftovers_removed = RemoveRunLeftovers(target.string());
  const fs::path staging = target.parent_path() / (StagingPrefix(target) + std::to_string(::getpid()) + "-" +
                                                   NewRunId().substr(0, 8));
  if (!fs::create_directory(staging, ec) || ec) {
    *error = staging.string() + ": cannot create staging folder: " + (ec ? ec.message() : "exists");
    return false;
  }
  auto fail = [&](const std::string& message) {
    *error = message;
    std::error_code ignored;
    fs::remove_all(staging, ignored);
    return false;
  };
  auto write = [&](const OutputFile& file, std::string* why) {
    if (!WriteOneFile(staging / file.relative_path, file.contents, why)) {
      *why = (target / file.relative_path).string() + ": cannot write file: " + *why;
      return false;
    }
    ++summary->num_files;
    summary->num_bytes += static_cast<int64_t>(file.contents.size());
    return true;
  };
  std::string why;
  for (const OutputFile& file : files) {
    if (!write(file, &why)) return fail(why);
  }
  if (make_last) {
    const OutputFile last = make_last();
    if (!CheckFiles({OutputFile{last.relative_path, ""}}, &why)) return fail(why);
    for (const OutputFile& file : files) {
      if (file.relative_path == last.relative_path) {
        return fail("two outputs of this run would share the file '" + last.relative_path + "'");
      }
    }
    if (!write(last, &why)) return fail(why);
  }
  if (!SwapIntoPlace(staging, target, summary, &why)) return fail(why);
  fs::remove_all(staging, ec);  // the old run, if there was one
  return true;
}

}  // namespace paritas
