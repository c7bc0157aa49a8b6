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
#include <atomic>
#include <cerrno>
#include <cstdint>
#include <cstring>
#include <system_error>
#include <memory>
#include <unordered_set>
#include <utility>

#include "base/huge_pages.h"
#include "paritas/base/text.h"

#if defined(__SSE2__)
#include <emmintrin.h>
#endif

namespace paritas {
namespace {

constexpr std::string_view kUtf8Bom = "\xEF\xBB\xBF";

// Returns the first byte in [p, end) that is the delimiter, '"', LF or CR,
// or `end`. Loads only whole 16-byte blocks inside the range, so it never
// reads past it. Sets *non_ascii when a byte before the one returned has
// its high bit set: the same pass tells most records to be ASCII, so they
// need no UTF-8 check.
inline const char* FindSpecial(const char* p, const char* end, char delimiter, bool* non_ascii) {
#if defined(__SSE2__)
  const __m128i comma = _mm_set1_epi8(delimiter);
  const __m128i quote = _mm_set1_epi8('"');
  const __m128i lf = _mm_set1_epi8('\n');
  const __m128i cr = _mm_set1_epi8('\r');
  unsigned high = 0;  // bytes with the high bit set
  while (end - p >= 16) {
    const __m128i block = _mm_loadu_si128(reinterpret_cast<const __m128i*>(p));
    const __m128i hits =
        _mm_or_si128(_mm_or_si128(_mm_cmpeq_epi8(block, comma), _mm_cmpeq_epi8(block, quote)),
                     _mm_or_si128(_mm_cmpeq_epi8(block, lf), _mm_cmpeq_epi8(block, cr)));
    const unsigned mask = static_cast<unsigned>(_mm_movemask_epi8(hits));
    const unsigned block_high = static_cast<unsigned>(_mm_movemask_epi8(block));
    if (mask != 0) {
      const int at = __builtin_ctz(mask);
      // Only the bytes before the special one belong to the field.
      if ((high | (block_high & ((1u << at) - 1))) != 0) *non_ascii = true;
      return p + at;
    }
    high |= block_high;
    p += 16;
  }
  if (high != 0) *non_ascii = true;
#endif
  while (p < end && *p != delimiter && *p != '"' && *p != '\n' && *p != '\r') {
    if (static_cast<unsigned char>(*p) >= 0x80) *non_ascii = true;
    ++p;
  }
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
  set_limits(ReadLimits());
}

void CsvReader::set_limits(const ReadLimits& limits) {
  max_record_bytes_ = static_cast<size_t>(std::max<int64_t>(limits.max_record_bytes, 0));
  max_field_bytes_ = static_cast<size_t>(std::max<int64_t>(limits.max_field_bytes, 0));
}

bool CsvReader::Fail(int64_t line, int64_t field_number, const std::string& what,
                     CsvRecord* record) {
  error_ = std::to_string(line);
  if (field_number > 0) error_ += ":" + std::to_string(field_number);
  error_ += ": " + what;
  record->fields.clear();
  record->raw = {};
  pos_ = data_.size();
  return false;
}

bool CsvReader::BeyondLimits(const char* record_begin, const char* field_begin,
                             const char* field_end, int64_t field_line, int64_t field_number,
                             bool quoted, CsvRecord* record) {
  const size_t field_bytes = static_cast<size_t>(field_end - field_begin);
  // Whichever limit is crossed at the earlier byte of the record is named.
  const size_t field_offset = static_cast<size_t>(field_begin - record_begin);
  if (field_bytes > max_field_bytes_ && field_offset + max_field_bytes_ <= max_record_bytes_) {
    const std::string what =
        quoted ? "a quoted field (opened here) longer than " : "a field longer than ";
    return Fail(field_line, field_number,
                what + FormatByteSize(static_cast<int64_t>(max_field_bytes_)) + " " +
                    LimitAdvice("limits.max_field_bytes"),
                record);
  }
  return Fail(record->line, 0,
              "a record longer than " + FormatByteSize(static_cast<int64_t>(max_record_bytes_)) +
                  " " + LimitAdvice("limits.max_record_bytes"),
              record);
}

bool CsvReader::Next(CsvRecord* record) {
  record->fields.clear();
  record->raw = {};
  record->ascii = false;
  if (!error_.empty()) return false;
  const char* const begin = data_.data();
  const char* const end = begin + data_.size();
  const char* p = SkipBlankLines(begin + pos_, end, &line_);
  if (p == end) {
    pos_ = data_.size();
    return false;
  }

  if (NextSimple(p, end, record)) return true;

  const char* const record_begin = p;
  record->line = line_;
  record->offset = record_begin - begin;
  bool has_doubled_quotes = false;
  // Quoted fields are not looked at byte by byte: a record with one is not
  // known to be ASCII.
  bool maybe_non_ascii = false;
  int64_t field_number = 1;
  const char* record_end = end;  // First byte of the line terminator.
  const char* next = end;        // First byte after it.
  for (;;) {
    if (*p != '"') {
      const char* stop = FindSpecial(p, end, delimiter_, &maybe_non_ascii);
      if (!WithinLimits(record_begin, p, stop, stop, line_, field_number, false, record)) {
        return false;
      }
      record->fields.emplace_back(p, stop - p);
      p = stop;
    } else {
      const int64_t open_line = line_;
      maybe_non_ascii = true;
      const char* const content = p + 1;
      const char* const quote = FindClosingQuote(content, end, &line_, &has_doubled_quotes);
      if (quote == nullptr) {
        // A field that ran to the end of the data may be merely too long.
        if (!WithinLimits(record_begin, content, end, end, open_line, field_number, true, record)) {
          return false;
        }
        return Fail(open_line, field_number, "unterminated quoted field (opened here)", record);
      }
      if (!WithinLimits(record_begin, content, quote, quote + 1, open_line, field_number, true,
                        record)) {
        return false;
      }
      record->fields.emplace_back(content, quote - content);
      p = quote + 1;
      if (p < end && *p != delimiter_ && *p != '\n' && *p != '\r') {
        return Fail(line_, field_number, "unexpected text after closing quote", record);
      }
    }

    // Here p is at a separator, a line terminator, a quote or the end.
    if (p == end) break;
    const char c = *p;
    if (c == delimiter_) {
      ++p;
      ++field_number;
      if (p == end) {  // A trailing delimiter at the end of the data: one more, empty field.
        if (!WithinLimits(record_begin, p, p, p, line_, field_number, false, record)) return false;
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
  record->ascii = !maybe_non_ascii;
  pos_ = next - begin;
  if (has_doubled_quotes) CollapseDoubledQuotes(record);
  return true;
}

bool CsvReader::NextSimple(const char* p, const char* end, CsvRecord* record) {
#if defined(__SSE2__)
  // At most this many bytes before the line end; both limits hold for any
  // field of such a record.
  const size_t most = std::min<size_t>({kSimpleRecordBytes, max_field_bytes_, max_record_bytes_});
  const __m128i comma = _mm_set1_epi8(delimiter_);
  const __m128i quote = _mm_set1_epi8('"');
  const __m128i lf = _mm_set1_epi8('\n');
  const __m128i cr = _mm_set1_epi8('\r');
  const char* const record_begin = p;
  const char* field = p;
  std::vector<std::string_view>& fields = record->fields;
  for (const char* block = p; end - block >= 16; block += 16) {
    const __m128i bytes = _mm_loadu_si128(reinterpret_cast<const __m128i*>(block));
    unsigned mask = static_cast<unsigned>(_mm_movemask_epi8(
        _mm_or_si128(_mm_or_si128(_mm_cmpeq_epi8(bytes, comma), _mm_cmpeq_epi8(bytes, quote)),
                     _mm_or_si128(_mm_cmpeq_epi8(bytes, lf), _mm_cmpeq_epi8(bytes, cr)))));
    const unsigned high = static_cast<unsigned>(_mm_movemask_epi8(bytes));
    while (mask != 0) {
      const int at = __builtin_ctz(mask);
      const char* const stop = block + at;
      const char c = *stop;
      if (c == delimiter_) {
        fields.emplace_back(field, stop - field);
        field = stop + 1;
        mask &= mask - 1;
        continue;
      }
      // A quote or a carriage return, a byte that is not ASCII, or a long
      // record: the general path reads it (or words its error).
      if (c != '\n' || (high & ((1u << at) - 1)) != 0 ||
          static_cast<size_t>(stop - record_begin) > most) {
        fields.clear();
        return false;
      }
      fields.emplace_back(field, stop - field);
      record->line = line_;
      record->offset = record_begin - data_.data();
      record->raw = std::string_view(record_begin, stop - record_begin);
      record->ascii = true;
      ++line_;
      pos_ = static_cast<size_t>(stop + 1 - data_.data());
      return true;
    }
    if (high != 0 || static_cast<size_t>(block + 16 - record_begin) > most) break;
  }
  fields.clear();
#else
  (void)p;
  (void)end;
  (void)record;
#endif
  return false;
}

bool FindInvalidUtf8(const CsvRecord& record, char delimiter, int64_t* line, int* field) {
  if (record.ascii) return false;
  const size_t bad = FindInvalidUtf8(record.raw);
  if (bad == std::string_view::npos) return false;
  // The raw text up to the byte, read as the reader does: delimiters outside
  // quotes end fields, LFs (inside quotes) end lines.
  *line = record.line;
  *field = 1;
  bool quoted = false;
  for (size_t i = 0; i < bad; ++i) {
    const char c = record.raw[i];
    if (c == '"') {
      quoted = !quoted;
    } else if (c == '\n') {
      ++*line;
    } else if (c == delimiter && !quoted) {
      ++*field;
    }
  }
  return true;
}

bool FindMisplacedByteOrderMark(const CsvRecord& header, int* field) {
  for (size_t i = 0; i < header.fields.size(); ++i) {
    if (TrimSpaces(header.fields[i]).substr(0, kUtf8Bom.size()) == kUtf8Bom) {
      *field = static_cast<int>(i) + 1;
      return true;
    }
  }
  return false;
}

std::string MisplacedByteOrderMarkProblem(std::string_view name) {
  // The mark is invisible in a terminal: it is shown as <U+FEFF>.
  std::string shown;
  name = TrimSpaces(name);
  while (name.substr(0, kUtf8Bom.size()) == kUtf8Bom) {
    shown += "<U+FEFF>";
    name.remove_prefix(kUtf8Bom.size());
  }
  return "column name " + QuoteValue(shown + VisibleText(name)) +
         " starts with a byte-order mark (U+FEFF); a mark may only open the file, once (save "
         "the file as UTF-8 with at most one mark)";
}

bool CsvFormat::IsValid(std::string* error) const {
  if (delimiter != ',' && delimiter != ';' && delimiter != '\t') {
    *error = "delimiter " + FormatCharName(delimiter) + " is not one of ',', ';', tab";
    return false;
  }
  if (decimal != '.' && decimal != ',') {
    *error = "decimal " + FormatCharName(decimal) + " is not one of '.', ','";
    return false;
  }
  if (delimiter == ',' && decimal == ',') {
    *error = "decimal ',' needs delimiter ';' or tab (a comma cannot separate both)";
    return false;
  }
  return true;
}

std::string FormatCharName(char c) {
  if (c == '\t') return "tab";
  return "'" + std::string(1, c) + "'";
}

int64_t CountLineFeeds(std::string_view data) {
  const char* p = data.data();
  size_t left = data.size();
  int64_t total = 0;
#if defined(__SSE2__)
  // Byte lanes count the line feeds of up to 255 blocks of 16 bytes (a
  // comparison gives -1 per match, subtracted), then one sum of absolute
  // differences adds them up: about 2 instructions per 16 bytes.
  const __m128i lf = _mm_set1_epi8('\n');
  while (left >= 16) {
    const size_t blocks = std::min<size_t>(left / 16, 255);
    __m128i counts = _mm_setzero_si128();
    for (size_t b = 0; b < blocks; ++b) {
      const __m128i bytes = _mm_loadu_si128(reinterpret_cast<const __m128i*>(p + 16 * b));
      counts = _mm_sub_epi8(counts, _mm_cmpeq_epi8(bytes, lf));
    }
    const __m128i sums = _mm_sad_epu8(counts, _mm_setzero_si128());
    total += _mm_cvtsi128_si64(sums) + _mm_cvtsi128_si64(_mm_unpackhi_epi64(sums, sums));
    p += 16 * blocks;
    left -= 16 * blocks;
  }
#endif
  for (size_t i = 0; i < left; ++i) total += p[i] == '\n';
  return total;
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

// ---------------------------------------------------------------------------
// Reading files

namespace {

// Reads into buffer[0, want) until it is full or the file ends, setting
// *num_read and, at the end, *at_eof. Returns the errno of a failed read,
// else 0.
int ReadFully(int fd, char* buffer, size_t want, size_t* num_read, bool* at_eof) {
  *num_read = 0;
  while (*num_read < want) {
    const ssize_t n = ::read(fd, buffer + *num_read, want - *num_read);
    if (n < 0) {
      if (errno == EINTR) continue;
      return errno;
    }
    if (n == 0) {
      *at_eof = true;
      break;
    }
    *num_read += static_cast<size_t>(n);
  }
  return 0;
}

}  // namespace

bool ReadWholeFile(const std::string& path, int64_t max_bytes, std::string_view advice,
                   std::string* contents, std::string* error) {
  contents->clear();
  const int fd = ::open(path.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd < 0) {
    SetError(error, path + ": cannot open file: " + ErrnoText(errno));
    return false;
  }
  // Up to one byte beyond the limit is read, which tells a file at the limit
  // from a larger one. The size stat reports only sizes the first piece, so
  // a regular file is usually read at once; pipes and devices (size 0) and
  // files that grow are read in pieces that double.
  const size_t limit = static_cast<size_t>(std::max<int64_t>(max_bytes, 0)) + 1;
  size_t capacity = size_t{1} << 16;
  struct stat status;
  if (::fstat(fd, &status) == 0 && S_ISREG(status.st_mode) && status.st_size > 0) {
    capacity = static_cast<size_t>(status.st_size) + 1;
  }
  std::string buffer(std::min(capacity, limit), '\0');
  size_t num_bytes = 0;
  bool at_eof = false;
  while (!at_eof && num_bytes < limit) {
    if (num_bytes == buffer.size()) buffer.resize(std::min(buffer.size() * 2, limit));
    size_t num_read = 0;
    const int read_errno =
        ReadFully(fd, buffer.data() + num_bytes, buffer.size() - num_bytes, &num_read, &at_eof);
    num_bytes += num_read;
    if (read_errno != 0) {
      ::close(fd);
      SetError(error, path + ": cannot read file: " + ErrnoText(read_errno));
      return false;
    }
  }
  ::close(fd);
  if (num_bytes >= limit) {
    SetError(error,
             path + ": file larger than " + FormatByteSize(max_bytes) + " " + std::string(advice));
    return false;
  }
  buffer.resize(num_bytes);
  *contents = std::move(buffer);
  return true;
}

CsvBlockReader::CsvBlockReader(std::string path, int64_t block_bytes, const ReadLimits& limits,
                               char delimiter)
    : path_(std::move(path)),
      block_bytes_(static_cast<size_t>(std::max<int64_t>(block_bytes, 64))),
      step_bytes_(block_bytes_),
      limits_(limits),
      delimiter_(delimiter) {}

void CsvBlockReader::set_first_block_bytes(int64_t bytes) {
  step_bytes_ = std::min(static_cast<size_t>(std::max<int64_t>(bytes, 64)), block_bytes_);
}

CsvBlockReader::~CsvBlockReader() {
  if (fd_ >= 0) ::close(fd_);
}

bool CsvBlockReader::Open(std::string* error) {
  fd_ = ::open(path_.c_str(), O_RDONLY | O_CLOEXEC);
  if (fd_ < 0) {
    SetError(error, path_ + ": cannot open file: " + ErrnoText(errno));
    return false;
  }
  // A block larger than a regular file would only cost zero-filling the
  // buffer; one byte more than the size lets the first step see the end.
  struct stat status;
  if (::fstat(fd_, &status) == 0 && S_ISREG(status.st_mode) && status.st_size >= 0) {
    const size_t file_bytes = static_cast<size_t>(status.st_size);
    if (file_bytes + 1 < block_bytes_) block_bytes_ = std::max<size_t>(file_bytes + 1, 1 << 16);
    step_bytes_ = std::min(step_bytes_, block_bytes_);
  }
  return true;
}

bool CsvBlockReader::Fill(std::string* error) {
  Buffer& buffer = buffers_[current_];
  if (buffer.capacity < size_ + block_bytes_) {
    // Room for the block and a record carried over from the one before, not
    // zero-filled: the file's bytes are read straight into it.
    const size_t capacity = std::max(size_ + block_bytes_ + (size_t{1} << 20), 2 * buffer.capacity);
    auto grown = std::make_unique_for_overwrite<char[]>(capacity);
    internal::AdviseHugePages(grown.get(), capacity);
    if (size_ > 0) std::memcpy(grown.get(), buffer.bytes.get(), size_);
    buffer.bytes = std::move(grown);
    buffer.capacity = capacity;
  }
  size_t num_read = 0;
  const int read_errno =
      ReadFully(fd_, buffer.bytes.get() + size_, step_bytes_, &num_read, &at_eof_);
  step_bytes_ = std::min(2 * step_bytes_, block_bytes_);
  size_ += num_read;
  num_bytes_read_ += static_cast<int64_t>(num_read);
  if (read_errno != 0) {
    SetError(error, path_ + ": cannot read file: " + ErrnoText(read_errno));
    return false;
  }
  return true;
}

size_t CsvBlockReader::SkipLeadingBlankLines(std::string_view data, int64_t* num_lines) {
  size_t p = 0;
  if (num_bytes_read_ == static_cast<int64_t>(size_) && data.substr(0, 3) == kUtf8Bom) {
    has_bom_ = true;  // The buffer still begins the file.
    p = kUtf8Bom.size();
  }
  while (p < data.size()) {
    if (data[p] == '\n') {
      ++*num_lines;
      ++p;
    } else if (data[p] == '\r' && p + 1 < data.size() && data[p + 1] == '\n') {
      ++*num_lines;
      p += 2;
    } else {
      break;
    }
  }
  return p;
}

std::string CsvBlockReader::BeyondLimitError(std::string_view pending) const {
  // The reader finds the field or the record beyond the limit within the
  // text held, and words it as it would for the whole record.
  CsvReader reader(pending, line_, /*skip_bom=*/false);
  reader.set_limits(limits_);
  reader.set_delimiter(delimiter_);
  CsvRecord record;
  if (!reader.Next(&record) && !reader.error().empty()) return path_ + ":" + reader.error();
  return path_ + ":" + std::to_string(line_) + ": a record longer than " +
         FormatByteSize(limits_.max_record_bytes) + " " + LimitAdvice("limits.max_record_bytes");
}

bool CsvBlockReader::Next(CsvBlock* block, std::string* error) {
  if (done_) return false;
  {
    // The records not yet handed out move to the other buffer, which the
    // block before the last one used: the last block's text stays as it is.
    const Buffer& last = buffers_[current_];
    current_ = 1 - current_;
    Buffer& buffer = buffers_[current_];
    const size_t carried = size_ - consumed_;
    if (buffer.capacity < carried) {
      buffer.bytes = std::make_unique_for_overwrite<char[]>(carried);
      buffer.capacity = carried;
    }
    if (carried > 0) std::memcpy(buffer.bytes.get(), last.bytes.get() + consumed_, carried);
    size_ = carried;
    consumed_ = 0;
  }
  const size_t fresh_begin = size_;
  for (;;) {
    if (!at_eof_ && !Fill(error)) {
      done_ = true;
      return false;
    }
    const std::string_view data(buffers_[current_].bytes.get(), size_);
    int64_t skipped_lines = 0;
    const size_t start = started_ ? 0 : SkipLeadingBlankLines(data, &skipped_lines);
    const std::string_view pending = data.substr(start);
    const size_t end = at_eof_ ? pending.size() : LastRecordEnd(pending);
    // Whole records, the end of the file, or blank lines that need not be
    // held while the first record is awaited.
    if (end > 0 || at_eof_ || start > 0) {
      line_ += skipped_lines;
      block->records = pending.substr(0, end);
      block->first_line = line_;
      block->fresh = data.substr(fresh_begin);
      line_ += CountLineFeeds(block->records);
      consumed_ = start + end;
      started_ = started_ || end > 0;
      done_ = at_eof_;
      return true;
    }
    if (pending.size() > static_cast<size_t>(limits_.max_record_bytes) + 1) {
      SetError(error, BeyondLimitError(pending));
      done_ = true;
      return false;
    }
  }
}

namespace {

// Creates a temporary file beside `path` whose name no other write shares:
// process id plus a per-process counter, created with O_EXCL so an existing
// file of that name (another writer's, or a user's) is never truncated.
int CreateUniqueTemporary(const std::string& path, std::string* temp_path) {
  static std::atomic<uint64_t> counter{0};
  for (int attempt = 0; attempt < 100; ++attempt) {
    *temp_path = path + ".tmp." + std::to_string(::getpid()) + "." +
                 std::to_string(counter.fetch_add(1, std::memory_order_relaxed));
    const int fd = ::open(temp_path->c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0666);
    if (fd >= 0 || errno != EEXIST) return fd;
  }
  errno = EEXIST;
  return -1;
}

}  // namespace

bool WriteFileAtomically(const std::string& path, std::string_view contents, std::string* error) {
  std::string temp_path;
  const int fd = CreateUniqueTemporary(path, &temp_path);
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
