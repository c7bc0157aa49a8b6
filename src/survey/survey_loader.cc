// Reads the survey files. The small files (regions, items, expenditure) are
// read in one pass; prices.csv, which can hold tens of millions of quotes, is
// read in blocks that are split at record boundaries into fixed-size chunks
// parsed in parallel. Each chunk interns codes and accumulates cell moments
// locally; chunks are merged in file order, so the result does not depend on
// the number of threads, and the text of at most one block is held at once.
#include "paritas/survey/survey_loader.h"

#include <omp.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <functional>
#include <map>
#include <numeric>
#include <unordered_map>
#include <unordered_set>

#include "survey/cell_prices.h"
#include "base/equal_bytes.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "base/sha256.h"

namespace paritas {
namespace {

using internal::QuoteArrays;

constexpr size_t kMaxCodeLength = 200;
// Chunk size for parallel parsing: boundaries depend on the data only.
constexpr size_t kChunkBytes = 1 << 21;

double SecondsSince(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

// Collects rejected rows under the chosen policy.
class Rejections {
 public:
  Rejections(const LoadOptions& options, LoadSummary* summary)
      : options_(options), summary_(summary) {}

  // Counts rejected rows whose text is not kept.
  void Count(int64_t num_rows, InputFileSummary* file) {
    file->rows_rejected += num_rows;
    summary_->num_rows_rejected += num_rows;
  }

  void Add(RejectedRow row, InputFileSummary* file) {
    ++file->rows_rejected;
    ++summary_->num_rows_rejected;
    if (options_.invalid_rows == InvalidRowPolicy::kSkip ||
        static_cast<int>(summary_->rejected_rows.size()) < options_.max_reported_rows) {
      summary_->rejected_rows.push_back(std::move(row));
    }
  }

 private:
  const LoadOptions& options_;
  LoadSummary* summary_;
};

// Column positions of one table, found by name.
struct Columns {
  std::vector<int> index;  // per wanted column, -1 when absent
  int num_fields = 0;
};

// Reads the header row, checks required and duplicated columns, and records
// the ignored ones.
bool ReadHeader(CsvReader* reader, const std::string& path, const std::vector<std::string>& wanted,
                const std::vector<bool>& required, Columns* columns, InputFileSummary* file,
                std::string* error) {
  CsvRecord header;
  if (!reader->Next(&header)) {
    if (!reader->error().empty()) {
      *error = path + ":" + reader->error();
    } else {
      std::vector<std::string> names;
      for (size_t i = 0; i < wanted.size(); ++i) {
        if (required[i]) names.push_back(wanted[i]);
      }
      *error =
          path + ": file is empty (expected a header row with columns " + JoinNames(names) + ")";
    }
    return false;
  }
  CsvHeader names(header.fields);
  columns->num_fields = static_cast<int>(header.fields.size());
  columns->index.assign(wanted.size(), -1);
  for (size_t i = 0; i < wanted.size(); ++i) {
    columns->index[i] = names.Find(wanted[i]);
    for (const std::string& duplicate : names.duplicates()) {
      if (duplicate == wanted[i]) {
        *error = path + ":" + std::to_string(header.line) + ": column '" + wanted[i] +
                 "' appears more than once";
        return false;
      }
    }
    if (required[i] && columns->index[i] < 0) {
      // A header of garbage can hold a million names: list the first few.
      constexpr size_t kMaxListed = 20;
      const std::vector<std::string>& all = names.names();
      std::string found;
      if (all.size() <= kMaxListed) {
        found = JoinNames(all);
      } else {
        found = JoinNames(std::vector<std::string>(all.begin(), all.begin() + kMaxListed)) +
                ", ... (" + std::to_string(all.size()) + " columns)";
      }
      *error = path + ":" + std::to_string(header.line) + ": missing column '" + wanted[i] +
               "' (found: " + found + ")";
      return false;
    }
  }
  // A set, so that a header with a million columns is read in linear time.
  std::unordered_set<std::string_view> ignored;
  ignored.reserve(names.names().size());
  for (const std::string& name : names.names()) {
    if (std::find(wanted.begin(), wanted.end(), name) == wanted.end() &&
        ignored.insert(name).second) {
      file->ignored_columns.push_back(name);
    }
  }
  return true;
}

// Checks a code field; returns an empty string when valid, else the reason.
std::string CheckCode(std::string_view code, const char* what) {
  if (code.empty()) return std::string(what) + " is empty";
  if (code.size() > kMaxCodeLength) {
    return std::string(what) + " " + QuoteValue(code) + " is longer than " +
           std::to_string(kMaxCodeLength) + " characters";
  }
  return "";
}

std::string FieldCountProblem(size_t found, int expected) {
  return "row has " + std::to_string(found) + " field" + (found == 1 ? "" : "s") +
         ", the header has " + std::to_string(expected);
}

// ---------------------------------------------------------------------------
// Shared state while loading.

struct LoadState {
  const RunConfig* config = nullptr;
  // Regions: fixed by regions.csv when given; otherwise grows.
  bool regions_fixed = false;
  CodeTable regions;
  std::vector<std::string> region_name;
  std::vector<double> region_population;
  // Headings: fixed by the classification when given; otherwise grows.
  bool headings_fixed = false;
  CodeTable headings;
  // Items with their heading and where that was first stated.
  CodeTable items;
  std::vector<int> item_heading;
  std::vector<std::string> item_origin;  // "items.csv:12" or "line 40"
  std::vector<std::string> item_description, item_unit;
  bool has_catalog = false;
  // Quotes used, in file order, with state indices of region and item.
  QuoteArrays quotes;
  int64_t num_quotes = 0;
  // Expenditure rows.
  struct Spending {
    int region, heading;
    double value;
  };
  std::vector<Spending> spending;
};

// What became of a data row: used (empty reason), or rejected for `reason`
// at `column` (1-based; 0 = the row as a whole).
struct RowVerdict {
  int column = 0;
  std::string reason;
};

// Reads a small table whole: checks its header, then hands every data row
// with the header's number of fields to `handle`, counting rows read, used
// and rejected.
bool ReadSmallTable(const std::string& path, const std::vector<std::string>& wanted,
                    const std::vector<bool>& required, Rejections* rejections,
                    InputFileSummary* file,
                    const std::function<RowVerdict(const CsvRecord&, const Columns&)>& handle,
                    std::string* error) {
  std::string text;
  if (!ReadWholeFile(path, &text, error)) return false;
  file->size_bytes = static_cast<int64_t>(text.size());
  file->sha256 = internal::Sha256Hex(text);
  CsvReader reader(text);
  Columns columns;
  if (!ReadHeader(&reader, path, wanted, required, &columns, file, error)) return false;
  CsvRecord record;
  while (reader.Next(&record)) {
    ++file->rows_read;
    RowVerdict verdict;
    if (static_cast<int>(record.fields.size()) != columns.num_fields) {
      verdict.reason = FieldCountProblem(record.fields.size(), columns.num_fields);
    } else {
      verdict = handle(record, columns);
    }
    if (verdict.reason.empty()) {
      ++file->rows_used;
      continue;
    }
    rejections->Add(
        {path, record.line, LocatedMessage(path, record.line, verdict.column, verdict.reason),
         std::string(record.raw)},
        file);
  }
  if (!reader.error().empty()) {
    *error = path + ":" + reader.error();
    return false;
  }
  return true;
}

// ---------------------------------------------------------------------------
// regions.csv and items.csv

bool ReadRegions(const std::string& path, LoadState* state, Rejections* rejections,
                 InputFileSummary* file, std::string* error) {
  std::unordered_map<std::string, int64_t> first_line;
  auto handle = [&](const CsvRecord& record, const Columns& columns) -> RowVerdict {
    const int kRegion = columns.index[0], kName = columns.index[1], kPopulation = columns.index[2];
    const std::string_view code = Trim(record.fields[kRegion]);
    if (std::string problem = CheckCode(code, "region"); !problem.empty()) {
      return {kRegion + 1, problem};
    }
    double population = std::nan("");
    if (kPopulation >= 0) {
      const std::string_view value = record.fields[kPopulation];
      const NumberStatus status = ParseNumber(value, &population);
      if (status != NumberStatus::kOk && status != NumberStatus::kEmpty) {
        return {kPopulation + 1, NumberProblem(status, "population", value)};
      }
      if (status == NumberStatus::kEmpty) population = std::nan("");
      if (population < 0) {
        return {kPopulation + 1, "population " + QuoteValue(value) + " is negative"};
      }
    }
    auto [it, inserted] = first_line.emplace(std::string(code), record.line);
    if (!inserted) {
      return {kRegion + 1, "region " + QuoteValue(code) + " is listed twice (first at line " +
                               std::to_string(it->second) + ")"};
    }
    state->regions.Intern(code);
    state->region_name.emplace_back(kName >= 0 ? Trim(record.fields[kName]) : std::string_view());
    state->region_population.push_back(population);
    return {};
  };
  if (!ReadSmallTable(path, {"region", "name", "population"}, {true, false, false}, rejections,
                      file, handle, error))
    return false;
  state->regions_fixed = true;
  return true;
}

bool ReadItems(const std::string& path, LoadState* state, Rejections* rejections,
               InputFileSummary* file, std::string* error) {
  auto handle = [&](const CsvRecord& record, const Columns& columns) -> RowVerdict {
    const int kItem = columns.index[0], kHeading = columns.index[1];
    const int kDescription = columns.index[2], kUnit = columns.index[3];
    const std::string_view item = Trim(record.fields[kItem]);
    const std::string_view heading = Trim(record.fields[kHeading]);
    if (std::string problem = CheckCode(item, "item"); !problem.empty()) {
      return {kItem + 1, problem};
    }
    if (std::string problem = CheckCode(heading, "heading"); !problem.empty()) {
      return {kHeading + 1, problem};
    }
    int heading_index = state->headings.Find(heading);
    if (heading_index < 0) {
      if (state->headings_fixed) {
        return {kHeading + 1, "heading " + QuoteValue(heading) + " is not in the classification"};
      }
      heading_index = state->headings.Intern(heading);
    }
    const int existing = state->items.Find(item);
    if (existing >= 0) {
      const std::string& origin = state->item_origin[existing];
      if (state->item_heading[existing] == heading_index) {
        return {kItem + 1,
                "item " + QuoteValue(item) + " is listed twice (first at " + origin + ")"};
      }
      return {kHeading + 1, "item " + QuoteValue(item) + " is filed under heading " +
                                QuoteValue(heading) + " but under " +
                                QuoteValue(state->headings.Code(state->item_heading[existing])) +
                                " at " + origin};
    }
    state->items.Intern(item);
    state->item_heading.push_back(heading_index);
    state->item_origin.push_back("line " + std::to_string(record.line));
    state->item_description.emplace_back(kDescription >= 0 ? Trim(record.fields[kDescription])
                                                           : std::string_view());
    state->item_unit.emplace_back(kUnit >= 0 ? Trim(record.fields[kUnit]) : std::string_view());
    return {};
  };
  if (!ReadSmallTable(path, {"item", "heading", "description", "unit"}, {true, true, false, false},
                      rejections, file, handle, error))
    return false;
  // Later messages about these items name the file.
  for (std::string& origin : state->item_origin) {
    origin = path + ":" + origin.substr(5);
  }
  state->has_catalog = true;
  return true;
}

// ---------------------------------------------------------------------------
// prices.csv

struct PriceColumns {
  int region = -1, item = -1, price = -1, heading = -1, representative = -1;
  int num_fields = 0;
};

// What a chunk knows about an item it has seen.
struct LocalItem {
  int global = -1;         // index in LoadState::items when known before the block
  int local_heading = -1;  // local heading index when first stated in this chunk
  int64_t line = 0;        // line of that first statement
};

struct ChunkResult {
  CodeTable regions;
  CodeTable items;
  CodeTable headings;
  std::vector<LocalItem> item_info;
  // Quotes used, with chunk-local region and item indices.
  QuoteArrays quotes;

  // Empties the result, keeping the capacity of its arrays.
  void Reset() {
    regions = CodeTable();
    items = CodeTable();
    headings = CodeTable();
    item_info.clear();
    quotes.region.clear();
    quotes.item.clear();
    quotes.log_price.clear();
    quotes.representative.clear();
    rejected.clear();
    num_rejected_not_kept = 0;
    rows_read = 0;
    rows_used = 0;
    items_without_heading.clear();
    fatal.clear();
  }
  std::vector<RejectedRow> rejected;
  // Rejected rows beyond the ones kept for the message (under kStop).
  int64_t num_rejected_not_kept = 0;
  int64_t rows_read = 0;
  int64_t rows_used = 0;
  // Local items rejected for an empty heading before this chunk stated one;
  // an earlier chunk may have stated it, which only a pass in order sees.
  std::vector<int> items_without_heading;
  std::string fatal;  // malformed CSV
};

// Parses one chunk of prices.csv against the state as it was before the block.
void ParsePriceChunk(std::string_view data, int64_t first_line, const PriceColumns& columns,
                     const std::string& path, const LoadState& state, bool keep_all_rejected,
                     size_t max_rejected, ChunkResult* out) {
  CsvReader reader(data, first_line, /*skip_bom=*/false);
  CsvRecord record;
  // A quote row takes at least about a dozen bytes.
  const size_t expected_rows = data.size() / 12 + 16;
  out->quotes.region.reserve(expected_rows);
  out->quotes.item.reserve(expected_rows);
  out->quotes.log_price.reserve(expected_rows);
  if (columns.representative >= 0) out->quotes.representative.reserve(expected_rows);
  // Copies, not views: a field unescaped into record.scratch is overwritten
  // (or freed) by the next record.
  std::string last_region, last_item;
  int region_local = -1, item_local = -1;
  // Per local item, the local item that followed it last (-1: none yet).
  std::vector<int> successor;
  const bool has_heading = columns.heading >= 0;
  const bool has_flag = columns.representative >= 0;

  while (reader.Next(&record)) {
    ++out->rows_read;
    auto reject = [&](int column, const std::string& what) {
      if (keep_all_rejected || out->rejected.size() < max_rejected) {
        out->rejected.push_back({path, record.line, LocatedMessage(path, record.line, column, what),
                                 std::string(record.raw)});
      } else {
        ++out->num_rejected_not_kept;
      }
    };
    const auto& fields = record.fields;
    if (static_cast<int>(fields.size()) != columns.num_fields) {
      reject(0, FieldCountProblem(fields.size(), columns.num_fields));
      continue;
    }
    // Region.
    std::string_view region = fields[columns.region];
    if (region_local < 0 || !internal::EqualBytes(region, last_region)) {
      const std::string_view code = Trim(region);
      if (std::string problem = CheckCode(code, "region"); !problem.empty()) {
        reject(columns.region + 1, problem);
        continue;
      }
      if (state.regions_fixed && state.regions.Find(code) < 0) {
        reject(columns.region + 1,
               "region " + QuoteValue(code) + " is not in " + state.config->survey.regions);
        continue;
      }
      region_local = out->regions.Intern(code);
      last_region = region;
    }
    // Item and its heading.
    std::string_view item = fields[columns.item];
    if (item_local < 0 || !internal::EqualBytes(item, last_item)) {
      // Rows run through the items in much the same order in every region,
      // so the item that followed this one last time is tried before the
      // table: a byte comparison instead of a hash and a probe. A code in
      // the table is trimmed and valid, so a match needs no further check.
      const int previous = item_local;
      const int guess = previous >= 0 ? successor[previous] : -1;
      if (guess >= 0 && internal::EqualBytes(out->items.Code(guess), item)) {
        item_local = guess;
      } else {
        const std::string_view code = Trim(item);
        if (std::string problem = CheckCode(code, "item"); !problem.empty()) {
          reject(columns.item + 1, problem);
          item_local = -1;
          continue;
        }
        const int index = out->items.Intern(code);
        if (index == static_cast<int>(out->item_info.size())) {
          // An item known before this block counts only once its heading is known.
          int global = state.items.Find(code);
          if (global >= 0 && state.item_heading[global] < 0) global = -1;
          out->item_info.push_back({global, -1, 0});
          successor.push_back(-1);
        }
        if (previous >= 0) successor[previous] = index;
        item_local = index;
      }
      last_item = item;
    }
    LocalItem& info = out->item_info[item_local];
    // A heading first stated by this row counts only once the row is used,
    // so a rejected row never files an item.
    int new_heading = -1;
    if (info.global < 0 || has_heading) {
      const std::string_view heading =
          has_heading ? Trim(fields[columns.heading]) : std::string_view();
      const std::string_view item_code = out->items.Code(item_local);
      if (info.global >= 0) {
        const std::string_view known = state.headings.Code(state.item_heading[info.global]);
        if (!heading.empty() && heading != known) {
          reject(columns.heading + 1, "item " + QuoteValue(item_code) + " is filed under heading " +
                                          QuoteValue(heading) + " but under " + QuoteValue(known) +
                                          " at " + state.item_origin[info.global]);
          continue;
        }
      } else if (heading.empty()) {
        if (info.local_heading < 0) {
          std::string what;
          if (!has_heading) {
            what = "item " + QuoteValue(item_code) + " is not in " + state.config->survey.items;
          } else if (state.has_catalog) {
            what = "heading is empty and item " + QuoteValue(item_code) + " is not in " +
                   state.config->survey.items;
          } else {
            what = "heading is empty";
          }
          if (has_heading) out->items_without_heading.push_back(item_local);
          reject(has_heading ? columns.heading + 1 : columns.item + 1, what);
          continue;
        }
      } else {
        if (std::string problem = CheckCode(heading, "heading"); !problem.empty()) {
          reject(columns.heading + 1, problem);
          continue;
        }
        if (state.headings_fixed && state.headings.Find(heading) < 0) {
          reject(columns.heading + 1,
                 "heading " + QuoteValue(heading) + " is not in the classification");
          continue;
        }
        if (info.local_heading < 0) {
          new_heading = out->headings.Intern(heading);
        } else if (out->headings.Code(info.local_heading) != heading) {
          reject(columns.heading + 1, "item " + QuoteValue(item_code) + " is filed under heading " +
                                          QuoteValue(heading) + " but under " +
                                          QuoteValue(out->headings.Code(info.local_heading)) +
                                          " at line " + std::to_string(info.line));
          continue;
        }
      }
    }
    // Price and flag.
    const std::string_view price_text = fields[columns.price];
    double price = 0.0;
    const NumberStatus status = ParseNumber(price_text, &price);
    if (status != NumberStatus::kOk) {
      reject(columns.price + 1, NumberProblem(status, "price", price_text));
      continue;
    }
    if (!(price > 0)) {
      reject(columns.price + 1, "price " + QuoteValue(price_text) + " is not a positive number");
      continue;
    }
    bool representative = false;
    if (has_flag) {
      const std::string_view flag = Trim(fields[columns.representative]);
      if (!flag.empty() && !ParseFlag(flag, &representative)) {
        reject(columns.representative + 1,
               "representative " + QuoteValue(flag) + " is not one of 1/0, yes/no, true/false");
        continue;
      }
    }
    if (new_heading >= 0) {
      info.local_heading = new_heading;
      info.line = record.line;
    }
    out->quotes.region.push_back(region_local);
    out->quotes.item.push_back(item_local);
    out->quotes.log_price.push_back(std::log(price));
    if (has_flag) out->quotes.representative.push_back(representative ? 1 : 0);
    ++out->rows_used;
  }
  if (!reader.error().empty()) out->fatal = path + ":" + reader.error();
}

// Counts '\n' in `data`. Per 4 KiB a 32-bit count, which the compiler keeps
// in vector lanes, is several times faster than std::count's 64-bit one.
int64_t CountNewlines(std::string_view data) {
  const char* p = data.data();
  size_t left = data.size();
  int64_t total = 0;
  while (left > 0) {
    const size_t n = std::min<size_t>(left, 4096);
    uint32_t count = 0;
    for (size_t i = 0; i < n; ++i) count += p[i] == '\n';
    total += count;
    p += n;
    left -= n;
  }
  return total;
}

// Chunk start offsets at record boundaries, about kChunkBytes apart.
std::vector<size_t> ChunkStarts(std::string_view data) {
  std::vector<size_t> starts = {0};
  const bool has_quotes = std::memchr(data.data(), '"', data.size()) != nullptr;
  if (!has_quotes) {
    size_t next = kChunkBytes;
    while (next < data.size()) {
      const size_t newline = data.find('\n', next);
      if (newline == std::string_view::npos || newline + 1 >= data.size()) break;
      starts.push_back(newline + 1);
      next = newline + 1 + kChunkBytes;
    }
    return starts;
  }
  bool quoted = false;
  size_t next = kChunkBytes;
  for (size_t i = 0; i + 1 < data.size(); ++i) {
    const char c = data[i];
    if (c == '"') quoted = !quoted;
    if (c == '\n' && !quoted && i + 1 >= next) {
      starts.push_back(i + 1);
      next = i + 1 + kChunkBytes;
    }
  }
  return starts;
}

class PriceReader {
 public:
  PriceReader(const std::string& path, const LoadOptions& options, LoadState* state,
              Rejections* rejections, InputFileSummary* file)
      : path_(path), options_(options), state_(state), rejections_(rejections), file_(file) {}

  bool Read(std::string* error) {
    std::FILE* stream = std::fopen(path_.c_str(), "rb");
    if (stream == nullptr) {
      *error = path_ + ": cannot open file: " + std::strerror(errno);
      return false;
    }
    std::string buffer;
    bool ok = ReadBlocks(stream, &buffer, error);
    std::fclose(stream);
    file_->sha256 = digest_.HexDigest();
    return ok;
  }

 private:
  bool ReadBlocks(std::FILE* stream, std::string* buffer, std::string* error) {
    size_t block = static_cast<size_t>(std::max<int64_t>(options_.block_bytes, 1 << 16));
    // A block larger than the file would only cost zero-filling the buffer.
    std::error_code size_error;
    const uintmax_t file_bytes = std::filesystem::file_size(path_, size_error);
    if (!size_error && file_bytes + 1 < block) block = std::max<size_t>(file_bytes + 1, 1 << 16);
    size_t carried = 0;  // bytes of an incomplete record kept from the last block
    int64_t line = 1;
    bool header_done = false;
    bool at_eof = false;
    while (!at_eof) {
      // The buffer only grows (a record longer than a block), so it is
      // zero-filled once rather than for every block.
      if (buffer->size() < carried + block) buffer->resize(carried + block);
      const size_t got = std::fread(buffer->data() + carried, 1, block, stream);
      if (std::ferror(stream)) {
        *error = path_ + ": cannot read file: " + std::strerror(errno);
        return false;
      }
      at_eof = got < block;
      file_->size_bytes += static_cast<int64_t>(got);
      // The new bytes are hashed alongside the parse of their block.
      std::string_view fresh(buffer->data() + carried, got);
      std::string_view data(buffer->data(), carried + got);
      bytes_seen_ += got;
      size_t start = 0;
      if (!header_done) {
        // The header must lie in the first block; a longer header line is
        // read block by block until it ends.
        const size_t end = at_eof ? data.size() : LastRecordEnd(data);
        if (end == 0 && !at_eof) {
          digest_.Update(fresh.data(), fresh.size());
          carried = data.size();
          continue;
        }
        CsvReader reader(data.substr(0, end), 1, /*skip_bom=*/true);
        if (!ReadPriceHeader(&reader, error)) return false;
        start = reader.position();
        line = reader.line();
        header_done = true;
      }
      const size_t end = at_eof ? data.size() : start + LastRecordEnd(data.substr(start));
      int64_t num_newlines = 0;
      if (!ParseBlock(data.substr(start, end - start), line, fresh, &num_newlines, error))
        return false;
      line += num_newlines;
      // Keep the incomplete tail for the next block.
      std::memmove(buffer->data(), buffer->data() + end, data.size() - end);
      carried = data.size() - end;
    }
    if (!header_done) {
      *error = path_ + ": file is empty (expected a header row with columns region, item, price)";
      return false;
    }
    return true;
  }

  bool ReadPriceHeader(CsvReader* reader, std::string* error) {
    Columns found;
    if (!ReadHeader(reader, path_, {"region", "item", "price", "heading", "representative"},
                    {true, true, true, false, false}, &found, file_, error)) {
      return false;
    }
    columns_.region = found.index[0];
    columns_.item = found.index[1];
    columns_.price = found.index[2];
    columns_.heading = found.index[3];
    columns_.representative = found.index[4];
    columns_.num_fields = found.num_fields;
    if (columns_.heading < 0 && !state_->has_catalog) {
      *error =
          path_ +
          ":1: no column 'heading' and no items file (survey.items) to give each item's heading";
      return false;
    }
    return true;
  }

  // Parses one block of whole records starting at line `first_line`, and
  // sets *num_newlines to the newlines it holds.
  bool ParseBlock(std::string_view data, int64_t first_line, std::string_view to_hash,
                  int64_t* num_newlines, std::string* error) {
    *num_newlines = 0;
    if (data.empty()) {
      digest_.Update(to_hash.data(), to_hash.size());
      return true;
    }
    std::vector<size_t> starts = ChunkStarts(data);
    // Newlines per chunk, counted in parallel, give each chunk's first line.
    const int num_starts = static_cast<int>(starts.size());
    std::vector<int64_t> lines(starts.size() + 1, 0);
#pragma omp parallel for schedule(static) num_threads(NumThreads(num_starts))
    for (int c = 0; c < num_starts; ++c) {
      const size_t end = c + 1 < num_starts ? starts[c + 1] : data.size();
      lines[c + 1] = CountNewlines(data.substr(starts[c], end - starts[c]));
    }
    lines[0] = first_line;
    for (size_t c = 1; c < lines.size(); ++c) lines[c] += lines[c - 1];
    *num_newlines = lines.back() - first_line;
    // Chunk results are kept between blocks so their arrays keep their
    // capacity instead of being allocated (and page-faulted) again.
    std::vector<ChunkResult>& results = results_;
    results.resize(starts.size());
    for (ChunkResult& result : results) result.Reset();
    const bool keep_all = options_.invalid_rows == InvalidRowPolicy::kSkip;
    const size_t max_rejected = static_cast<size_t>(std::max(options_.max_reported_rows, 0));
    const int num_chunks = static_cast<int>(starts.size());
    // One more task than chunks: it hashes the block's new bytes while the
    // chunks are parsed (blocks are hashed in order: one block at a time).
#pragma omp parallel for schedule(dynamic, 1) num_threads(NumThreads(num_chunks + 1))
    for (int c = 0; c <= num_chunks; ++c) {
      if (c == num_chunks) {
        digest_.Update(to_hash.data(), to_hash.size());
        continue;
      }
      const size_t end = c + 1 < num_chunks ? starts[c + 1] : data.size();
      ParsePriceChunk(data.substr(starts[c], end - starts[c]), lines[c], columns_, path_, *state_,
                      keep_all, max_rejected, &results[c]);
    }
    if (HasCrossChunkConflict(results)) {
      // Two chunks state different headings for a new item, or a chunk
      // lacks a heading an earlier chunk stated: only a pass in file order
      // can tell which statement comes first.
      results.resize(1);
      results[0].Reset();
      ParsePriceChunk(data, first_line, columns_, path_, *state_, keep_all, max_rejected,
                      &results[0]);
    }
    // Sized before the first block is merged, so the first block's quotes
    // are not copied (and their pages touched) twice.
    int64_t block_rows_read = 0, block_rows_used = 0;
    for (const ChunkResult& result : results) {
      block_rows_read += result.rows_read;
      block_rows_used += result.rows_used;
    }
    ReserveQuotes(block_rows_read, block_rows_used);
    for (ChunkResult& result : results) {
      if (!result.fatal.empty()) {
        *error = result.fatal;
        return false;
      }
      Merge(&result);
    }
    return true;
  }

  // At the first block, sizes the survey's quote arrays for the whole file
  // from the bytes per row seen so far, so they are not copied as they grow.
  void ReserveQuotes(int64_t block_rows_read, int64_t block_rows_used) {
    if (reserved_ || file_->rows_read + block_rows_read == 0) return;
    reserved_ = true;
    std::error_code ec;
    const double file_bytes = static_cast<double>(std::filesystem::file_size(path_, ec));
    if (ec || bytes_seen_ == 0) return;
    const double rows_used = static_cast<double>(file_->rows_used + block_rows_used);
    const double rows = 1.05 * rows_used * file_bytes / static_cast<double>(bytes_seen_);
    const size_t n = static_cast<size_t>(std::min(rows, 4e9));
    QuoteArrays& quotes = state_->quotes;
    quotes.region.reserve(n);
    quotes.item.reserve(n);
    quotes.log_price.reserve(n);
    if (columns_.representative >= 0) quotes.representative.reserve(n);
  }

  int NumThreads(int num_chunks) const {
    const int available = options_.num_threads > 0 ? options_.num_threads : omp_get_max_threads();
    return std::max(1, std::min(available, num_chunks));
  }

  bool HasCrossChunkConflict(const std::vector<ChunkResult>& results) const {
    if (results.size() < 2) return false;
    std::unordered_map<std::string_view, std::string_view> stated;
    for (const ChunkResult& result : results) {
      for (int i : result.items_without_heading) {
        if (stated.count(result.items.Code(i)) > 0) return true;
      }
      for (int i = 0; i < result.items.size(); ++i) {
        const LocalItem& info = result.item_info[i];
        if (info.global >= 0 || info.local_heading < 0) continue;
        auto [it, inserted] =
            stated.emplace(result.items.Code(i), result.headings.Code(info.local_heading));
        if (!inserted && it->second != result.headings.Code(info.local_heading)) return true;
      }
    }
    return false;
  }

  void Merge(ChunkResult* result) {
    file_->rows_read += result->rows_read;
    file_->rows_used += result->rows_used;
    for (RejectedRow& row : result->rejected) rejections_->Add(std::move(row), file_);
    rejections_->Count(result->num_rejected_not_kept, file_);
    std::vector<int> region_map(result->regions.size());
    for (int r = 0; r < result->regions.size(); ++r) {
      region_map[r] = state_->regions.Intern(result->regions.Code(r));
    }
    std::vector<int> item_map(result->items.size());
    for (int i = 0; i < result->items.size(); ++i) {
      const LocalItem& info = result->item_info[i];
      const std::string_view code = result->items.Code(i);
      const int before = state_->items.size();
      const int global = state_->items.Intern(code);
      item_map[i] = global;
      if (global == before) {
        state_->item_heading.push_back(-1);
        state_->item_origin.emplace_back();
        state_->item_description.emplace_back();
        state_->item_unit.emplace_back();
      }
      if (state_->item_heading[global] < 0 && info.local_heading >= 0) {
        // First statement of this item's heading (no items.csv entry).
        state_->item_heading[global] =
            state_->headings.Intern(result->headings.Code(info.local_heading));
        state_->item_origin[global] = "line " + std::to_string(info.line);
      }
    }
    state_->num_quotes += result->rows_used;
    const QuoteArrays& local = result->quotes;
    QuoteArrays& global = state_->quotes;
    for (size_t q = 0; q < local.size(); ++q) {
      global.region.push_back(region_map[local.region[q]]);
      global.item.push_back(item_map[local.item[q]]);
    }
    global.log_price.insert(global.log_price.end(), local.log_price.begin(), local.log_price.end());
    global.representative.insert(global.representative.end(), local.representative.begin(),
                                 local.representative.end());
  }

 private:
  std::string path_;
  const LoadOptions& options_;
  LoadState* state_;
  Rejections* rejections_;
  InputFileSummary* file_;
  PriceColumns columns_;
  internal::Sha256 digest_;
  std::vector<ChunkResult> results_;
  int64_t bytes_seen_ = 0;
  bool reserved_ = false;
};

// ---------------------------------------------------------------------------
// expenditure.csv

bool ReadExpenditure(const std::string& path, LoadState* state, Rejections* rejections,
                     InputFileSummary* file, std::string* error) {
  std::unordered_map<uint64_t, int64_t> first_line;
  auto handle = [&](const CsvRecord& record, const Columns& columns) -> RowVerdict {
    const int kRegion = columns.index[0], kHeading = columns.index[1], kValue = columns.index[2];
    const std::string_view region = Trim(record.fields[kRegion]);
    const std::string_view heading = Trim(record.fields[kHeading]);
    const std::string_view value_text = record.fields[kValue];
    if (std::string problem = CheckCode(region, "region"); !problem.empty()) {
      return {kRegion + 1, problem};
    }
    if (state->regions_fixed && state->regions.Find(region) < 0) {
      return {kRegion + 1,
              "region " + QuoteValue(region) + " is not in " + state->config->survey.regions};
    }
    if (std::string problem = CheckCode(heading, "heading"); !problem.empty()) {
      return {kHeading + 1, problem};
    }
    if (state->headings_fixed && state->headings.Find(heading) < 0) {
      return {kHeading + 1, "heading " + QuoteValue(heading) + " is not in the classification"};
    }
    double value = 0.0;
    const NumberStatus status = ParseNumber(value_text, &value);
    if (status != NumberStatus::kOk) {
      return {kValue + 1, NumberProblem(status, "expenditure", value_text)};
    }
    if (value < 0) {
      return {kValue + 1, "expenditure " + QuoteValue(value_text) + " is negative"};
    }
    const int region_index = state->regions.Intern(region);
    const int heading_index = state->headings.Intern(heading);
    const uint64_t key =
        (static_cast<uint64_t>(region_index) << 32) | static_cast<uint32_t>(heading_index);
    auto [it, inserted] = first_line.emplace(key, record.line);
    if (!inserted) {
      return {0, "duplicate row for region " + QuoteValue(region) + " and heading " +
                     QuoteValue(heading) + " (first at line " + std::to_string(it->second) + ")"};
    }
    state->spending.push_back({region_index, heading_index, value + 0.0});
    return {};
  };
  if (!ReadSmallTable(path, {"region", "heading", "expenditure"}, {true, true, true}, rejections,
                      file, handle, error))
    return false;
  return true;
}

// ---------------------------------------------------------------------------
// Putting the survey together.

std::vector<int> SortedOrder(const CodeTable& table) {
  std::vector<int> order(table.size());
  std::iota(order.begin(), order.end(), 0);
  std::sort(order.begin(), order.end(),
            [&](int a, int b) { return table.Code(a) < table.Code(b); });
  return order;
}

void BuildSurvey(LoadState* state, int num_threads, Survey* survey) {
  // Regions: regions.csv order, else sorted codes.
  std::vector<int> region_order(state->regions.size());
  std::iota(region_order.begin(), region_order.end(), 0);
  if (!state->regions_fixed) region_order = SortedOrder(state->regions);
  std::vector<int> region_new(state->regions.size());
  std::vector<std::string> region_codes;
  for (size_t k = 0; k < region_order.size(); ++k) {
    region_new[region_order[k]] = static_cast<int>(k);
    region_codes.emplace_back(state->regions.Code(region_order[k]));
  }
  survey->regions = CodeTable::FromCodes(region_codes);
  survey->region_name.assign(region_codes.size(), "");
  survey->region_population.assign(region_codes.size(), std::nan(""));
  survey->has_population = false;
  for (size_t r = 0; r < state->region_name.size(); ++r) {
    survey->region_name[region_new[r]] = state->region_name[r];
    survey->region_population[region_new[r]] = state->region_population[r];
    survey->has_population = survey->has_population || !std::isnan(state->region_population[r]);
  }

  // Headings: classification order, else sorted codes under a flat root.
  std::vector<int> heading_new(state->headings.size(), -1);
  if (state->headings_fixed) {
    survey->classification = state->config->classification;
    for (int h = 0; h < state->headings.size(); ++h) heading_new[h] = h;
  } else {
    const std::vector<int> order = SortedOrder(state->headings);
    std::vector<std::string> codes;
    for (size_t k = 0; k < order.size(); ++k) {
      heading_new[order[k]] = static_cast<int>(k);
      codes.emplace_back(state->headings.Code(order[k]));
    }
    survey->classification = Classification::Flat(codes);
  }
  survey->heading_codes = survey->classification.HeadingCodes();

  // Items: by heading, then code. Items whose heading never got stated
  // (all their rows rejected) are dropped.
  std::vector<int> item_order;
  for (int i = 0; i < state->items.size(); ++i) {
    if (state->item_heading[i] >= 0) item_order.push_back(i);
  }
  std::sort(item_order.begin(), item_order.end(), [&](int a, int b) {
    const int ha = heading_new[state->item_heading[a]], hb = heading_new[state->item_heading[b]];
    if (ha != hb) return ha < hb;
    return state->items.Code(a) < state->items.Code(b);
  });
  std::vector<int> item_new(state->items.size(), -1);
  std::vector<std::string> item_codes;
  survey->item_heading.clear();
  survey->item_description.clear();
  survey->item_unit.clear();
  for (size_t k = 0; k < item_order.size(); ++k) {
    const int i = item_order[k];
    item_new[i] = static_cast<int>(k);
    item_codes.emplace_back(state->items.Code(i));
    survey->item_heading.push_back(heading_new[state->item_heading[i]]);
    survey->item_description.push_back(state->item_description[i]);
    survey->item_unit.push_back(state->item_unit[i]);
  }
  survey->items = CodeTable::FromCodes(item_codes);

  // Cells in survey order.
  const int64_t num_quotes = static_cast<int64_t>(state->quotes.size());
  int32_t* quote_region = state->quotes.region.data();
  int32_t* quote_item = state->quotes.item.data();
#pragma omp parallel for schedule(static) num_threads(num_threads)
  for (int64_t q = 0; q < num_quotes; ++q) {
    quote_region[q] = region_new[quote_region[q]];
    quote_item[q] = item_new[quote_item[q]];
  }
  internal::CellsFromQuotes(state->quotes, survey->num_regions(), survey->num_items(), num_threads,
                            &survey->cells);
  state->quotes = QuoteArrays();
  internal::FillHeadingRanges(survey);
  survey->num_quotes = state->num_quotes;

  survey->expenditure =
      Eigen::MatrixXd::Constant(survey->num_regions(), survey->num_headings(), std::nan(""));
  for (const auto& s : state->spending) {
    survey->expenditure(region_new[s.region], heading_new[s.heading]) = s.value;
  }
}

}  // namespace

bool LoadOptions::IsValid(std::string* error) const {
  if (max_reported_rows < 0) {
    *error = "max_reported_rows must be 0 or more";
    return false;
  }
  if (num_threads < 0) {
    *error = "num_threads must be 0 (all cores) or more";
    return false;
  }
  if (block_bytes < 1) {
    *error = "block_bytes must be positive";
    return false;
  }
  return true;
}

std::string LoadSummary::BriefReport() const {
  int64_t quotes = 0;
  for (const auto& file : files) {
    if (file.role == "prices") quotes = file.rows_used;
  }
  return "read " + std::to_string(quotes) + " quotes; " + std::to_string(num_rows_rejected) +
         " row" + (num_rows_rejected == 1 ? "" : "s") + " rejected";
}

bool LoadSurvey(const RunConfig& config, const LoadOptions& options, Survey* survey,
                LoadSummary* summary) {
  *summary = LoadSummary();
  const auto start = std::chrono::steady_clock::now();
  auto fail = [&](const std::string& message) {
    summary->outcome = LoadOutcome::kInvalidInput;
    summary->message = message;
    summary->read_seconds = SecondsSince(start);
    return false;
  };
  std::string error;
  if (!options.IsValid(&error)) return fail("invalid load options: " + error);
  if (!config.IsValid(&error)) return fail(error);

  LoadState state;
  state.config = &config;
  if (config.has_classification) {
    for (const std::string& code : config.classification.HeadingCodes())
      state.headings.Intern(code);
    state.headings_fixed = true;
  }
  Rejections rejections(options, summary);
  auto describe = [](const char* role, const std::string& path, bool given) {
    InputFileSummary file;
    file.role = role;
    file.path = path;
    file.given = given;
    return file;
  };
  summary->files = {describe("regions", config.survey.regions, !config.survey.regions.empty()),
                    describe("items", config.survey.items, !config.survey.items.empty()),
                    describe("prices", config.survey.prices, true),
                    describe("expenditure", config.survey.expenditure, true)};
  InputFileSummary& regions_file = summary->files[0];
  InputFileSummary& items_file = summary->files[1];
  InputFileSummary& prices_file = summary->files[2];
  InputFileSummary& expenditure_file = summary->files[3];

  if (regions_file.given &&
      !ReadRegions(regions_file.path, &state, &rejections, &regions_file, &error)) {
    return fail(error);
  }
  if (items_file.given && !ReadItems(items_file.path, &state, &rejections, &items_file, &error)) {
    return fail(error);
  }
  PriceReader prices(prices_file.path, options, &state, &rejections, &prices_file);
  if (!prices.Read(&error)) return fail(error);
  if (prices_file.rows_read == 0) return fail(prices_file.path + ": no data rows (only a header)");
  if (!ReadExpenditure(expenditure_file.path, &state, &rejections, &expenditure_file, &error)) {
    return fail(error);
  }
  if (expenditure_file.rows_read == 0) {
    return fail(expenditure_file.path + ": no data rows (only a header)");
  }
  summary->read_seconds = SecondsSince(start);

  if (summary->num_rows_rejected > 0 && options.invalid_rows == InvalidRowPolicy::kStop) {
    const int64_t shown = static_cast<int64_t>(summary->rejected_rows.size());
    std::string message = std::to_string(summary->num_rows_rejected) + " invalid row" +
                          (summary->num_rows_rejected == 1 ? "" : "s");
    if (shown < summary->num_rows_rejected)
      message += " (the first " + std::to_string(shown) + " shown)";
    message += "; fix them, or set invalid_rows: skip to leave them out";
    return fail(message);
  }
  if (prices_file.rows_used == 0) {
    return fail(prices_file.path + ": no usable price quotes (all " +
                std::to_string(prices_file.rows_read) + " rows rejected)");
  }

  const auto cells_start = std::chrono::steady_clock::now();
  BuildSurvey(&state, options.num_threads > 0 ? options.num_threads : omp_get_max_threads(),
              survey);
  summary->cells_seconds = SecondsSince(cells_start);
  summary->outcome = LoadOutcome::kOk;
  summary->message = "ok";
  return true;
}

std::string RejectedRowsCsv(const std::vector<RejectedRow>& rows) {
  std::string out = "file,line,reason,raw\n";
  for (const RejectedRow& row : rows) {
    AppendCsvField(row.file, &out);
    out += ',';
    out += std::to_string(row.line);
    out += ',';
    AppendCsvField(row.reason, &out);
    out += ',';
    AppendCsvField(row.raw, &out);
    out += '\n';
  }
  return out;
}

}  // namespace paritas
