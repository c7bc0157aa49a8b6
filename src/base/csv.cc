// CSV reading and writing (RFC 4180).
//
// The reader finds the end of an unquoted field by comparing 16 bytes at a
// time against the four special bytes (SSE2; a table lookup elsewhere) and the
// end of a quoted field with memchr, so an ordinary field costs a few
// instructions and no allocation. Fields are first stored as views into the
// buffer; only when a record holds doubled quotes are those fields rewritten
// into the record's scratch, after the whole record is known, so the scratch
// is reserved once and no view into it is invalidated by a later growth.
#include "paritas/base/csv.h"

#include <fcntl.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <array>
#include <cerrno>
#include <cstring>
#include <system_error>
#include <unordered_set>

#if defined(__SSE2__)
#include <emmintrin.h>
#endif

namespace paritas {
namespace {

constexpr std::string_view kUtf8Bom = "\xEF\xBB\xBF";

constexpr std::array<bool, 256> MakeSpecialTable() {
  std::array<bool, 256> table{};
  table[static_cast<unsigned char>(',')] = true;
  table[static_cast<unsigned char>('"')] = true;
  table[static_cast<unsigned char>('\n')] = true;
  table[static_cast<unsigned char>('\r')] = true;
  return table;
}
constexpr std::array<bool, 256> kIsSpecial = MakeSpecialTable();

// Returns the first byte in [p, end) that is ',', '"', LF or CR, or `end`.
// Loads only whole 16-byte blocks inside the range, so it never reads past it.
inline const char* FindSpecial(const char* p, const char* end) {
#if defined(__SSE2__)
  const __m128i comma = _mm_set1_epi8(',');
  const __m128i quote = _mm_set1_epi8('"');
  const __m128i lf = _mm_set1_epi8('\n');
  const __m128i cr = _mm_set1_epi8('\r');
  while (end - p >= 16) {
    const __m128i block = _mm_loadu_si128(reinterpret_cast<const __m128i*>(p));
    const __m128i hits =
        _mm_or_si128(_mm_or_si128(_mm_cmpeq_epi8(block, comma), _mm_cmpeq_epi8(block, quote)),
                     _mm_or_si128(_mm_cmpeq_epi8(block, lf), _mm_cmpeq_epi8(block, cr)));
    const int mask = _mm_movemask_epi8(hits);
    if (mask != 0) return p + __builtin_ctz(static_cast<unsigned>(mask));
    p += 16;
  }
#endif
  while (p < end && !kIsSpecial[static_cast<unsigned char>(*p)]) ++p;
  return p;
}

// Returns the first byte in [p, end) that is not part of a blank line (an
// LF, or a CR that ends a line: before LF or at the end), counting the LFs
// passed in *line.
inline const char* SkipBlankLines(const char* p, const char* end, int64_t* line) {
  while (p < end) {
    if (*p == '\n') {
      ++*line;
    } else if (*p != '\r' || (p + 1 < end && p[1] != '\n')) {
      break;
    }
    ++p;
  }
  return p;
}

// Returns the closing quote of the quoted field whose text starts at
// `content` (doubled quotes are text), or nullptr when the data end first.
// Counts the LFs passed in *line and notes doubled quotes.
inline const char* FindClosingQuote(const char* content, const char* end, int64_t* line,
                                    bool* has_doubled_quotes) {
  const char* from = content;
  for (;;) {
    const void* found = from < end ? std::memchr(from, '"', end - from) : nullptr;
    if (found == nullptr) return nullptr;
    const char* const quote = static_cast<const char*>(found);
    *line += std::count(from, quote, '\n');
    if (quote + 1 < end && quote[1] == '"') {
      *has_doubled_quotes = true;
      from = quote + 2;
      continue;
    }
    return quote;
  }
}

// Rewrites the fields that hold doubled quotes (only quoted fields can) into
// record->scratch with each "" collapsed to ".
void CollapseDoubledQuotes(CsvRecord* record) {
  size_t num_bytes = 0;
  for (std::string_view field : record->fields) {
    if (field.find('"') != std::string_view::npos) num_bytes += field.size();
  }
  std::string& scratch = record->scratch;
  scratch.clear();
  scratch.reserve(num_bytes);  // No growth below, so earlier views stay valid.
  for (std::string_view& field : record->fields) {
    size_t quote = field.find('"');
    if (quote == std::string_view::npos) continue;
    const size_t start = scratch.size();
    size_t from = 0;
    while (quote != std::string_view::npos) {
      scratch.append(field.data() + from, quote + 1 - from);  // Keeps one quote of the pair.
      from = quote + 2;
      quote = field.find('"', from);
    }
    scratch.append(field.data() + from, field.size() - from);
    field = std::string_view(scratch.data() + start, scratch.size() - start);
  }
}

std::string ErrnoText(int error_number) {
  return std::error_code(error_number, std::generic_category()).message();
}

void SetError(std::string* error, std::string message) {
  if (error != nullptr) *error = std::move(message);
}

std::string_view TrimSpaces(std::string_view text) {
  while (!text.empty() && text.front() == ' ') text.remove_prefix(1);
  while (!text.empty() && text.back() == ' ') text.remove_suffix(1);
  return text;
}

}  // namespace

CsvReader::CsvReader(std::string_view data, int64_t first_line, bool skip_bom)
    : data_(data), line_(first_line) {
  if (skip_bom && data_.substr(0, kUtf8Bom.size()) == kUtf8Bom) pos_ = kUtf8Bom.size();
}

bool CsvReader::Fail(int64_t line, int64_t field_number, const char* what, CsvRecord* record) {
  error_ = std::to_string(line) + ":" + std::to_string(field_number) + ": " + what;
  record->fields.clear();
  record->raw = {};
  pos_ = data_.size();
  return false;
}

bool CsvReader::Next(CsvRecord* record) {
  record->fields.clear();
  record->raw = {};
  if (!error_.empty()) return false;
  const char* const begin = data_.data();
  const char* const end = begin + data_.size();
  const char* p = SkipBlankLines(begin + pos_, end, &line_);
  if (p == end) {
    pos_ = data_.size();
    return false;
  }

  const char* const record_begin = p;
  record->line = line_;
  record->offset = record_begin - begin;
  bool has_doubled_quotes = false;
  int64_t field_number = 1;
  const char* record_end = end;  // First byte of the line terminator.
  const char* next = end;        // First byte after it.
  for (;;) {
    if (*p != '"') {
      const char* stop = FindSpecial(p, end);
      record->fields.emplace_back(p, stop - p);
      p = stop;
    } else {
      const int64_t open_line = line_;
      const char* const content = p + 1;
      const char* const quote = FindClosingQuote(content, end, &line_, &has_doubled_quotes);
      if (quote == nullptr) {
        return Fail(open_line, field_number, "unterminated quoted field (opened here)", record);
      }
      record->fields.emplace_back(content, quote - content);
      p = quote + 1;
      if (p < end && *p != ',' && *p != '\n' && *p != '\r') {
        return Fail(line_, field_number, "unexpected text after closing quote", record);
      }
    }

    // Here p is at a separator, a line terminator, a quote or the end.
    if (p == end) break;
    const char c = *p;
    if (c == ',') {
      ++p;
      ++field_number;
      if (p == end) {  // A trailing comma at the end of the data: one more, empty field.
        record->fields.emplace_back(p, 0);
        break;
      }
      continue;
    }
    if (c == '\n') {
      record_end = p;
      next = p + 1;
      ++line_;
      break;
    }
    if (c == '\r') {
      if (p + 1 == end) {
        record_end = p;
        break;
      }
      if (p[1] == '\n') {
        record_end = p;
        next = p + 2;
        ++line_;
        break;
      }
      return Fail(line_, field_number, "stray carriage return (line ends must be LF or CRLF)",
                  record);
    }
    return Fail(line_, field_number, "unexpected quote in unquoted field", record);
  }

  record->raw = std::string_view(record_begin, record_end - record_begin);
  pos_ = next - begin;
  if (has_doubled_quotes) CollapseDoubledQuotes(record);
  return true;
}

size_t LastRecordEnd(std::string_view data) {
  if (std::memchr(data.data(), '"', data.size()) == nullptr) {
    const size_t newline = data.rfind('\n');
    return newline == std::string_view::npos ? 0 : newline + 1;
  }
  bool quoted = false;
  size_t end = 0;
  for (size_t i = 0; i < data.size(); ++i) {
    const char c = data[i];
    if (c == '"') quoted = !quoted;
    if (c == '\n' && !quoted) end = i + 1;
  }
  return end;
}

std::vector<size_t> SplitAtRecordBoundaries(std::string_view data, int num_chunks,
                                            int64_t first_line, std::vector<int64_t>* first_lines) {
  num_chunks = std::max(num_chunks, 1);
  std::vector<size_t> starts = {0};
  std::vector<int64_t> lines = {first_line};
  const size_t size = data.size();
  // Bytes before `scanned` are accounted for: `in_quotes` is the quote parity
  // and `line` the line number at data[scanned].
  size_t scanned = 0;
  bool in_quotes = false;
  int64_t line = first_line;
  for (int i = 1; i < num_chunks && scanned < size; ++i) {
    // size * i / num_chunks, split so that the product cannot overflow.
    const size_t n = static_cast<size_t>(num_chunks);
    const size_t target = size / n * i + size % n * i / n;
    if (target > scanned) {
      const char* const from = data.data() + scanned;
      const char* const to = data.data() + target;
      if (std::count(from, to, '"') % 2 != 0) in_quotes = !in_quotes;
      line += std::count(from, to, '\n');
      scanned = target;
    }
    // Walks to the first LF outside quotes; the byte after it starts a record.
    bool found = false;
    while (scanned < size) {
      const char c = data[scanned++];
      if (c == '"') {
        in_quotes = !in_quotes;
      } else if (c == '\n') {
        ++line;
        if (!in_quotes) {
          found = true;
          break;
        }
      }
    }
    if (!found || scanned == size) break;
    starts.push_back(scanned);
    lines.push_back(line);
  }
  if (first_lines != nullptr) *first_lines = std::move(lines);
  return starts;
}

CsvHeader::CsvHeader(const std::vector<std::string_view>& names) {
  names_.reserve(names.size());
  index_.reserve(names.size());
  std::unordered_set<std::string> recorded;
  for (size_t i = 0; i < names.size(); ++i) {
    std::string name(TrimSpaces(names[i]));
    const bool is_new = index_.emplace(name, static_cast<int>(i)).second;
    if (!is_new && recorded.insert(name).second) duplicates_.push_back(name);
    names_.push_back(std::move(name));
  }
}

int CsvHeader::Find(std::string_view name) const {
  const auto it = index_.find(std::string(TrimSpaces(name)));
  return it == index_.end() ? -1 : it->second;
}

void AppendCsvField(std::string_view field, std::string* out) {
  const bool needs_quotes = field.find_first_of(",\"\r\n") != std::string_view::npos ||
                            (!field.empty() && (field.front() == ' ' || field.back() == ' ')) ||
                            field.substr(0, kUtf8Bom.size()) == kUtf8Bom;
  if (!needs_quotes) {
    out->append(field);
    return;
  }
  out->push_back('"');
  size_t from = 0;
  for (size_t quote = field.find('"'); quote != std::string_view::npos;
       quote = field.find('"', from)) {
    out->append(field.data() + from, quote + 1 - from);
    out->push_back('"');
    from = quote + 1;
  }
  out->append(field.data() + from, field.size() - from);
  out->push_back('"');
}

void AppendCsvRecord(const std::vector<std::string_view>& fields, std::string* out) {
  if (fields.size() == 1 && fields[0].empty()) {
    out->append("\"\"");
  } else {
    for (size_t i = 0; i < fields.size(); ++i) {
      if (i > 0) out->push_back(',');
      AppendCsvField(fields[i], out);
    }
  }
  out->push_back('\n');
}

bool ReadWholeFile(const std::string& path, std::string* contents, std::string* error) {
  contents->clear();
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) {
    SetError(error, path + ": cannot open file: " + ErrnoText(errno));
    return false;
  }
  // One byte beyond the size reported by stat lets the final read see the end
  // of the file without growing the buffer; files of unknown size (pipes,
  // /proc) grow it by doubling.
  size_t capacity = size_t{1} << 16;
  struct stat status;
  if (::fstat(fd, &status) == 0 && S_ISREG(status.st_mode) && status.st_size > 0) {
    capacity = static_cast<size_t>(status.st_size) + 1;
  }
  std::string buffer(capacity, '\0');
  size_t num_bytes = 0;
  for (;;) {
    if (num_bytes == buffer.size()) buffer.resize(buffer.size() * 2);
    const ssize_t num_read = ::read(fd, buffer.data() + num_bytes, buffer.size() - num_bytes);
    if (num_read < 0) {
      if (errno == EINTR) continue;
      const int read_errno = errno;
      ::close(fd);
      SetError(error, path + ": cannot read file: " + ErrnoText(read_errno));
      return false;
    }
    if (num_read == 0) break;
    num_bytes += static_cast<size_t>(num_read);
  }
  ::close(fd);
  buffer.resize(num_bytes);
  *contents = std::move(buffer);
  return true;
}

bool WriteFileAtomically(const std::string& path, std::string_view contents, std::string* error) {
  const std::string temp_path = path + ".tmp." + std::to_string(::getpid());
  const int fd = ::open(temp_path.c_str(), O_WRONLY | O_CREAT | O_TRUNC | O_CLOEXEC, 0666);
  if (fd < 0) {
    SetError(error,
             path + ": cannot create temporary file '" + temp_path + "': " + ErrnoText(errno));
    return false;
  }
  const auto fail_writing = [&](int write_errno) {
    ::unlink(temp_path.c_str());
    SetError(error,
             path + ": cannot write temporary file '" + temp_path + "': " + ErrnoText(write_errno));
    return false;
  };
  size_t num_written = 0;
  while (num_written < contents.size()) {
    const ssize_t n = ::write(fd, contents.data() + num_written, contents.size() - num_written);
    if (n < 0) {
      if (errno == EINTR) continue;
      const int write_errno = errno;
      ::close(fd);
      return fail_writing(write_errno);
    }
    num_written += static_cast<size_t>(n);
  }
  // Flushing before the rename means a crash leaves the old file or the whole
  // new one, never an empty file under the final name.
  if (::fsync(fd) != 0) {
    const int sync_errno = errno;
    ::close(fd);
    return fail_writing(sync_errno);
  }
  if (::close(fd) != 0) return fail_writing(errno);
  if (::rename(temp_path.c_str(), path.c_str()) != 0) {
    const int rename_errno = errno;
    ::unlink(temp_path.c_str());
    SetError(error, path + ": cannot rename temporary file '" + temp_path +
                        "' into place: " + ErrnoText(rename_errno));
    return false;
  }
  return true;
}

}  // namespace paritas
