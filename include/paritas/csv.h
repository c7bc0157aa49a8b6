// CSV reading and writing (RFC 4180) over in-memory buffers.
//
// The reader works on a caller-owned buffer and hands out string views, so a
// record costs no allocation once its vectors have grown. Fields are found by
// scanning for the few special bytes; quoted fields are unescaped into a
// per-record scratch buffer only when they contain doubled quotes.
#ifndef PARITAS_CSV_H_
#define PARITAS_CSV_H_

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

namespace paritas {

// One record (row) of a CSV file. Views point into the reader's buffer or
// into the record's own scratch storage; they stay valid until the next call
// of CsvReader::Next with this record.
struct CsvRecord {
  // Unquoted field texts, in column order.
  std::vector<std::string_view> fields;
  // 1-based line on which the record starts (records may span lines when a
  // quoted field holds a newline).
  int64_t line = 0;
  // Byte offset of the record's first byte in the buffer.
  int64_t offset = 0;
  // The record's raw text, without its line terminator.
  std::string_view raw;
  // Storage for fields that needed unescaping ("" -> ").
  std::string scratch;
};

// Reads records from a buffer holding a whole CSV file or a chunk of one that
// starts at a record boundary. Accepts LF and CRLF line ends, a UTF-8
// byte-order mark at the start of the file, and a missing final newline.
// Blank lines (no bytes before the line end) are skipped.
class CsvReader {
 public:
  // `data` must outlive the reader. `first_line` is the line number of the
  // first byte of `data` (1 for a whole file); `skip_bom` strips a leading
  // UTF-8 byte-order mark.
  CsvReader(std::string_view data, int64_t first_line = 1, bool skip_bom = true);

  // Reads the next record. Returns false at the end of the data or on a
  // malformed record; in the latter case error() is non-empty and names the
  // line and column (e.g. "3:2: unterminated quoted field").
  bool Next(CsvRecord* record);

  // Empty unless Next failed on malformed input.
  const std::string& error() const { return error_; }
  // Line number of the next byte to be read.
  int64_t line() const { return line_; }

 private:
  std::string_view data_;
  size_t pos_ = 0;
  int64_t line_ = 1;
  std::string error_;
};

// Splits `data` (a whole file after its header row) into at most `num_chunks`
// pieces that each start at a record boundary, by tracking the parity of
// quote characters. Returns the start offsets, the first being 0; each
// chunk's first line number is written to `first_lines`.
std::vector<size_t> SplitAtRecordBoundaries(std::string_view data, int num_chunks,
                                            int64_t first_line,
                                            std::vector<int64_t>* first_lines);

// Maps header names to column indices. Names are matched exactly after
// trimming spaces; the first occurrence of a duplicated name is kept and the
// duplicate recorded.
class CsvHeader {
 public:
  CsvHeader() = default;
  explicit CsvHeader(const std::vector<std::string_view>& names);

  // Column index of `name`, or -1 when absent.
  int Find(std::string_view name) const;
  // Names in header order.
  const std::vector<std::string>& names() const { return names_; }
  // Names that appear more than once, each listed once, in header order.
  const std::vector<std::string>& duplicates() const { return duplicates_; }

 private:
  std::vector<std::string> names_;
  std::vector<std::string> duplicates_;
};

// Appends `field` to `out`, quoted when it holds a comma, quote, CR or LF or
// starts or ends with a space.
void AppendCsvField(std::string_view field, std::string* out);

// Reads a whole file into `contents`. Returns false and sets `error` (e.g.
// "prices.csv: cannot open file: No such file or directory") on failure.
bool ReadWholeFile(const std::string& path, std::string* contents, std::string* error);

// Writes `contents` to `path` through a temporary file in the same folder that
// is renamed into place, so readers never see a partial file.
bool WriteFileAtomically(const std::string& path, std::string_view contents,
                         std::string* error);

}  // namespace paritas

#endif  // PARITAS_CSV_H_
