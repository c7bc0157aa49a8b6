// Deflation streams: one rolling buffer holds a block of the input plus the
// incomplete record carried from the block before, so memory is bounded by
// the block size. Each record's raw text is copied verbatim and the new
// fields appended before its own line terminator; parities are looked up in
// a dense node x region table through interned codes, with the last region
// and node remembered because micro-data usually come sorted by region.
#include "paritas/use/deflation.h"

#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <functional>
#include <limits>
#include <set>
#include <system_error>
#include <unordered_map>

#include "base/not_a_number.h"
#include "paritas/base/code_table.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "paritas/output/run_folder.h"
#include "paritas/output/run_record.h"
#include "use/run_tables.h"

namespace paritas {
namespace {

using internal::ListedNames;
using internal::ParseIntervalBounds;
using internal::ParseParity;
using internal::ReadRunTable;
using internal::ReadRunTableAt;
using internal::SameRunSettings;
using internal::SensitivityAdvice;
using internal::TableRow;

constexpr std::string_view kUtf8Bom = "\xEF\xBB\xBF";
// Output and rejected text is handed to the file once this much has built up.
constexpr size_t kFlushBytes = 1 << 20;

// A money amount: the shortest text that reads back exactly, or rounded to
// `decimals` digits when the user asks for that.
void AppendAmount(double value, int decimals, std::string* out) {
  if (decimals < 0) {
    AppendShortest(value, out);
  } else {
    AppendFixed(value, decimals, out);
  }
}

double SecondsSince(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

std::string ErrnoText(int error_number) {
  return std::error_code(error_number, std::generic_category()).message();
}

std::string DidYouMean(std::string_view word, const std::vector<std::string>& candidates) {
  const std::string nearest = NearestName(word, candidates);
  return nearest.empty() ? "" : "; did you mean '" + nearest + "'?";
}

// Parities (and optional intervals) by node and region, reference = 100.
class ParityTable {
 public:
  CodeTable nodes;
  CodeTable regions;
  // Per cell (a node and region pair of parities.csv): NaN = no parity.
  std::vector<double> parity;
  std::vector<double> lower;  // bounds of the parity's interval
  std::vector<double> upper;
  std::vector<int64_t> line;  // where parities.csv states the pair
  std::string path;
  std::string interval_path;

  // Returns the cell of a pair, or -1.
  int64_t Find(int node, int region) const {
    if (!dense_.empty()) return dense_[static_cast<size_t>(node) * regions.size() + region];
    const auto it = by_pair_.find(Key(node, region));
    return it == by_pair_.end() ? -1 : it->second;
  }

  // Adds a cell for a new pair; returns its index, or -1 when the pair
  // already has one (*existing is then that cell).
  int64_t Add(int node, int region, int64_t* existing) {
    const int64_t cell = static_cast<int64_t>(parity.size());
    const auto [it, inserted] = by_pair_.emplace(Key(node, region), cell);
    if (!inserted) {
      *existing = it->second;
      return -1;
    }
    parity.push_back(kNaN);
    return cell;
  }

  // Once every pair is known: a complete table (every node for every
  // region, as compute writes) is looked up by position, which costs no
  // hashing per row deflated; a sparse one stays hashed, since nodes x
  // regions cells could be far more than memory holds.
  void Finish() {
    const uint64_t num_pairs = static_cast<uint64_t>(nodes.size()) * regions.size();
    if (num_pairs > 4 * parity.size() + 4096) return;
    dense_.assign(num_pairs, -1);
    for (const auto& [key, cell] : by_pair_) {
      dense_[static_cast<size_t>(key >> 32) * regions.size() + (key & 0xffffffffu)] = cell;
    }
    by_pair_ = {};
  }

 private:
  static uint64_t Key(int node, int region) {
    return (static_cast<uint64_t>(node) << 32) | static_cast<uint32_t>(region);
  }

  std::unordered_map<uint64_t, int64_t> by_pair_;
  std::vector<int64_t> dense_;
};

// Reads parities.csv of the parities folder into `table`.
bool ReadParityValues(const DeflateOptions& options, ParityTable* table, std::string* error) {
  namespace fs = std::filesystem;
  table->path = (fs::path(options.parities_dir) / "parities.csv").string();
  const auto handle = [table](const TableRow& row, std::string* message) {
    const int node = table->nodes.Intern(row.fields[0]);
    const int region = table->regions.Intern(row.fields[1]);
    int64_t first = -1;
    const int64_t cell = table->Add(node, region, &first);
    if (cell < 0) {
      *message = LocatedMessage(table->path, row.line, row.columns[0],
                                "duplicate row for node " + QuoteValue(row.fields[0]) +
                                    " and region " + QuoteValue(row.fields[1]) +
                                    " (first at line " + std::to_string(table->line[first]) + ")");
      return false;
    }
    table->line.push_back(row.line);
    return ParseParity(table->path, row.line, row.columns[2], "parity", row.fields[2],
                       &table->parity[cell], message);
  };
  if (!ReadRunTable(options.parities_dir, "parities.csv", options.limits,
                    {"node", "region", "parity"}, {true, true, true}, handle, error)) {
    return false;
  }
  if (table->parity.empty()) {
    *error = table->path + ": no data rows (only a header)";
    return false;
  }
  table->Finish();
  return true;
}

// Reads the intervals of the sensitivity run (sensitivity/bootstrap.csv)
// into `table`, whose parities are already read.
bool ReadIntervals(const DeflateOptions& options, ParityTable* table, std::string* error) {
  namespace fs = std::filesystem;
  table->interval_path =
      (fs::path(options.parities_dir) / "sensitivity" / "bootstrap.csv").string();
  std::error_code ec;
  if (!fs::exists(table->interval_path, ec)) {
    *error = "no parity intervals: " + table->interval_path + " does not exist; " +
             SensitivityAdvice(options.parities_dir);
    return false;
  }
  if (!SameRunSettings(options.parities_dir, error)) return false;
  table->lower.assign(table->parity.size(), kNaN);
  table->upper.assign(table->parity.size(), kNaN);
  const auto handle = [table](const TableRow& row, std::string* message) {
    double lower = kNaN, upper = kNaN;
    if (!ParseIntervalBounds(table->interval_path, row, 2, 3, &lower, &upper, message)) return false;
    // Intervals of pairs without parities cannot be used.
    const int node = table->nodes.Find(row.fields[0]);
    const int region = table->regions.Find(row.fields[1]);
    const int64_t cell = node < 0 || region < 0 ? -1 : table->Find(node, region);
    if (cell >= 0) {
      table->lower[cell] = lower;
      table->upper[cell] = upper;
    }
    return true;
  };
  return ReadRunTableAt(table->interval_path, options.limits, {"node", "region", "lower", "upper"},
                        {true, true, true, true}, handle, error);
}

bool ReadParities(const DeflateOptions& options, ParityTable* table, std::string* error) {
  if (!ReadParityValues(options, table, error)) return false;
  return !options.include_interval || ReadIntervals(options, table, error);
}

// A file written under a temporary name and renamed into place by Commit.
class AtomicFile {
 public:
  ~AtomicFile() { Abandon(); }

  bool Open(const std::string& path, std::string* error) {
    path_ = path;
    // Unique per file, so two outputs of one run never share a temporary name.
    static std::atomic<int> counter{0};
    temp_path_ = path + ".tmp." + std::to_string(::getpid()) + "." + std::to_string(counter++);
    std::error_code ec;
    const std::filesystem::path parent = std::filesystem::path(path).parent_path();
    if (!parent.empty()) std::filesystem::create_directories(parent, ec);
    stream_ = std::fopen(temp_path_.c_str(), "wb");
    if (stream_ == nullptr) {
      *error = path + ": cannot create temporary file '" + temp_path_ + "': " + ErrnoText(errno);
      return false;
    }
    return true;
  }

  // Writes and clears `text`.
  bool Write(std::string* text, std::string* error) {
    if (!text->empty() && std::fwrite(text->data(), 1, text->size(), stream_) != text->size()) {
      *error = path_ + ": cannot write temporary file '" + temp_path_ + "': " + ErrnoText(errno);
      return false;
    }
    text->clear();
    return true;
  }

  // Flushes to disk before the rename, so a crash leaves the old file or the
  // whole new one, never a partial file under the final name.
  bool Commit(std::string* error) {
    if (std::fflush(stream_) != 0 || ::fsync(::fileno(stream_)) != 0) {
      *error = path_ + ": cannot write temporary file '" + temp_path_ + "': " + ErrnoText(errno);
      return false;
    }
    const int close_result = std::fclose(stream_);
    stream_ = nullptr;
    if (close_result != 0) {
      *error = path_ + ": cannot write temporary file '" + temp_path_ + "': " + ErrnoText(errno);
      return false;
    }
    if (std::rename(temp_path_.c_str(), path_.c_str()) != 0) {
      *error = path_ + ": cannot rename temporary file '" + temp_path_ +
               "' into place: " + ErrnoText(errno);
      return false;
    }
    temp_path_.clear();
    return true;
  }

  void Abandon() {
    if (stream_ != nullptr) {
      std::fclose(stream_);
      stream_ = nullptr;
    }
    if (!temp_path_.empty()) {
      std::remove(temp_path_.c_str());
      temp_path_.clear();
    }
  }

 private:
  std::string path_;
  std::string temp_path_;
  std::FILE* stream_ = nullptr;
};

class Deflater {
 public:
  // `fixed_node` is the node of every row, or -1 when a column names it.
  Deflater(const DeflateOptions& options, const ParityTable& table, int fixed_node,
           DeflateSummary* summary)
      : options_(options),
        table_(table),
        summary_(summary),
        keep_all_(options.invalid_rows == InvalidRowPolicy::kSkip),
        fixed_node_(fixed_node) {}

  bool Run(std::string* error) {
    CsvBlockReader blocks(options_.input_path, options_.block_bytes, options_.limits);
    if (!blocks.Open(error) || !output_.Open(options_.output_path, error)) return false;
    if (keep_all_ && !rejected_file_.Open(summary_->rejected_path, error)) return false;
    rejected_text_ = "file,line,reason,raw\n";
    const bool ok = ReadBlocks(&blocks, error);
    summary_->num_bytes_read = blocks.num_bytes_read();
    if (!ok) return false;
    if (summary_->num_rows_rejected > 0 && !keep_all_)
      return true;  // Caller reports; nothing written.
    if (!output_.Write(&out_, error) || !output_.Commit(error)) return false;
    if (keep_all_ &&
        (!rejected_file_.Write(&rejected_text_, error) || !rejected_file_.Commit(error))) {
      return false;
    }
    return true;
  }

 private:
  // The blocks hold whole records, at most one block and one record of
  // text at a time (CsvBlockReader); the first holds the header whole.
  bool ReadBlocks(CsvBlockReader* blocks, std::string* error) {
    bool header_done = false;
    CsvBlock block;
    std::string read_error;
    while (blocks->Next(&block, &read_error)) {
      std::string_view data = block.records;
      int64_t line = block.first_line;
      if (!header_done && !data.empty()) {
        CsvReader reader(data, line, /*skip_bom=*/false);
        reader.set_limits(options_.limits);
        if (!ReadHeader(data, &reader, blocks->has_bom(), error)) return false;
        data.remove_prefix(reader.position());
        line = reader.line();
        header_done = true;
      }
      if (!ProcessBlock(data, &line, error)) return false;
    }
    if (!read_error.empty()) {
      *error = read_error;
      return false;
    }
    if (!header_done) {
      *error = EmptyFileMessage();
      return false;
    }
    return true;
  }

  std::string EmptyFileMessage() const {
    return options_.input_path + ": file is empty (expected a header row with columns " +
           options_.region_column + ", " + JoinNames(options_.value_columns) + ")";
  }

  // Finds the columns and writes the extended header.
  bool ReadHeader(std::string_view data, CsvReader* reader, bool has_bom, std::string* error) {
    CsvRecord header;
    if (!reader->Next(&header)) {
      *error = reader->error().empty() ? EmptyFileMessage()
                                       : options_.input_path + ":" + reader->error();
      return false;
    }
    int64_t bad_line = 0;
    int bad_field = 0;
    if (FindInvalidUtf8(header, ',', &bad_line, &bad_field)) {
      *error = LocatedMessage(options_.input_path, bad_line, bad_field,
                              Utf8Problem("column name", header.fields[bad_field - 1]));
      return false;
    }
    if (FindMisplacedByteOrderMark(header, &bad_field)) {
      *error = LocatedMessage(options_.input_path, header.line, bad_field,
                              MisplacedByteOrderMarkProblem(header.fields[bad_field - 1]));
      return false;
    }
    const CsvHeader names(header.fields);
    num_fields_ = header.fields.size();
    const std::string where = options_.input_path + ":" + std::to_string(header.line) + ": ";
    if (!FindColumns(names, where, error) || !AddColumns(names, where, error)) return false;
    WriteHeader(data, header, reader->position(), has_bom);
    return true;
  }

  // Finds the region, node and value columns.
  bool FindColumns(const CsvHeader& names, const std::string& where, std::string* error) {
    auto find = [&](const std::string& name, int* column) {
      *column = names.Find(name);
      if (*column < 0) {
        *error = where + "missing column '" + name + "' (found: " + ListedNames(names.names()) +
                 ")" + DidYouMean(name, names.names());
        return false;
      }
      for (const std::string& duplicate : names.duplicates()) {
        if (duplicate == Trim(name)) {
          *error = where + "column '" + name + "' appears more than once";
          return false;
        }
      }
      return true;
    };
    if (!find(options_.region_column, &region_column_)) return false;
    if (!options_.node_column.empty() && !find(options_.node_column, &node_column_)) return false;
    value_columns_.resize(options_.value_columns.size());
    for (size_t k = 0; k < value_columns_.size(); ++k) {
      if (!find(options_.value_columns[k], &value_columns_[k])) return false;
    }
    return true;
  }

  // Names the columns to add in summary_->columns_added; none may exist.
  bool AddColumns(const CsvHeader& names, const std::string& where, std::string* error) {
    std::vector<std::string>& added = summary_->columns_added;
    for (const std::string& name : options_.value_columns)
      added.push_back(std::string(Trim(name)) + "_real");
    if (options_.include_parity) added.push_back("parity");
    if (options_.include_interval) {
      for (const std::string& name : options_.value_columns) {
        added.push_back(std::string(Trim(name)) + "_real_lower");
        added.push_back(std::string(Trim(name)) + "_real_upper");
      }
    }
    for (const std::string& name : added) {
      if (names.Find(name) >= 0) {
        *error =
            where + "column '" + name + "' already exists; rename it or choose other value columns";
        return false;
      }
    }
    return true;
  }

  // Writes the header with the added columns (after the input's byte-order
  // mark, if any); `end` is where the header's line terminator ends in `data`.
  void WriteHeader(std::string_view data, const CsvRecord& header, size_t end, bool has_bom) {
    // The record's own line end is kept; a last record without one gets the
    // header's, so the output ends with a line end.
    const size_t raw_end = header.offset + header.raw.size();
    default_terminator_ = std::string(data.substr(raw_end, end - raw_end));
    if (default_terminator_.empty() || default_terminator_ == "\r") default_terminator_ = "\n";
    if (has_bom) out_.append(kUtf8Bom);
    out_.append(header.raw);
    for (const std::string& name : summary_->columns_added) {
      out_ += ',';
      AppendCsvField(name, &out_);
    }
    out_.append(data.substr(raw_end, end - raw_end));
    if (end == raw_end) out_ += default_terminator_;
  }

  void Reject(const CsvRecord& record, int column, const std::string& what) {
    ++summary_->num_rows_rejected;
    if (!keep_all_) {
      writing_ = false;
      out_.clear();
    }
    RejectedRow row;
    row.file = options_.input_path;
    row.line = record.line;
    row.reason = LocatedMessage(options_.input_path, record.line, column, what);
    if (keep_all_) {
      AppendCsvField(row.file, &rejected_text_);
      rejected_text_ += ',';
      rejected_text_ += std::to_string(row.line);
      rejected_text_ += ',';
      AppendCsvField(row.reason, &rejected_text_);
      rejected_text_ += ',';
      AppendCsvField(record.raw, &rejected_text_);
      rejected_text_ += '\n';
    }
    if (static_cast<int>(summary_->rejected_rows.size()) < options_.max_reported_rows) {
      row.raw = std::string(record.raw);
      summary_->rejected_rows.push_back(std::move(row));
    }
  }

  // The last code looked up in one column, so that runs of equal codes cost
  // one comparison, and the "did you mean" of each unknown code, so that a
  // column of bad codes costs one search per distinct code.
  struct LastCode {
    int index = -1;
    std::string text;
    std::vector<std::string> candidates;  // the table's codes, once needed
    std::unordered_map<std::string, std::string> suggestions;
  };

  static const std::string& Suggestion(std::string_view code, const CodeTable& table,
                                       LastCode* last) {
    // NearestName suggests nothing for a word over 256 bytes; 100,000 of
    // those remembered hold at most 25 MB.
    static const std::string kNone;
    if (code.size() > 256) return kNone;
    if (last->candidates.empty()) last->candidates = table.Codes();
    constexpr size_t kMaxRemembered = 100000;
    if (last->suggestions.size() >= kMaxRemembered) last->suggestions.clear();
    const auto [it, inserted] = last->suggestions.try_emplace(std::string(code));
    if (inserted) it->second = DidYouMean(code, last->candidates);
    return it->second;
  }

  // Returns the index of the code in `column` in `table`, or -1 after
  // rejecting the record; `what` names the table in the message.
  int LookUp(const CsvRecord& record, int column, const std::string& column_name, const CodeTable& table,
             const char* what, LastCode* last) {
    const std::string_view text = record.fields[column];
    if (last->index >= 0 && text == last->text) return last->index;
    const std::string_view code = Trim(text);
    const int index = table.Find(code);
    if (index < 0) {
      Reject(record, column + 1,
             code.empty() ? column_name + " is empty"
                          : column_name + " " + QuoteValue(code) + " is " + what + " " +
                                table_.path + Suggestion(code, table, last));
      return -1;
    }
    last->index = index;
    last->text.assign(text);
    return index;
  }

  // Checks the fields deflate reads (region, node, values); the others are
  // copied through as they are. Returns false after rejecting the record.
  bool ReadFieldsAreUtf8(const CsvRecord& record) {
    auto check = [&](int column, const std::string& name) {
      if (column < 0 || FindInvalidUtf8(record.fields[column]) == std::string_view::npos) {
        return true;
      }
      Reject(record, column + 1, Utf8Problem(Trim(name), record.fields[column]));
      return false;
    };
    if (!check(region_column_, options_.region_column)) return false;
    if (!check(node_column_, options_.node_column)) return false;
    for (size_t k = 0; k < value_columns_.size(); ++k) {
      if (!check(value_columns_[k], options_.value_columns[k])) return false;
    }
    return true;
  }

  // Returns the node index of the record, or -1 after rejecting it.
  int RowNode(const CsvRecord& record) {
    if (node_column_ < 0) return fixed_node_;
    return LookUp(record, node_column_, options_.node_column, table_.nodes, "not a node in", &last_node_);
  }

  // Returns the region index of the record, or -1 after rejecting it.
  int RowRegion(const CsvRecord& record) {
    return LookUp(record, region_column_, options_.region_column, table_.regions, "not a region of",
                  &last_region_);
  }

  // Looks up the record's parity: sets *cell and *parity, or returns false
  // after rejecting the record.
  bool RowParity(const CsvRecord& record, size_t* cell, double* parity) {
    const int node = RowNode(record);
    if (node < 0) return false;
    const int region = RowRegion(record);
    if (region < 0) return false;
    const int64_t found = table_.Find(node, region);
    *cell = found < 0 ? 0 : static_cast<size_t>(found);
    *parity = found < 0 ? kNaN : table_.parity[*cell];
    if (std::isnan(*parity)) {
      Reject(record, region_column_ + 1,
             options_.region_column + " " + QuoteValue(table_.regions.Code(region)) +
                 " has no parity for node " + QuoteValue(table_.nodes.Code(node)) + " in " +
                 table_.path);
      return false;
    }
    return true;
  }

  // Parses the record's values into values_; returns false after rejecting
  // the record.
  bool ParseValues(const CsvRecord& record) {
    for (size_t k = 0; k < value_columns_.size(); ++k) {
      const std::string_view text = record.fields[value_columns_[k]];
      const NumberStatus status = ParseNumber(text, &values_[k]);
      if (status != NumberStatus::kOk) {
        Reject(record, value_columns_[k] + 1,
               NumberProblem(status, options_.value_columns[k], text, '.', ""));
        return false;
      }
      if (values_[k] < 0 && !options_.allow_negative) {
        Reject(record, value_columns_[k] + 1,
               options_.value_columns[k] + " " + QuoteValue(Trim(text)) +
                   " is negative (negative values need --allow-negative)");
        return false;
      }
    }
    return true;
  }

  // Sets real_ to the record's real values (and, with intervals, their
  // bounds: real_[3k] the value, real_[3k + 1] and real_[3k + 2] the lower
  // and upper bound, NaN where the region has no interval). Rejects the
  // record when one of them is not a finite number (a value near the
  // largest a double holds, at a parity below 100, overflows) and returns
  // false.
  bool RealValues(const CsvRecord& record, size_t cell, double parity) {
    const size_t num_values = value_columns_.size();
    real_.resize(3 * num_values);
    const double lower = options_.include_interval ? table_.lower[cell] : kNaN;
    const double upper = options_.include_interval ? table_.upper[cell] : kNaN;
    for (size_t k = 0; k < num_values; ++k) {
      const double value = values_[k];
      real_[3 * k] = value / (parity / 100.0);
      bool finite = std::isfinite(real_[3 * k]);
      if (options_.include_interval) {  // the bounds' divisions only when written
        // A dearer bound gives the smaller real value; for a negative value
        // the order flips.
        const double a = value / (upper / 100.0), b = value / (lower / 100.0);
        real_[3 * k + 1] = std::min(a, b);
        real_[3 * k + 2] = std::max(a, b);
        // Both bounds or neither (ParseIntervalBounds).
        finite = finite && (std::isnan(upper) || (std::isfinite(a) && std::isfinite(b)));
      }
      if (finite) continue;
      RejectBeyondDouble(record, k, parity, std::isfinite(real_[3 * k]));
      return false;
    }
    return true;
  }

  // Rejects the record whose k-th value overflows in reference prices. Out
  // of line: the row loop stays as lean as before the check.
  // `at_bound`: the value at the parity is finite, at a bound it is not.
  [[gnu::noinline, gnu::cold]] void RejectBeyondDouble(const CsvRecord& record, size_t k, double parity,
                                                       bool at_bound) {
    std::string shown;
    AppendShortest(parity, &shown);
    Reject(record, value_columns_[k] + 1,
           options_.value_columns[k] + " " + QuoteValue(Trim(record.fields[value_columns_[k]])) +
               " in reference prices (at " + (at_bound ? "a bound of the interval of parity " : "parity ") +
               shown + ") is beyond the largest number a double holds (about 1.8e308)");
  }

  // Appends the record with its real values (real_; and parity and
  // interval) and `terminator`, or the default one when the record has none.
  void AppendRow(const CsvRecord& record, double parity, std::string_view terminator) {
    const size_t num_values = value_columns_.size();
    out_.append(record.raw);
    for (size_t k = 0; k < num_values; ++k) {
      out_ += ',';
      AppendAmount(real_[3 * k], options_.decimals, &out_);
    }
    if (options_.include_parity) {
      out_ += ',';
      AppendShortest(parity, &out_);
    }
    if (options_.include_interval) {
      for (size_t k = 0; k < num_values; ++k) {
        out_ += ',';
        AppendAmount(real_[3 * k + 1], options_.decimals, &out_);
        out_ += ',';
        AppendAmount(real_[3 * k + 2], options_.decimals, &out_);
      }
    }
    if (terminator.empty()) {
      out_ += default_terminator_;
    } else {
      out_.append(terminator);
    }
  }

  bool ProcessBlock(std::string_view data, int64_t* line, std::string* error) {
    CsvReader reader(data, *line, /*skip_bom=*/false);
    reader.set_limits(options_.limits);
    CsvRecord record;
    values_.resize(value_columns_.size());
    while (reader.Next(&record)) {
      ++summary_->num_rows_read;
      if (record.fields.size() != num_fields_) {
        const size_t found = record.fields.size();
        // The column is the first field missing, or the first one too many.
        Reject(record, static_cast<int>(std::min(found, num_fields_)) + 1,
               "row has " + std::to_string(found) + " field" + (found == 1 ? "" : "s") +
                   ", the header has " + std::to_string(num_fields_));
        continue;
      }
      if (!ReadFieldsAreUtf8(record)) continue;
      size_t cell = 0;
      double parity = kNaN;
      if (!RowParity(record, &cell, &parity)) continue;
      if (!ParseValues(record) || !RealValues(record, cell, parity) || !writing_) continue;
      const size_t raw_end = record.offset + record.raw.size();
      AppendRow(record, parity, data.substr(raw_end, reader.position() - raw_end));
      ++summary_->num_rows_written;
      if (out_.size() >= kFlushBytes && !output_.Write(&out_, error)) return false;
      if (rejected_text_.size() >= kFlushBytes && !rejected_file_.Write(&rejected_text_, error))
        return false;
    }
    if (!reader.error().empty()) {
      *error = options_.input_path + ":" + reader.error();
      return false;
    }
    *line = reader.line();
    if (!writing_) out_.clear();
    if (!output_.Write(&out_, error)) return false;
    if (keep_all_ && !rejected_file_.Write(&rejected_text_, error)) return false;
    return true;
  }

  const DeflateOptions& options_;
  const ParityTable& table_;
  DeflateSummary* summary_;
  // False once a row is rejected under kStop: the rest is only checked.
  bool writing_ = true;
  const bool keep_all_;
  const int fixed_node_;
  AtomicFile output_;
  AtomicFile rejected_file_;
  std::string out_;
  std::string rejected_text_;
  std::string default_terminator_ = "\n";
  size_t num_fields_ = 0;
  int region_column_ = -1;
  int node_column_ = -1;
  std::vector<int> value_columns_;
  std::vector<double> values_;
  std::vector<double> real_;  // RealValues'
  LastCode last_region_;
  LastCode last_node_;
};

}  // namespace

bool DeflateOptions::IsValid(std::string* error) const {
  auto fail = [&](const std::string& message) {
    *error = message;
    return false;
  };
  if (parities_dir.empty()) return fail("no parities folder given (the output folder of compute)");
  if (input_path.empty()) return fail("no input file given");
  if (output_path.empty()) return fail("no output file given");
  if (Trim(region_column).empty()) return fail("the region column name is empty");
  if (value_columns.empty()) return fail("no value column given (the money columns to deflate)");
  std::set<std::string_view> seen = {Trim(region_column)};
  if (!node_column.empty()) {
    if (!node.empty()) return fail("give either a node for all rows or a node column, not both");
    if (!seen.insert(Trim(node_column)).second) {
      return fail("the node column '" + node_column + "' is also the region column");
    }
  }
  for (const std::string& name : value_columns) {
    if (Trim(name).empty()) return fail("a value column name is empty");
    if (!seen.insert(Trim(name)).second) {
      return fail("value column '" + name +
                  "' is given twice or is also the region or node column");
    }
  }
  if (max_reported_rows < 0) return fail("max_reported_rows is negative");
  if (decimals < -1 || decimals > 17) return fail("decimals must be -1 (exact) or between 0 and 17");
  if (block_bytes < (1 << 10)) return fail("block_bytes must be at least 1024");
  if (!limits.IsValid(error)) return false;
  // Every output against every input and the other output, as files.
  namespace fs = std::filesystem;
  PathGuard guard;
  guard.AddInput(input_path, "input file");
  guard.AddInput((fs::path(parities_dir) / "parities.csv").string(), "parities file");
  guard.AddInput((fs::path(parities_dir) / "run.json").string(), "run record");
  if (include_interval) {
    guard.AddInput((fs::path(parities_dir) / "sensitivity" / "bootstrap.csv").string(), "interval file");
    guard.AddInput((fs::path(parities_dir) / "sensitivity" / "run.json").string(), "sensitivity run record");
  }
  guard.AddOutputFile(output_path, "output file");
  if (invalid_rows == InvalidRowPolicy::kSkip) guard.AddOutputFile(RejectedPathUsed(), "rejected-rows file");
  return guard.Check(error);
}

std::string DeflateOptions::RejectedPathUsed() const {
  if (!rejected_path.empty()) return rejected_path;
  std::string stem = output_path;
  if (stem.size() >= 4 && ToLower(std::string_view(stem).substr(stem.size() - 4)) == ".csv") {
    stem.resize(stem.size() - 4);
  }
  return stem + "_rejected.csv";
}

std::string DeflateSummary::BriefReport() const {
  std::string out = "deflated " + FormatCount(num_rows_read) + " row" +
                    (num_rows_read == 1 ? "" : "s") + " of " + input_path;
  out += node_used.empty() ? " by the node of each row" : " by node '" + node_used + "'";
  out += ": " + FormatCount(num_rows_written) + " written, " + FormatCount(num_rows_rejected) +
         " rejected (" + FormatFixed(total_seconds, 2) + " s)";
  return out;
}

bool Deflate(const DeflateOptions& options, DeflateSummary* summary) {
  *summary = DeflateSummary();
  summary->input_path = options.input_path;
  const auto start = std::chrono::steady_clock::now();
  auto fail = [&](const std::string& message) {
    summary->outcome = DeflateOutcome::kInvalidInput;
    summary->message = message;
    summary->total_seconds = SecondsSince(start);
    return false;
  };
  std::string error;
  if (!options.IsValid(&error)) return fail(error);

  ParityTable table;
  if (!ReadParities(options, &table, &error)) return fail(error);
  int fixed_node = -1;
  if (options.node_column.empty()) {
    if (options.node.empty()) {
      fixed_node = 0;  // parities.csv lists the root first
    } else {
      fixed_node = table.nodes.Find(Trim(options.node));
      if (fixed_node < 0) {
        return fail("node '" + options.node + "' is not in " + table.path +
                    DidYouMean(options.node, table.nodes.Codes()));
      }
    }
    summary->node_used = std::string(table.nodes.Code(fixed_node));
  }
  summary->parities_seconds = SecondsSince(start);

  if (options.invalid_rows == InvalidRowPolicy::kSkip)
    summary->rejected_path = options.RejectedPathUsed();
  const auto stream_start = std::chrono::steady_clock::now();
  Deflater deflater(options, table, fixed_node, summary);
  const bool ok = deflater.Run(&error);
  summary->deflate_seconds = SecondsSince(stream_start);
  if (!ok) {
    summary->num_rows_written = 0;
    return fail(error);
  }
  if (summary->num_rows_rejected > 0 && options.invalid_rows == InvalidRowPolicy::kStop) {
    summary->num_rows_written = 0;
    const int64_t shown = static_cast<int64_t>(summary->rejected_rows.size());
    std::string message = FormatCount(summary->num_rows_rejected) + " invalid row" +
                          (summary->num_rows_rejected == 1 ? "" : "s") + " in " +
                          options.input_path;
    if (shown < summary->num_rows_rejected)
      message += " (the first " + std::to_string(shown) + " shown)";
    message += "; nothing written; fix them, or pass --invalid-rows skip to leave them out";
    return fail(message);
  }
  summary->outcome = DeflateOutcome::kOk;
  summary->message = "ok";
  summary->total_seconds = SecondsSince(start);
  return true;
}

}  // namespace paritas
