// CSV reading and writing (RFC 4180) over in-memory buffers.
//
// The reader works on a caller-owned buffer and hands out string views, so a
// record costs no allocation once its vectors have grown. Fields are found by
// scanning for the few special bytes; quoted fields are unescaped into a
// per-record scratch buffer only when they contain doubled quotes.
#ifndef PARITAS_BASE_CSV_H_
#define PARITAS_BASE_CSV_H_

#include <cstdint>
#include <memory>
#include <string>
#include <string_view>
#include <unordered_map>
#include <vector>

#include "paritas/base/read_limits.h"

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
  // True when the reader saw that every byte of the record is ASCII (so it
  // is valid UTF-8); false when it holds other bytes or was not looked at
  // byte by byte (a quoted field).
  bool ascii = false;
};

// How a CSV input is written. The defaults are RFC 4180's comma and the
// decimal point; files saved by spreadsheets in much of Europe use ';' and a
// decimal comma.
struct CsvFormat {
  // Field delimiter: ',' (default), ';' or '\t'.
  char delimiter = ',';
  // Decimal mark of numbers: '.' (default) or ','. A decimal comma needs a
  // delimiter other than ',' (else every number would need quotes).
  char decimal = '.';

  // Returns false with a message when a character is not one of those, or
  // both are ','.
  bool IsValid(std::string* error) const;
};

// Returns "','", "';'" or "tab", as a message or the configuration names a
// delimiter or decimal mark.
std::string FormatCharName(char c);

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
//   "L:C: a field longer than 1 MiB (limits.max_field_bytes); raise the
//    limit if the file is right" ("a quoted field (opened here) longer
//    than ..." when quoted)
//   "L: a record longer than 16 MiB (limits.max_record_bytes); raise the
//    limit if the file is right" (L the record's first line)
// A record is refused at the first byte beyond a limit: a field beyond
// max_field_bytes whose limit falls within the record's first
// max_record_bytes is named as a field, otherwise the record is, so the
// message does not depend on where a block of a streamed file ends.
class CsvReader {
 public:
  // `data` must outlive the reader. `first_line` is the line number of the
  // first byte of `data` (1 for a whole file); `skip_bom` strips a leading
  // UTF-8 byte-order mark. Records and fields are limited by the defaults
  // of ReadLimits until set_limits says otherwise.
  CsvReader(std::string_view data, int64_t first_line = 1, bool skip_bom = true);

  // Uses limits.max_record_bytes and limits.max_field_bytes.
  void set_limits(const ReadLimits& limits);
  // Separates fields by `delimiter` (default ','; see CsvFormat) instead.
  void set_delimiter(char delimiter) { delimiter_ = delimiter; }

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
  // Records "line:field: what" ("line: what" for field number 0) as the
  // error, stops the reader and returns false.
  bool Fail(int64_t line, int64_t field_number, const std::string& what, CsvRecord* record);
  // Checks a field [field_begin, field_end) of the record starting at
  // `record_begin` and running at least to `record_end`; fails and returns
  // false when a limit is exceeded.
  bool WithinLimits(const char* record_begin, const char* field_begin, const char* field_end,
                    const char* record_end, int64_t field_line, int64_t field_number, bool quoted,
                    CsvRecord* record) {
    if (static_cast<size_t>(field_end - field_begin) <= max_field_bytes_ &&
        static_cast<size_t>(record_end - record_begin) <= max_record_bytes_) {
      return true;
    }
    return BeyondLimits(record_begin, field_begin, field_end, field_line, field_number, quoted,
                        record);
  }
  // Reads the record starting at `p` (before `end`, the end of the data)
  // when it is the common kind: unquoted ASCII fields, an LF line end, at
  // most kSimpleRecordBytes bytes, a whole 16-byte block of data from each
  // byte of it on. Returns false, with nothing changed, for any other
  // record, which Next reads byte by byte.
  bool NextSimple(const char* p, const char* end, CsvRecord* record);
  static constexpr size_t kSimpleRecordBytes = 256;
  // Fails with the message for the limit a field or record crossed first.
  bool BeyondLimits(const char* record_begin, const char* field_begin, const char* field_end,
                    int64_t field_line, int64_t field_number, bool quoted, CsvRecord* record);

  std::string_view data_;
  size_t pos_ = 0;
  int64_t line_ = 1;
  size_t max_record_bytes_;
  size_t max_field_bytes_;
  char delimiter_ = ',';
  std::string error_;
};

// Finds the first byte of `record` (read with `delimiter`) that is not valid
// UTF-8. Returns false when the whole record is valid; otherwise sets *line
// to the line of that byte and *field to the 1-based number of its field,
// the place a CsvReader message would name.
bool FindInvalidUtf8(const CsvRecord& record, char delimiter, int64_t* line, int* field);

// Finds a header field that starts with a UTF-8 byte-order mark (U+FEFF)
// the reader did not take as the file's own mark: a second mark, or one after
// blank lines. Such a name matches no column and would not read back the same
// once written at the start of another file. Returns false when there is none;
// otherwise sets *field to the 1-based number of the first such field.
bool FindMisplacedByteOrderMark(const CsvRecord& header, int* field);

// The message for that field, its marks shown as <U+FEFF> (invisible in a
// terminal): "column name '<U+FEFF>id' starts with a byte-order mark ...".
std::string MisplacedByteOrderMarkProblem(std::string_view name);

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

// Returns the number of LF bytes in `data`.
int64_t CountLineFeeds(std::string_view data);

// A run of whole records handed out by CsvBlockReader. The views point into
// the reader's buffers and stay valid until its second call of Next after
// the one that returned them, so one block can be parsed while the next one
// is read.
struct CsvBlock {
  // Whole records starting at a record boundary, to be read with
  // CsvReader(records, first_line, /*skip_bom=*/false). The first block
  // starts at the file's first record that is not blank (after a byte-order
  // mark and blank lines) and holds that record whole; the last block ends
  // at the end of the file, whose last record may lack its line end. A block
  // may be empty.
  std::string_view records;
  // Line number of the first byte of `records`.
  int64_t first_line = 1;
  // The bytes read from the file during this call, in file order; the
  // `fresh` views of all calls together are the whole file (for a digest).
  std::string_view fresh;
};

// Reads a file of any kind -- a regular file, a pipe, a FIFO, a device such
// as /dev/zero -- in blocks of whole records, holding at most two blocks
// (the one handed out last and the one being read) plus
// limits.max_record_bytes of text whatever the file is. The file's size as
// reported by the system is only a hint for the first allocation. A record
// that does not end within limits.max_record_bytes (a file without line
// ends) stops the reading with an error naming the file and line, as
// CsvReader words it, e.g. "prices.csv:1: a record longer than 16 MiB
// (limits.max_record_bytes); raise the limit if the file is right".
class CsvBlockReader {
 public:
  // Reads `block_bytes` per step (at least 64). `delimiter` only places the
  // field named by a limit message (see CsvFormat).
  CsvBlockReader(std::string path, int64_t block_bytes, const ReadLimits& limits,
                 char delimiter = ',');
  ~CsvBlockReader();
  CsvBlockReader(const CsvBlockReader&) = delete;
  CsvBlockReader& operator=(const CsvBlockReader&) = delete;

  // Makes the first step read `bytes` (at least 64) and each step after it
  // twice as many as the one before, up to `block_bytes`: a small first
  // block can be handed out, and worked on, while the larger ones after it
  // are read. Call before the first Next. Blocks still hold whole records
  // (a record longer than a step takes several steps, as it would anyway).
  void set_first_block_bytes(int64_t bytes);
  // Opens the file; returns false with "path: cannot open file: reason".
  bool Open(std::string* error);
  // Reads the next block. Returns false at the end of the file (error left
  // empty) or on failure ("path: cannot read file: reason", or a record or
  // field beyond the limits).
  bool Next(CsvBlock* block, std::string* error);
  // True when the file starts with a UTF-8 byte-order mark (known once Next
  // has returned a block).
  bool has_bom() const { return has_bom_; }
  // Bytes read from the file so far.
  int64_t num_bytes_read() const { return num_bytes_read_; }

 private:
  // Appends up to one block of the file to the buffer; sets at_eof_.
  bool Fill(std::string* error);
  // Where the first record starts in the buffer (which begins the file):
  // after a byte-order mark and blank lines. Counts their LFs in *num_lines.
  size_t SkipLeadingBlankLines(std::string_view data, int64_t* num_lines);
  // The error for a record in `pending` (no record end in sight) that is
  // already longer than the limit.
  std::string BeyondLimitError(std::string_view pending) const;

  // A buffer of text, not zero-filled when allocated.
  struct Buffer {
    std::unique_ptr<char[]> bytes;
    size_t capacity = 0;
  };

  std::string path_;
  size_t block_bytes_;
  size_t step_bytes_;  // bytes the next Fill reads (up to block_bytes_)
  ReadLimits limits_;
  char delimiter_;
  int fd_ = -1;
  // Calls of Next alternate between the two, so the text of the block
  // handed out last stays valid while the next one is read.
  Buffer buffers_[2];
  int current_ = 0;       // the buffer being filled or handed out
  size_t size_ = 0;       // bytes of the current buffer holding file data
  size_t consumed_ = 0;   // bytes at the front handed out by the last call
  int64_t line_ = 1;      // line number of the current buffer's byte consumed_
  bool started_ = false;  // the first record has been found
  bool at_eof_ = false;
  bool done_ = false;
  bool has_bom_ = false;
  int64_t num_bytes_read_ = 0;
};

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

// Reads a whole file of any kind (regular file, pipe, device) into
// `contents`, byte for byte, in pieces, stopping once it holds more than
// `max_bytes`: the size the system reports is not trusted (it is 0 for
// pipes and devices). Returns false and sets `error` on failure, e.g.
// "prices.csv: cannot open file: No such file or directory" (strerror's
// text) or, beyond the limit, "items.csv: file larger than 256 MiB " +
// `advice` (e.g. LimitAdvice("limits.max_file_bytes")).
bool ReadWholeFile(const std::string& path, int64_t max_bytes, std::string_view advice,
                   std::string* contents, std::string* error);

// Writes `contents` to `path` through the temporary file "<path>.tmp.<pid>" in
// the same folder, flushed to disk and renamed into place, so readers never
// see a partial file. On failure removes the temporary file, leaves `path`
// untouched and sets `error` to a message naming `path` and the reason.
bool WriteFileAtomically(const std::string& path, std::string_view contents, std::string* error);

}  // namespace paritas

#endif  // PARITAS_BASE_CSV_H_
