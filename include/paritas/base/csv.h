// CSV reading and writing (RFC 4180) over in-memory buffers.
//
// The reader works on a caller-owned buffer and hands out string views, so a
// record costs no allocation once its vectors have grown. Fields are found by
// scanning for the few special bytes; quoted fields are unescaped into a
// per-record scratch buffer only when they contain doubled quotes.
#ifndef PARITAS_BASE_CSV_H_
#define PARITAS_BASE_CSV_H_

#include <cstdint>
#include <string>
#include <string_view>
#include <unordered_map>
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
// byte-order mark at the start of the file, and a missing final newline (a
// lone CR at the very end also ends the last record). Blank lines (no bytes
// before the line end) are skipped. Inside a quoted field every byte is data,
// including LF, CR and NUL; lines are counted by LF only. Any byte sequence is
// accepted without reading outside `data`: malformed input stops the reader
// with an error, which is then sticky.
//
// Error messages have the form "L:C: text", L the 1-based line of the
// offending byte and C the 1-based field number within the record:
//   "L:C: unterminated quoted field (opened here)"  (L:C of the opening quote)
//   "L:C: unexpected quote in unquoted field"
//   "L:C: unexpected text after closing quote"
//   "L:C: stray carriage return (line ends must be LF or CRLF)"
class CsvReader {
 public:
  // `data` must outlive the reader. `first_line` is the line number of the
  // first byte of `data` (1 for a whole file); `skip_bom` strips a leading
  // UTF-8 byte-order mark.
  CsvReader(std::string_view data, int64_t first_line = 1, bool skip_bom = true);

  // Reads the next record. Returns false at the end of the data or on a
  // malformed record; in the latter case error() is non-empty and names the
  // line and field (e.g. "3:2: unterminated quoted field (opened here)").
  // Reuses the capacity of record->fields and record->scratch.
  bool Next(CsvRecord* record);

  // Empty unless Next failed on malformed input.
  const std::string& error() const { return error_; }
  // Line number of the next byte to be read.
  int64_t line() const { return line_; }
  // Byte offset of the next byte to be read.
  size_t position() const { return pos_; }

 private:
  // Records "line:field: what" as the error, stops the reader and returns false.
  bool Fail(int64_t line, int64_t field_number, const char* what, CsvRecord* record);

  std::string_view data_;
  size_t pos_ = 0;
  int64_t line_ = 1;
  std::string error_;
};

// Splits `data` (a whole file after its header row) into at most `num_chunks`
// pieces that each start at a record boundary, by tracking the parity of
// quote characters. Returns the start offsets, the first being 0, strictly
// increasing and all below data.size() (except the single 0 of empty data);
// chunk i spans [offsets[i], offsets[i + 1]) and the last ends at data.size().
// Each chunk's first line number (`first_line` being that of data[0]) is
// written to `first_lines` when it is not null. Reading each chunk with
// CsvReader(chunk, first_lines[i], /*skip_bom=*/i == 0) yields the same
// records and line numbers as one reader over `data`; on malformed input the
// first error in chunk order is the one a single pass reports. `num_chunks`
// below 1 counts as 1.
std::vector<size_t> SplitAtRecordBoundaries(std::string_view data, int num_chunks,
                                            int64_t first_line, std::vector<int64_t>* first_lines);

// Returns the end of the last complete record in `data`, which must start at
// a record boundary: the position after the last LF outside quotes, 0 when
// there is none. For reading a file block by block.
size_t LastRecordEnd(std::string_view data);

// Maps header names to column indices. Names (and the names looked up) are
// matched exactly, case included, after trimming ASCII spaces at both ends;
// the first occurrence of a duplicated name is kept and the duplicate
// recorded.
class CsvHeader {
 public:
  CsvHeader() = default;
  explicit CsvHeader(const std::vector<std::string_view>& names);

  // Column index of `name`, or -1 when absent.
  int Find(std::string_view name) const;
  // Trimmed names in header order.
  const std::vector<std::string>& names() const { return names_; }
  // Names that appear more than once, each listed once, in the order of
  // their second occurrences.
  const std::vector<std::string>& duplicates() const { return duplicates_; }

 private:
  std::vector<std::string> names_;
  std::vector<std::string> duplicates_;
  // Trimmed name -> index of its first occurrence.
  std::unordered_map<std::string, int> index_;
};

// Appends `field` to `out`, quoted when it holds a comma, quote, CR or LF,
// starts or ends with a space, or starts with a UTF-8 byte-order mark (which
// the reader would strip at the start of a file); quotes inside are doubled.
void AppendCsvField(std::string_view field, std::string* out);

// Appends one record: the fields separated by commas, then LF. A record of one
// empty field is written as "" so that it is not read back as a blank line;
// a record of no fields is a blank line, which reads back as no record.
void AppendCsvRecord(const std::vector<std::string_view>& fields, std::string* out);

// Reads a whole file into `contents`, byte for byte. Returns false and sets
// `error` (e.g. "prices.csv: cannot open file: No such file or directory", the
// reason being strerror's text) on failure.
bool ReadWholeFile(const std::string& path, std::string* contents, std::string* error);

// Writes `contents` to `path` through the temporary file "<path>.tmp.<pid>" in
// the same folder, flushed to disk and renamed into place, so readers never
// see a partial file. On failure removes the temporary file, leaves `path`
// untouched and sets `error` to a message naming `path` and the reason.
bool WriteFileAtomically(const std::string& path, std::string_view contents, std::string* error);

}  // namespace paritas

#endif  // PARITAS_BASE_CSV_H_
