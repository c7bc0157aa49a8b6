// The properties compare two ways of doing one thing (whole buffer against
// chunks or blocks, one block size against another, skip against stop)
// rather than outputs against hand-written expectations, so they hold for any
// input a fuzzer makes. Differences are described by the first mismatch,
// with bytes shown escaped so that a message stays on one line.
#include "properties.h"

#include <stdlib.h>
#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <exception>
#include <filesystem>
#include <map>
#include <set>
#include <system_error>

#include "paritas/base/csv.h"
#include "paritas/base/read_limits.h"
#include "paritas/base/text.h"
#include "paritas/survey/classification.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/use/carry_forward.h"
#include "paritas/use/deflation.h"

namespace paritas::fuzz {
namespace {

namespace fs = std::filesystem;

// Returns `text` with bytes outside printable ASCII (and the backslash) as
// \xNN, cut after `limit` bytes.
std::string Show(std::string_view text, size_t limit = 160) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string out = "\"";
  for (size_t i = 0; i < text.size() && i < limit; ++i) {
    const unsigned char c = static_cast<unsigned char>(text[i]);
    if (c >= 0x20 && c < 0x7f && c != '\\' && c != '"') {
      out += static_cast<char>(c);
    } else {
      out += "\\x";
      out += kHex[c >> 4];
      out += kHex[c & 15];
    }
  }
  out += text.size() > limit ? "\"..." : "\"";
  return out;
}

std::string Str(int64_t value) { return std::to_string(value); }

bool WriteFile(const std::string& path, std::string_view contents, std::string* error) {
  return WriteFileAtomically(path, contents, error);
}

std::string ReadFileOrEmpty(const std::string& path) {
  std::string contents, error;
  if (!ReadWholeFile(path, ReadLimits().max_file_bytes, "", &contents, &error)) return "";
  return contents;
}

bool SameDouble(double a, double b) {
  return (std::isnan(a) && std::isnan(b)) || std::memcmp(&a, &b, sizeof a) == 0;
}

// ---------------------------------------------------------------------------
// CSV

struct Record {
  std::vector<std::string> fields;
  int64_t line = 0;
  int64_t offset = 0;
  std::string raw;
  bool operator==(const Record&) const = default;
};

struct Reading {
  std::vector<Record> records;
  std::string error;
};

std::string ShowRecord(const Record& record) {
  std::string out = "line " + Str(record.line) + " offset " + Str(record.offset) + " fields [";
  for (size_t i = 0; i < record.fields.size(); ++i)
    out += (i ? "|" : "") + Show(record.fields[i], 40);
  return out + "] raw " + Show(record.raw, 60);
}

// Appends the records of `data` to `reading`, offsets made absolute by adding
// `base`. Returns false after a malformed record; `end_line` gets the line of
// the next byte to read.
bool ReadInto(std::string_view data, int64_t first_line, bool skip_bom, size_t base,
              Reading* reading, int64_t* end_line = nullptr) {
  CsvReader reader(data, first_line, skip_bom);
  CsvRecord record;
  while (reader.Next(&record)) {
    Record copy;
    copy.fields.assign(record.fields.begin(), record.fields.end());
    copy.line = record.line;
    copy.offset = record.offset + static_cast<int64_t>(base);
    copy.raw = std::string(record.raw);
    reading->records.push_back(std::move(copy));
  }
  reading->error = reader.error();
  if (end_line != nullptr) *end_line = reader.line();
  return reader.error().empty();
}

// Returns "" when both readings hold the same records and error, else the
// first difference.
std::string Difference(const Reading& expected, const Reading& actual) {
  const size_t n = std::min(expected.records.size(), actual.records.size());
  for (size_t i = 0; i < n; ++i) {
    if (!(expected.records[i] == actual.records[i])) {
      return "record " + Str(i) + " is " + ShowRecord(actual.records[i]) + ", expected " +
             ShowRecord(expected.records[i]);
    }
  }
  if (expected.records.size() != actual.records.size()) {
    const Record& extra = expected.records.size() > n ? expected.records[n] : actual.records[n];
    return Str(actual.records.size()) + " records instead of " + Str(expected.records.size()) +
           " (first unmatched: " + ShowRecord(extra) + ")";
  }
  if (expected.error != actual.error) {
    return "error " + Show(actual.error) + " instead of " + Show(expected.error);
  }
  return "";
}

std::string CheckSplit(std::string_view data, const Reading& whole) {
  for (int num_chunks : {2, 3, 4, 7, 16, 61}) {
    std::vector<int64_t> first_lines;
    const std::vector<size_t> starts = SplitAtRecordBoundaries(data, num_chunks, 1, &first_lines);
    std::string where = "SplitAtRecordBoundaries into " + Str(num_chunks) + " chunks at {";
    for (size_t i = 0; i < starts.size(); ++i) where += (i ? "," : "") + Str(starts[i]);
    where += "}: ";
    if (starts.empty() || starts[0] != 0 || static_cast<int>(starts.size()) > num_chunks ||
        first_lines.size() != starts.size()) {
      return where + "bad offsets";
    }
    for (size_t i = 1; i < starts.size(); ++i) {
      if (starts[i] <= starts[i - 1] || starts[i] >= data.size()) {
        return where + "offsets not strictly increasing below the size";
      }
      if (data[starts[i] - 1] != '\n') return where + "a chunk does not start after a line feed";
      const int64_t line = 1 + std::count(data.begin(), data.begin() + starts[i], '\n');
      if (first_lines[i] != line) {
        return where + "chunk " + Str(i) + " starts on line " + Str(first_lines[i]) +
               ", expected " + Str(line);
      }
    }
    Reading chunked;
    for (size_t i = 0; i < starts.size(); ++i) {
      const size_t end = i + 1 < starts.size() ? starts[i + 1] : data.size();
      if (!ReadInto(data.substr(starts[i], end - starts[i]), first_lines[i], i == 0, starts[i],
                    &chunked)) {
        break;
      }
    }
    if (std::string difference = Difference(whole, chunked); !difference.empty()) {
      return where + difference;
    }
  }
  return "";
}

// Reads as the streaming readers do: `block` more bytes at a time, parsing up
// to LastRecordEnd and carrying the incomplete tail.
std::string CheckBlocks(std::string_view data, const Reading& whole) {
  for (size_t block : {1, 2, 3, 7, 64, 1024}) {
    if (block * 256 < data.size()) continue;  // LastRecordEnd rescans a long carried tail
    Reading blocked;
    size_t consumed = 0, read_end = 0;
    int64_t line = 1;
    for (;;) {
      read_end = std::min(read_end + block, data.size());
      const bool at_eof = read_end == data.size();
      const std::string_view view = data.substr(consumed, read_end - consumed);
      const size_t end = at_eof ? view.size() : LastRecordEnd(view);
      if (!at_eof && end > 0 && view[end - 1] != '\n') {
        return "LastRecordEnd of " + Show(view) + " is " + Str(end) + ", not after a line feed";
      }
      if (end == 0 && !at_eof) continue;
      if (!ReadInto(view.substr(0, end), line, consumed == 0, consumed, &blocked, &line)) break;
      consumed += end;
      if (at_eof) break;
    }
    if (std::string difference = Difference(whole, blocked); !difference.empty()) {
      return "blocks of " + Str(block) + " bytes split by LastRecordEnd: " + difference;
    }
  }
  return "";
}

// Reads the file through CsvBlockReader, as the survey loader and deflate
// do, with blocks of 64 bytes (its smallest) and more. Blocks carry no byte
// offsets, so records are compared without them.
std::string CheckBlockReader(std::string_view data, const Reading& whole,
                             const std::string& work_dir) {
  const std::string path = work_dir + "/data.csv";
  std::string error;
  if (!WriteFileAtomically(path, data, &error)) return "cannot write the input: " + error;
  Reading expected = whole;
  for (Record& record : expected.records) record.offset = 0;
  for (int64_t block_bytes : {64, 100, 4096}) {
    CsvBlockReader reader(path, block_bytes, ReadLimits());
    if (!reader.Open(&error)) return error;
    Reading blocked;
    CsvBlock block;
    for (;;) {
      error.clear();
      if (!reader.Next(&block, &error)) {
        blocked.error = error;
        break;
      }
      if (!ReadInto(block.records, block.first_line, false, 0, &blocked)) break;
    }
    for (Record& record : blocked.records) record.offset = 0;
    if (std::string difference = Difference(expected, blocked); !difference.empty()) {
      return "CsvBlockReader with blocks of " + Str(block_bytes) + " bytes: " + difference;
    }
  }
  return "";
}

std::string CheckRoundTrip(const Reading& whole) {
  std::string written;
  std::vector<std::string_view> views;
  for (const Record& record : whole.records) {
    views.assign(record.fields.begin(), record.fields.end());
    AppendCsvRecord(views, &written);
  }
  Reading again;
  if (!ReadInto(written, 1, true, 0, &again)) {
    return "AppendCsvRecord wrote " + Show(written) + ", which reads back with error " +
           Show(again.error);
  }
  if (again.records.size() != whole.records.size()) {
    return "AppendCsvRecord wrote " + Show(written) + ", which reads back as " +
           Str(again.records.size()) + " records instead of " + Str(whole.records.size());
  }
  for (size_t i = 0; i < whole.records.size(); ++i) {
    if (again.records[i].fields != whole.records[i].fields) {
      return "record " + Str(i) + " written by AppendCsvRecord reads back as " +
             ShowRecord(again.records[i]) + ", expected " + ShowRecord(whole.records[i]);
    }
  }
  return "";
}

std::string CheckHeader(const Record& first) {
  const std::vector<std::string_view> views(first.fields.begin(), first.fields.end());
  const CsvHeader header(views);
  const std::vector<std::string>& names = header.names();
  if (names.size() != views.size()) return "CsvHeader lost names";
  std::map<std::string, int> count;
  for (size_t i = 0; i < names.size(); ++i) {
    const int expected =
        static_cast<int>(std::find(names.begin(), names.end(), names[i]) - names.begin());
    if (header.Find(names[i]) != expected) {
      return "CsvHeader::Find(" + Show(names[i]) + ") is " + Str(header.Find(names[i])) +
             ", expected " + Str(expected);
    }
    ++count[names[i]];
  }
  size_t num_duplicated = 0;
  for (const auto& [name, n] : count) num_duplicated += n > 1;
  if (header.duplicates().size() != num_duplicated) {
    return "CsvHeader lists " + Str(header.duplicates().size()) + " duplicated names, expected " +
           Str(num_duplicated);
  }
  return "";
}

// ---------------------------------------------------------------------------
// Classification

std::string TreeProblem(const Classification& tree) {
  const std::vector<ClassificationNode>& nodes = tree.nodes();
  const int n = static_cast<int>(nodes.size());
  if (n == 0) return "classification has no nodes";
  if (nodes[0].parent != -1 || nodes[0].depth != 0) return "node 0 is not a root";
  std::set<std::string> codes;
  std::vector<int> leaves;
  for (int i = 0; i < n; ++i) {
    const ClassificationNode& node = nodes[i];
    const std::string where = "node " + Str(i) + " " + Show(node.code) + ": ";
    if (node.code.empty()) return where + "empty code";
    if (!codes.insert(node.code).second) return where + "code listed twice";
    if (tree.FindNode(node.code) != i)
      return where + "FindNode gives " + Str(tree.FindNode(node.code));
    if (node.is_leaf != node.children.empty())
      return where + "leaf with children or empty aggregate";
    if (node.is_leaf) leaves.push_back(i);
    if (i > 0) {
      const int parent = node.parent;
      if (parent < 0 || parent >= i) return where + "parent " + Str(parent) + " not before it";
      if (nodes[parent].is_leaf) return where + "parent is a leaf";
      if (node.depth != nodes[parent].depth + 1) return where + "depth is not its parent's + 1";
      if (std::count(nodes[parent].children.begin(), nodes[parent].children.end(), i) != 1) {
        return where + "not listed once among its parent's children";
      }
      // Depth-first order: the nodes between a parent and its child lie below the parent.
      for (int k = parent + 1; k < i; ++k) {
        if (nodes[k].depth <= nodes[parent].depth) return where + "nodes not in depth-first order";
      }
    }
    for (int child : node.children) {
      if (child <= i || child >= n || nodes[child].parent != i)
        return where + "bad child " + Str(child);
    }
  }
  if (tree.headings() != leaves) return "headings() are not the leaves in node order";
  std::vector<int> heading_of(n, -1);
  for (size_t h = 0; h < leaves.size(); ++h) {
    heading_of[leaves[h]] = static_cast<int>(h);
    if (tree.FindHeading(nodes[leaves[h]].code) != static_cast<int>(h)) {
      return "FindHeading(" + Show(nodes[leaves[h]].code) + ") is not " + Str(h);
    }
  }
  for (int i = 0; i < n; ++i) {
    // A subtree in depth-first order is the run of deeper nodes after it.
    std::vector<int> expected;
    for (int k = i; k < n && (k == i || nodes[k].depth > nodes[i].depth); ++k) {
      if (heading_of[k] >= 0) expected.push_back(heading_of[k]);
    }
    if (nodes[i].headings != expected) {
      return "node " + Str(i) + " " + Show(nodes[i].code) + " lists the wrong headings";
    }
  }
  return "";
}

// ---------------------------------------------------------------------------
// Survey loader

// Splits at lines "%%" (the separator line itself dropped).
std::vector<std::string_view> Sections(std::string_view data) {
  std::vector<std::string_view> sections;
  size_t begin = 0;
  for (size_t p = 0; p + 3 <= data.size(); ++p) {
    if ((p == 0 || data[p - 1] == '\n') && data.substr(p, 3) == "%%\n") {
      sections.push_back(data.substr(begin, p - begin));
      begin = p + 3;
      p += 2;
    }
  }
  sections.push_back(data.substr(begin));
  return sections;
}

std::string ShowFile(const InputFileSummary& file) {
  return file.role + " " + Str(file.rows_read) + " read, " + Str(file.rows_used) + " used, " +
         Str(file.rows_rejected) + " rejected";
}

// rows_read = rows_used + rows_rejected per file, and every rejected row
// listed under kSkip.
std::string CheckCounts(const LoadSummary& summary, bool all_listed) {
  if (summary.outcome != LoadOutcome::kOk && summary.message.empty())
    return "failure without a message";
  int64_t num_rejected = 0;
  for (const InputFileSummary& file : summary.files) {
    if (file.rows_read != file.rows_used + file.rows_rejected || file.rows_used < 0 ||
        file.rows_rejected < 0) {
      return "counts do not add up: " + ShowFile(file) + " (" + summary.message + ")";
    }
    num_rejected += file.rows_rejected;
  }
  if (num_rejected != summary.num_rows_rejected) {
    return "files reject " + Str(num_rejected) + " rows, the summary " +
           Str(summary.num_rows_rejected);
  }
  if (all_listed && static_cast<int64_t>(summary.rejected_rows.size()) != num_rejected) {
    return "under skip " + Str(summary.rejected_rows.size()) + " rejected rows listed of " +
           Str(num_rejected);
  }
  return "";
}

std::string RejectedDifference(const RejectedRow& a, const RejectedRow& b) {
  if (a.file == b.file && a.line == b.line && a.reason == b.reason && a.raw == b.raw) return "";
  return "rejected row " + Show(b.reason) + " instead of " + Show(a.reason);
}

std::string SummaryDifference(const LoadSummary& a, const LoadSummary& b) {
  if (a.outcome != b.outcome || a.message != b.message) {
    return "outcome " + Show(b.message) + " instead of " + Show(a.message);
  }
  if (a.files.size() != b.files.size()) return "different number of files";
  // Size and SHA-256 describe a file once it is read through: a load that
  // stops early (a bad header) has only seen the blocks before.
  const bool read_through = a.outcome == LoadOutcome::kOk;
  for (size_t f = 0; f < a.files.size(); ++f) {
    const InputFileSummary &x = a.files[f], &y = b.files[f];
    if (x.role != y.role || x.path != y.path || x.given != y.given ||
        (read_through && (x.size_bytes != y.size_bytes || x.sha256 != y.sha256)) ||
        x.rows_read != y.rows_read || x.rows_used != y.rows_used ||
        x.rows_rejected != y.rows_rejected || x.ignored_columns != y.ignored_columns) {
      return "file " + ShowFile(y) + " (" + Str(y.size_bytes) + " bytes, sha256 " + y.sha256 +
             ") instead of " + ShowFile(x) + " (" + Str(x.size_bytes) + " bytes, sha256 " +
             x.sha256 + ")";
    }
  }
  if (a.num_rows_rejected != b.num_rows_rejected ||
      a.rejected_rows.size() != b.rejected_rows.size()) {
    return Str(b.num_rows_rejected) + " rows rejected instead of " + Str(a.num_rows_rejected);
  }
  for (size_t i = 0; i < a.rejected_rows.size(); ++i) {
    if (std::string d = RejectedDifference(a.rejected_rows[i], b.rejected_rows[i]); !d.empty())
      return d;
  }
  if (a.warnings != b.warnings) return "different warnings";
  return "";
}

template <typename T>
bool SameDoubles(const std::vector<T>& a, const std::vector<T>& b) {
  if (a.size() != b.size()) return false;
  for (size_t i = 0; i < a.size(); ++i) {
    if (!SameDouble(a[i], b[i])) return false;
  }
  return true;
}

std::string SurveyDifference(const Survey& a, const Survey& b) {
  if (a.regions.Codes() != b.regions.Codes()) return "different regions";
  if (a.items.Codes() != b.items.Codes()) return "different items";
  if (a.item_heading != b.item_heading) return "different item headings";
  if (a.item_description != b.item_description || a.item_unit != b.item_unit) {
    return "different item descriptions or units";
  }
  if (a.region_name != b.region_name || !SameDoubles(a.region_population, b.region_population) ||
      a.has_population != b.has_population) {
    return "different region names or populations";
  }
  if (a.classification.NodeCodes() != b.classification.NodeCodes() ||
      a.heading_codes != b.heading_codes) {
    return "different classification";
  }
  if (a.heading_range.size() != b.heading_range.size()) return "different heading ranges";
  for (size_t h = 0; h < a.heading_range.size(); ++h) {
    const HeadingRange &x = a.heading_range[h], &y = b.heading_range[h];
    if (x.item_begin != y.item_begin || x.item_end != y.item_end || x.cell_begin != y.cell_begin ||
        x.cell_end != y.cell_end) {
      return "different heading ranges";
    }
  }
  const CellPrices &x = a.cells, &y = b.cells;
  if (x.region != y.region || x.item != y.item || x.num_quotes != y.num_quotes ||
      x.representative != y.representative) {
    return "different cells";
  }
  if (!SameDoubles(x.log_price, y.log_price) || !SameDoubles(x.log_sd, y.log_sd) ||
      !SameDoubles(x.log_min, y.log_min) || !SameDoubles(x.log_max, y.log_max)) {
    return "different cell prices";
  }
  if (a.expenditure.rows() != b.expenditure.rows() ||
      a.expenditure.cols() != b.expenditure.cols()) {
    return "different expenditure shape";
  }
  for (Eigen::Index i = 0; i < a.expenditure.size(); ++i) {
    if (!SameDouble(a.expenditure.data()[i], b.expenditure.data()[i]))
      return "different expenditure";
  }
  if (a.num_quotes != b.num_quotes) return "different number of quotes";
  return "";
}

// A survey that loaded holds as many quotes as prices.csv used.
std::string SurveyProblem(const Survey& survey, const LoadSummary& summary) {
  int64_t quotes_used = 0;
  for (const InputFileSummary& file : summary.files) {
    if (file.role == "prices") quotes_used += file.rows_used;
  }
  if (survey.num_quotes != quotes_used) {
    return "survey holds " + Str(survey.num_quotes) + " quotes, prices.csv used " +
           Str(quotes_used);
  }
  int64_t in_cells = 0;
  for (int32_t n : survey.cells.num_quotes) in_cells += n;
  if (in_cells != survey.num_quotes) return "cells hold " + Str(in_cells) + " quotes";
  return "";
}

// Inserts blank lines after the header (at the start when there is no
// header) so that byte 65536, where the loader's smallest block ends, falls
// `k` bytes into the data rows; `k` comes from the input so that the fuzzer
// moves the boundary.
std::string PadPastFirstBlock(std::string_view prices) {
  constexpr size_t kMinBlock = size_t{1} << 16;
  CsvReader reader(prices);
  CsvRecord header;
  const size_t header_end = reader.Next(&header) ? reader.position() : 0;
  const size_t data_size = prices.size() - header_end;
  size_t sum = 0;
  for (char c : prices) sum += static_cast<unsigned char>(c);
  const size_t k = sum % (data_size + 1);
  if (header_end + k >= kMinBlock) return std::string(prices);
  std::string padded(prices.substr(0, header_end));
  if (!padded.empty() && padded.back() != '\n') padded += '\n';
  padded.append(kMinBlock - k - padded.size(), '\n');
  padded.append(prices.substr(header_end));
  return padded;
}

// ---------------------------------------------------------------------------
// Deflate

constexpr std::string_view kParities =
    "node,kind,region,parity,expenditure\n"
    "all,aggregate,r1,120,1\n"
    "all,aggregate,r2,90,1\n"
    "all,aggregate,r3,100,1\n"
    "food,aggregate,r1,110,1\n"
    "food,aggregate,r2,80,1\n"
    "food,aggregate,r3,,1\n"
    "bread,heading,r1,0.5,1\n"
    "bread,heading,r2,1e3,1\n";
constexpr std::string_view kRunRecord =
    R"({"tool": {"name": "paritas"}, "configuration": {"reference": "mean"}, "inputs": []})";
constexpr std::string_view kIntervals =
    "node,region,lower,upper\n"
    "all,r1,110,130\n"
    "all,r2,85,95\n"
    "food,r1,,\n"
    "bread,r2,900,1100\n";

std::string ShowDeflate(const DeflateSummary& summary) {
  return Show(summary.message) + ": " + Str(summary.num_rows_read) + " read, " +
         Str(summary.num_rows_written) + " written, " + Str(summary.num_rows_rejected) +
         " rejected";
}

std::string DeflateDifference(const DeflateSummary& a, const DeflateSummary& b) {
  if (a.outcome != b.outcome || a.message != b.message || a.num_rows_read != b.num_rows_read ||
      a.num_rows_written != b.num_rows_written || a.num_rows_rejected != b.num_rows_rejected ||
      // Bytes read count the whole input only when the run got through it.
      (a.outcome == DeflateOutcome::kOk && a.num_bytes_read != b.num_bytes_read) ||
      a.node_used != b.node_used || a.columns_added != b.columns_added ||
      a.rejected_rows.size() != b.rejected_rows.size()) {
    return ShowDeflate(b) + " instead of " + ShowDeflate(a);
  }
  for (size_t i = 0; i < a.rejected_rows.size(); ++i) {
    if (std::string d = RejectedDifference(a.rejected_rows[i], b.rejected_rows[i]); !d.empty())
      return d;
  }
  return "";
}

// Each row written is an input record that was not rejected, with the new
// columns appended; the rejected file lists the others with their raw text.
std::string DeflateOutputProblem(std::string_view input, const std::string& output,
                                 const std::string& rejected, const DeflateSummary& summary) {
  Reading in, out, rejects;
  if (!ReadInto(input, 1, true, 0, &in))
    return "deflate read input the CSV reader rejects: " + in.error;
  if (!ReadInto(output, 1, true, 0, &out)) return "output does not read back: " + out.error;
  if (!ReadInto(rejected, 1, true, 0, &rejects))
    return "rejected file does not read back: " + rejects.error;
  if (in.records.empty() || out.records.empty()) return "no header";
  if (static_cast<int64_t>(in.records.size()) - 1 != summary.num_rows_read) {
    return "input holds " + Str(in.records.size() - 1) + " rows, deflate read " +
           Str(summary.num_rows_read);
  }
  std::vector<std::string> header = in.records[0].fields;
  header.insert(header.end(), summary.columns_added.begin(), summary.columns_added.end());
  // Blank lines before the header are not copied, so a byte-order mark after
  // them starts the output and is read as one there, not as part of a name.
  std::vector<std::string> out_header = out.records[0].fields;
  for (std::vector<std::string>* names : {&header, &out_header}) {
    if ((*names)[0].rfind("\xEF\xBB\xBF", 0) == 0) (*names)[0].erase(0, 3);
  }
  if (out_header != header) return "output header is " + ShowRecord(out.records[0]);
  std::set<int64_t> rejected_lines;
  for (const RejectedRow& row : summary.rejected_rows) rejected_lines.insert(row.line);
  size_t next = 1;
  std::map<int64_t, const Record*> by_line;
  for (size_t i = 1; i < in.records.size(); ++i) {
    const Record& record = in.records[i];
    by_line[record.line] = &record;
    if (rejected_lines.count(record.line) > 0) continue;
    if (next >= out.records.size()) return "output lacks the row of line " + Str(record.line);
    const std::vector<std::string>& fields = out.records[next++].fields;
    if (fields.size() != record.fields.size() + summary.columns_added.size() ||
        !std::equal(record.fields.begin(), record.fields.end(), fields.begin())) {
      return "output row " + ShowRecord(out.records[next - 1]) + " is not input row " +
             ShowRecord(record) + " with " + Str(summary.columns_added.size()) + " columns added";
    }
  }
  if (next != out.records.size()) return "output has rows beyond the input's";
  if (static_cast<int64_t>(rejects.records.size()) != summary.num_rows_rejected + 1) {
    return "rejected file holds " + Str(rejects.records.size()) + " records for " +
           Str(summary.num_rows_rejected) + " rows";
  }
  for (size_t i = 1; i < rejects.records.size(); ++i) {
    const std::vector<std::string>& fields = rejects.records[i].fields;
    if (fields.size() != 4) return "rejected file row without 4 fields";
    const auto it = by_line.find(std::atoll(fields[1].c_str()));
    if (it == by_line.end() || it->second->raw != fields[3]) {
      return "rejected file row " + ShowRecord(rejects.records[i]) +
             " does not give the input's raw text";
    }
  }
  return "";
}

std::string RunDeflate(DeflateOptions options, const std::string& suffix, int64_t block_bytes,
                       InvalidRowPolicy policy, DeflateSummary* summary) {
  options.output_path =
      fs::path(options.output_path).replace_filename("out_" + suffix + ".csv").string();
  options.rejected_path =
      fs::path(options.output_path).replace_filename("rejected_" + suffix + ".csv").string();
  options.block_bytes = block_bytes;
  options.invalid_rows = policy;
  std::error_code ec;
  fs::remove(options.output_path, ec);
  fs::remove(options.rejected_path, ec);
  Deflate(options, summary);
  if (summary->outcome == DeflateOutcome::kNotRun) return "Deflate did not run";
  if (summary->outcome != DeflateOutcome::kOk && summary->message.empty()) {
    return "Deflate failed without a message";
  }
  return "";
}

}  // namespace

std::string CheckCsvReader(std::string_view data, const std::string& work_dir) {
  Reading whole;
  ReadInto(data, 1, true, 0, &whole);
  for (const Record& record : whole.records) {
    if (record.fields.empty()) return "record without fields: " + ShowRecord(record);
    if (data.substr(record.offset, record.raw.size()) != record.raw) {
      return "raw text is not the data at the offset: " + ShowRecord(record);
    }
  }
  if (std::string problem = CheckSplit(data, whole); !problem.empty()) return problem;
  if (std::string problem = CheckBlocks(data, whole); !problem.empty()) return problem;
  if (std::string problem = CheckBlockReader(data, whole, work_dir); !problem.empty()) {
    return problem;
  }
  if (std::string problem = CheckRoundTrip(whole); !problem.empty()) return problem;
  if (!whole.records.empty()) return CheckHeader(whole.records[0]);
  return "";
}

std::string CheckText(std::string_view data, const std::string& /*work_dir*/) {
  double value = 0.0;
  const NumberStatus status = ParseNumber(data, &value);
  if ((status == NumberStatus::kEmpty) != Trim(data).empty()) {
    return "ParseNumber(" + Show(data) + ") calls empty what is not, or the reverse";
  }
  const std::string spaced = " \t" + std::string(data) + "\t ";
  double spaced_value = 0.0;
  const NumberStatus spaced_status = ParseNumber(spaced, &spaced_value);
  if (spaced_status != status ||
      (status == NumberStatus::kOk && !SameDouble(value, spaced_value))) {
    return "ParseNumber(" + Show(data) + ") changes with spaces around it";
  }
  if (status == NumberStatus::kOk) {
    if (!std::isfinite(value)) return "ParseNumber(" + Show(data) + ") gives a non-finite number";
    std::string shortest;
    AppendShortest(value, &shortest);
    double again = 0.0;
    // Equal as numbers: AppendShortest writes -0 as "0" on purpose.
    if (ParseNumber(shortest, &again) != NumberStatus::kOk || !(again == value)) {
      return "AppendShortest(" + Show(data) + ") = " + Show(shortest) + " does not read back";
    }
    for (int decimals : {0, 4, 17}) {
      std::string fixed;
      AppendFixed(value, decimals, &fixed);
      if (ParseNumber(fixed, &again) != NumberStatus::kOk ||
          !(std::fabs(again - value) <=
            0.5 * std::pow(10.0, -decimals) + 1e-15 * std::fabs(value))) {
        return "AppendFixed(" + Show(data) + ", " + Str(decimals) + ") = " + Show(fixed) +
               " is not the value";
      }
    }
  } else if (status != NumberStatus::kEmpty && NumberProblem(status, "x", data).empty()) {
    return "NumberProblem gives no text for " + Show(data);
  }
  bool flag = false;
  if (ParseFlag(data, &flag)) {
    static const std::set<std::string> kTrue = {"1", "yes", "true"}, kFalse = {"0", "no", "false"};
    const std::string lower = ToLower(Trim(data));
    if ((flag ? kTrue : kFalse).count(lower) == 0) return "ParseFlag accepts " + Show(data);
  }
  const std::string quoted = QuoteValue(data);
  if (quoted.find_first_of("\r\n") != std::string::npos || quoted.size() > 65 ||
      quoted.front() != '\'' || quoted.back() != '\'') {
    return "QuoteValue(" + Show(data) + ") = " + Show(quoted);
  }
  const size_t half = data.find('\0') != std::string_view::npos ? data.find('\0') : data.size() / 2;
  const std::string_view a = data.substr(0, half), b = data.substr(std::min(half + 1, data.size()));
  if (a.size() * b.size() <= (1u << 16)) {
    const int ab = EditDistance(a, b), ba = EditDistance(b, a);
    if (ab != ba || ab > static_cast<int>(std::max(a.size(), b.size())) ||
        ab < static_cast<int>(std::max(a.size(), b.size()) - std::min(a.size(), b.size())) ||
        (ab == 0) != (a == b)) {
      return "EditDistance(" + Show(a) + ", " + Show(b) + ") = " + Str(ab) + ", reversed " +
             Str(ba);
    }
  }
  return "";
}

namespace {

// An accepted configuration's groups and labels apply to its tree (the
// parser checked them) and give groups after the tree: no parent, no
// children, a non-empty, increasing list of valid heading indices.
std::string GroupsProblem(const RunConfig& config) {
  Classification tree = config.classification;
  std::string error;
  if (!ApplyGroupsAndLabels(config, &tree, &error)) {
    return "groups or labels accepted by the parser fail on its tree: " + error;
  }
  const std::vector<ClassificationNode>& nodes = tree.nodes();
  if (tree.num_tree_nodes() != static_cast<int>(config.classification.nodes().size()) ||
      nodes.size() != config.classification.nodes().size() + config.groups.size()) {
    return "groups not appended after the tree";
  }
  const int num_headings = static_cast<int>(tree.headings().size());
  for (size_t i = tree.num_tree_nodes(); i < nodes.size(); ++i) {
    const ClassificationNode& g = nodes[i];
    const std::string where = "group " + Show(g.code) + ": ";
    if (!g.is_group || g.is_leaf || g.parent != -1 || !g.children.empty())
      return where + "not a group";
    if (g.headings.empty()) return where + "no headings";
    for (size_t k = 0; k < g.headings.size(); ++k) {
      if (g.headings[k] < 0 || g.headings[k] >= num_headings ||
          (k > 0 && g.headings[k] <= g.headings[k - 1])) {
        return where + "headings not increasing heading indices";
      }
    }
    if (tree.FindNode(g.code) != static_cast<int>(i)) return where + "FindNode does not find it";
  }
  return "";
}

}  // namespace

std::string CheckConfig(std::string_view data, const std::string& work_dir) {
  // Paths in the text are read (a classification file); never a device or kernel file.
  for (const char* special : {"dev/", "proc/", "sys/"}) {
    if (data.find(special) != std::string_view::npos) return "";
  }
  const std::string text(data);
  try {
    RunConfig config;
    std::string error;
    if (!ParseRunConfig(text, work_dir + "/config.yaml", &config, &error)) {
      if (error.empty()) return "ParseRunConfig failed without a message";
    } else {
      if (!config.IsValid(&error))
        return "ParseRunConfig accepted an invalid configuration: " + error;
      if (config.has_classification) {
        if (std::string problem = TreeProblem(config.classification); !problem.empty()) {
          return "classification of the configuration: " + problem;
        }
        if (std::string problem = GroupsProblem(config); !problem.empty()) return problem;
      }
    }
  } catch (const std::exception& e) {
    return std::string("ParseRunConfig threw: ") + e.what();
  } catch (...) {
    return "ParseRunConfig threw";
  }
  try {
    Classification tree;
    std::string error;
    if (!Classification::FromYaml(text, "classification.yaml", &tree, &error)) {
      if (error.empty()) return "Classification::FromYaml failed without a message";
    } else if (std::string problem = TreeProblem(tree); !problem.empty()) {
      return "Classification::FromYaml: " + problem;
    }
  } catch (const std::exception& e) {
    return std::string("Classification::FromYaml threw: ") + e.what();
  } catch (...) {
    return "Classification::FromYaml threw";
  }
  return "";
}

std::string CheckSurveyLoader(std::string_view data, const std::string& work_dir) {
  const std::vector<std::string_view> sections = Sections(data);
  auto section = [&](size_t i) { return i < sections.size() ? sections[i] : std::string_view(); };
  RunConfig config;
  config.survey.prices = {PriceSource{work_dir + "/prices.csv", CsvFormat(), {}}};
  config.survey.expenditure = work_dir + "/expenditure.csv";
  std::string error;
  auto write = [&](const std::string& path, std::string_view contents) {
    if (!WriteFile(path, contents, &error)) return false;
    return true;
  };
  if (!write(config.survey.prices[0].path, section(0)) ||
      !write(config.survey.expenditure, sections.size() > 1 && !section(1).empty()
                                            ? section(1)
                                            : "region,heading,expenditure\nr1,h1,1\n")) {
    return "cannot write the survey files: " + error;
  }
  if (!section(2).empty()) {
    config.survey.regions = work_dir + "/regions.csv";
    if (!write(config.survey.regions, section(2))) return "cannot write regions.csv: " + error;
  }
  if (!section(3).empty()) {
    config.survey.items = work_dir + "/items.csv";
    if (!write(config.survey.items, section(3))) return "cannot write items.csv: " + error;
  }
  // A sixth section is a second price file, read after the first.
  if (!section(5).empty()) {
    config.survey.prices.push_back(PriceSource{work_dir + "/prices_2.csv", CsvFormat(), {}});
    if (!write(config.survey.prices[1].path, section(5))) {
      return "cannot write prices_2.csv: " + error;
    }
  }
  if (!section(4).empty()) {
    try {
      config.has_classification = Classification::FromYaml(
          std::string(section(4)), "classification.yaml", &config.classification, &error);
    } catch (...) {
      return "Classification::FromYaml threw";
    }
  }

  LoadOptions options;
  options.invalid_rows = InvalidRowPolicy::kSkip;
  options.num_threads = 1;
  Survey skipped;
  LoadSummary skip_summary;
  LoadSurvey(config, options, &skipped, &skip_summary);
  if (std::string problem = CheckCounts(skip_summary, true); !problem.empty())
    return "skip: " + problem;
  if (skip_summary.outcome == LoadOutcome::kOk) {
    if (std::string problem = SurveyProblem(skipped, skip_summary); !problem.empty())
      return problem;
  }

  // Chunk-size equivalence: chunks of 64 bytes cross a chunk boundary at
  // almost every row (a heading restated or contradicted in a later chunk,
  // codes new to the block in several chunks), against one chunk.
  LoadOptions chunk_options = options;
  chunk_options.chunk_bytes = 64;
  Survey small_chunks;
  LoadSummary small_chunks_summary;
  LoadSurvey(config, chunk_options, &small_chunks, &small_chunks_summary);
  if (std::string d = SummaryDifference(skip_summary, small_chunks_summary); !d.empty()) {
    return "small chunks against one chunk: " + d;
  }
  if (skip_summary.outcome == LoadOutcome::kOk) {
    if (std::string d = SurveyDifference(skipped, small_chunks); !d.empty()) {
      return "small chunks against one chunk: " + d;
    }
  }

  // invalid_rows: stop rejects the same rows and lists the first of them.
  LoadOptions stop_options = options;
  stop_options.invalid_rows = InvalidRowPolicy::kStop;
  Survey stopped;
  LoadSummary stop_summary;
  LoadSurvey(config, stop_options, &stopped, &stop_summary);
  if (std::string problem = CheckCounts(stop_summary, false); !problem.empty())
    return "stop: " + problem;
  if (stop_summary.num_rows_rejected != skip_summary.num_rows_rejected) {
    return "stop rejects " + Str(stop_summary.num_rows_rejected) + " rows, skip " +
           Str(skip_summary.num_rows_rejected) + " (" + stop_summary.message + " / " +
           skip_summary.message + ")";
  }
  // Stop does not list the rows of rejected regions and items: they are
  // described once per code.
  std::vector<const RejectedRow*> own_rows;
  for (const RejectedRow& row : skip_summary.rejected_rows) {
    if (row.cause != RejectionCause::kRejectedCode) own_rows.push_back(&row);
  }
  const size_t num_listed =
      std::min<size_t>(own_rows.size(), static_cast<size_t>(stop_options.max_reported_rows));
  if (stop_summary.rejected_rows.size() != num_listed) {
    return "stop lists " + Str(stop_summary.rejected_rows.size()) + " rows, expected " +
           Str(num_listed);
  }
  for (size_t i = 0; i < num_listed; ++i) {
    if (std::string d = RejectedDifference(*own_rows[i], stop_summary.rejected_rows[i]);
        !d.empty()) {
      return "stop: " + d;
    }
  }
  if (skip_summary.num_rows_rejected == 0) {
    if (std::string d = SummaryDifference(skip_summary, stop_summary); !d.empty())
      return "stop: " + d;
    if (skip_summary.outcome == LoadOutcome::kOk) {
      if (std::string d = SurveyDifference(skipped, stopped); !d.empty()) return "stop: " + d;
    }
  } else if (stop_summary.outcome == LoadOutcome::kOk) {
    return "stop loaded a survey with rejected rows";
  }

  // Block-size equivalence, on prices.csv padded past the smallest block.
  config.survey.prices[0] = PriceSource{work_dir + "/prices_padded.csv", CsvFormat(), {}};
  if (!write(config.survey.prices[0].path, PadPastFirstBlock(section(0)))) {
    return "cannot write prices_padded.csv: " + error;
  }
  Survey one_block, small_blocks;
  LoadSummary one_block_summary, small_blocks_summary;
  LoadSurvey(config, options, &one_block, &one_block_summary);
  options.block_bytes = 1;  // the loader's smallest block, 64 KiB
  LoadSurvey(config, options, &small_blocks, &small_blocks_summary);
  if (std::string problem = CheckCounts(small_blocks_summary, true); !problem.empty()) {
    return "small blocks: " + problem;
  }
  if (std::string d = SummaryDifference(one_block_summary, small_blocks_summary); !d.empty()) {
    return "small blocks against one block: " + d;
  }
  if (one_block_summary.outcome == LoadOutcome::kOk) {
    if (std::string d = SurveyDifference(one_block, small_blocks); !d.empty()) {
      return "small blocks against one block: " + d;
    }
  }
  return "";
}

std::string CheckDeflate(std::string_view data, const std::string& work_dir) {
  const std::string parities_dir = work_dir + "/parities";
  std::string error;
  std::error_code ec;
  if (!fs::exists(parities_dir + "/sensitivity/run.json", ec)) {
    fs::create_directories(parities_dir + "/sensitivity", ec);
    // The same run record beside parities and intervals, so Deflate takes
    // them as one comparison.
    if (!WriteFile(parities_dir + "/parities.csv", kParities, &error) ||
        !WriteFile(parities_dir + "/sensitivity/bootstrap.csv", kIntervals, &error) ||
        !WriteFile(parities_dir + "/run.json", kRunRecord, &error) ||
        !WriteFile(parities_dir + "/sensitivity/run.json", kRunRecord, &error)) {
      return "cannot write the parities folder: " + error;
    }
  }
  DeflateOptions options;
  options.parities_dir = parities_dir;
  options.input_path = work_dir + "/wages.csv";
  options.output_path = work_dir + "/out.csv";
  options.include_parity = true;
  options.include_interval = true;
  options.max_reported_rows = 1 << 30;
  // The header chooses the columns, so that the fuzzer reaches every option.
  {
    CsvReader reader(data);
    CsvRecord header;
    std::set<std::string_view> names;
    if (reader.Next(&header)) {
      for (std::string_view name : header.fields) names.insert(Trim(name));
    }
    for (const char* name : {"wage", "income", "net"}) {
      if (names.count(name) > 0) options.value_columns.push_back(name);
    }
    if (options.value_columns.empty()) options.value_columns.push_back("wage");
    if (names.count("node") > 0) options.node_column = "node";
    options.allow_negative = names.count("net") > 0;
  }
  if (!WriteFile(options.input_path, data, &error)) return "cannot write the input: " + error;

  DeflateSummary small, large, stop;
  if (std::string p = RunDeflate(options, "small", 1 << 10, InvalidRowPolicy::kSkip, &small);
      !p.empty())
    return p;
  // 64 KiB holds any input libFuzzer makes by default (4 KiB) in one block; the
  // deflater zero-fills a whole block per read, so 4 MiB would cost ten times
  // the rest of the check.
  if (std::string p = RunDeflate(options, "large", 64 << 10, InvalidRowPolicy::kSkip, &large);
      !p.empty())
    return p;
  if (std::string d = DeflateDifference(small, large); !d.empty())
    return "64 KiB blocks against 1 KiB: " + d;
  const std::string out_small = ReadFileOrEmpty(work_dir + "/out_small.csv");
  const std::string rejected_small = ReadFileOrEmpty(work_dir + "/rejected_small.csv");
  if (small.outcome == DeflateOutcome::kOk) {
    if (out_small != ReadFileOrEmpty(work_dir + "/out_large.csv")) {
      return "output differs between 1 KiB and 64 KiB blocks";
    }
    if (rejected_small != ReadFileOrEmpty(work_dir + "/rejected_large.csv")) {
      return "rejected rows differ between 1 KiB and 64 KiB blocks";
    }
    if (small.num_rows_read != small.num_rows_written + small.num_rows_rejected) {
      return "rows do not add up: " + ShowDeflate(small);
    }
    if (static_cast<int64_t>(small.rejected_rows.size()) != small.num_rows_rejected) {
      return "not every rejected row is listed";
    }
    if (std::string p = DeflateOutputProblem(data, out_small, rejected_small, small); !p.empty())
      return p;
  }

  options.max_reported_rows = 20;
  if (std::string p = RunDeflate(options, "stop", 1 << 10, InvalidRowPolicy::kStop, &stop);
      !p.empty())
    return p;
  const bool stop_wrote = fs::exists(work_dir + "/out_stop.csv", ec);
  if (small.outcome != DeflateOutcome::kOk) {
    if (stop.outcome == DeflateOutcome::kOk || stop.message != small.message) {
      return "stop: " + ShowDeflate(stop) + " where skip failed with " + ShowDeflate(small);
    }
  } else if (small.num_rows_rejected == 0) {
    if (stop.outcome != DeflateOutcome::kOk ||
        ReadFileOrEmpty(work_dir + "/out_stop.csv") != out_small) {
      return "stop: " + ShowDeflate(stop) + " differs from skip without rejected rows";
    }
  } else if (stop.outcome == DeflateOutcome::kOk || stop_wrote ||
             stop.num_rows_rejected != small.num_rows_rejected ||
             stop.num_rows_read != small.num_rows_read) {
    return "stop: " + ShowDeflate(stop) + (stop_wrote ? " (output written)" : "") +
           " where skip gave " + ShowDeflate(small);
  }
  return "";
}

namespace {

// What is wrong with a table ReadPriceIndices returned, or "".
std::string PriceIndexTableProblem(const Classification& tree, int num_regions,
                                   const PriceIndexTable& table) {
  const int num_headings = static_cast<int>(tree.headings().size());
  if (table.index.rows() != num_regions || table.index.cols() != num_headings ||
      table.from_node.rows() != num_regions || table.from_node.cols() != num_headings) {
    return "table is not regions x headings";
  }
  if (table.num_rows_used + table.num_rows_other_period != table.num_rows_read) {
    return "rows do not add up: used " + std::to_string(table.num_rows_used) + " + other " +
           std::to_string(table.num_rows_other_period) + " != read " +
           std::to_string(table.num_rows_read);
  }
  if (std::find(table.periods.begin(), table.periods.end(), table.period) == table.periods.end()) {
    return "chosen period is not among the file's periods";
  }
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < num_headings; ++h) {
      const double value = table.index(r, h);
      int node = table.from_node(r, h);
      if (std::isnan(value) != (node < 0)) return "an entry and its source node disagree";
      if (node < 0) continue;
      if (!std::isfinite(value) || value <= 0) return "an index is not positive and finite";
      // The source must be the heading itself or an aggregate above it.
      int at = tree.headings()[h];
      while (at >= 0 && at != node) at = tree.nodes()[at].parent;
      if (at < 0) return "an entry comes from a node that does not hold its heading";
    }
  }
  return "";
}

bool SameTable(const PriceIndexTable& a, const PriceIndexTable& b) {
  return a.period == b.period && a.periods == b.periods && a.from_node == b.from_node &&
         a.num_rows_read == b.num_rows_read && a.num_rows_used == b.num_rows_used &&
         a.index.rows() == b.index.rows() && a.index.cols() == b.index.cols() &&
         ((a.index.array() == b.index.array()) || (a.index.array().isNaN() && b.index.array().isNaN()))
             .all();
}

}  // namespace

std::string CheckPriceIndices(std::string_view data, const std::string& work_dir) {
  static const Classification tree = [] {
    Classification parsed;
    std::string error;
    Classification::FromYaml("all:\n  - food:\n      - bread\n      - milk\n  - rent\n", "tree",
                             &parsed, &error);
    return parsed;
  }();
  const std::vector<std::string> regions = {"north", "south", "east"};
  const std::string path = work_dir + "/indices.csv";
  std::string error;
  if (!WriteFile(path, data, &error)) return "cannot write the input: " + error;
  PriceIndexTable table, again;
  std::string message, message_again;
  const bool ok = ReadPriceIndices(path, ReadLimits(), tree, regions, "", &table, &message);
  const bool ok_again = ReadPriceIndices(path, ReadLimits(), tree, regions, "", &again,
                                         &message_again);
  if (ok != ok_again || message != message_again || (ok && !SameTable(table, again))) {
    return "two reads of the same file differ";
  }
  if (!ok) {
    if (message.rfind(path, 0) != 0) return "message does not start with the path: " + message;
    if (message.rfind(path + " holds ", 0) != 0) return "";
    // Refused for holding several periods: each must read on its own.
    for (const std::string& period : std::vector<std::string>(table.periods)) {
      PriceIndexTable one;
      if (!ReadPriceIndices(path, ReadLimits(), tree, regions, period, &one, &message)) {
        return "period " + QuoteValue(period) + " of a several-period file fails: " + message;
      }
      if (std::string p = PriceIndexTableProblem(tree, 3, one); !p.empty()) {
        return "period " + QuoteValue(period) + ": " + p;
      }
    }
    return "";
  }
  return PriceIndexTableProblem(tree, 3, table);
}

const std::vector<Harness>& Harnesses() {
  static const std::vector<Harness> harnesses = {
      {"csv_reader", CheckCsvReader},       {"text", CheckText},       {"config", CheckConfig},
      {"survey_loader", CheckSurveyLoader}, {"deflate", CheckDeflate},
      {"price_indices", CheckPriceIndices},
  };
  return harnesses;
}

std::string MakeWorkDir(const std::string& name) {
  std::string base;
  if (const char* given = std::getenv("PARITAS_FUZZ_TMP"); given != nullptr && *given != '\0') {
    base = given;
  } else {
    std::error_code ec;
    base = fs::is_directory("/dev/shm", ec) ? "/dev/shm" : fs::temp_directory_path(ec).string();
  }
  std::string path = base + "/paritas-fuzz-" + name + "-" + std::to_string(::getpid()) + "-XXXXXX";
  if (::mkdtemp(path.data()) == nullptr) return base;
  return path;
}

void RemoveWorkDir(const std::string& path) {
  if (path.find("/paritas-fuzz-") == std::string::npos) return;  // never a folder it did not make
  std::error_code ec;
  fs::remove_all(path, ec);
}

int RunHarness(const char* name, Check check, const uint8_t* data, size_t size) {
  static const std::string* work_dir = [name] {
    static const std::string dir = MakeWorkDir(name);
    std::atexit([] { RemoveWorkDir(dir); });
    return &dir;
  }();
  const std::string failure =
      check(std::string_view(reinterpret_cast<const char*>(data), size), *work_dir);
  if (!failure.empty()) {
    std::fprintf(stderr, "\n%s_fuzz: property broken: %s\n", name, failure.c_str());
    std::abort();
  }
  return 0;
}

}  // namespace paritas::fuzz
