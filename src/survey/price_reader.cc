// Reads prices.csv, which can hold tens of millions of quotes, in blocks
// that are split at record boundaries into fixed-size chunks parsed in
// parallel while the next block is read. Each chunk interns codes locally
// and writes its quotes straight into its own slice of the survey's arrays
// (room for one quote per record, so a slice is known before the parse);
// chunks are merged in file order and the gaps left by rejected rows closed,
// so the result does not depend on the number of threads, and the text of
// at most two blocks is held at once.
#include <omp.h>
#include <unistd.h>

#include <algorithm>
#include <array>
#include <cerrno>
#include <cmath>
#include <cstdlib>
#include <cstring>
#include <filesystem>
#include <functional>
#include <limits>
#include <new>
#include <string>
#include <unordered_map>
#include <utility>
#include <vector>

#include "base/equal_bytes.h"
#include "base/huge_pages.h"
#include "base/magnitude.h"
#include "base/plain_decimal.h"
#include "base/sha256.h"
#include "paritas/base/csv.h"
#include "paritas/base/text.h"
#include "survey/loader_state.h"

namespace paritas::internal {
namespace {


struct PriceColumns {
  int region = -1, item = -1, price = -1, heading = -1, representative = -1;
  int weight = -1, quantity = -1;
  int num_fields = 0;
  std::vector<std::string> names;  // the header's names
  CsvFormat format;
  // The key naming the file in messages on its decimal mark: "survey.prices",
  // or "survey.prices[1]" when several files are read.
  std::string setting;
  // Fields in the order they are hashed for duplicates (our columns in
  // PriceColumnNames() order, then the others by header name), each with a
  // hash of its column's name, so rows of files whose columns are ordered
  // or named differently compare by meaning.
  std::vector<int> hash_order;
  std::vector<uint64_t> hash_name;
};

// What a chunk knows about an item it has seen: 16 bytes, read at every row
// (rows in random order visit thousands of items, and these entries must
// stay in the cache beside the code tables).
struct LocalItem {
  int global = -1;         // index in LoadState::items when known before the block
  int local_heading = -1;  // local heading index when first stated in this chunk
  int rejected = -1;       // index in LoadState::rejected_codes when items.csv rejected it
  // True once a used row gave a quantity for the item without a reference.
  bool quantity_without_reference = false;
};

// Rows of a chunk that filed an item under a heading other than its first.
struct ConflictCount {
  std::string item;
  std::string heading;
  int64_t num_rows = 0;
  int64_t first_line = 0;
};

// The codes known before a block, for a lookup in one slot read: the
// survey's regions (when regions.csv fixed them) and its items that have a
// heading, each code of 1 to 8 bytes (a longer code, or an item whose
// heading is longer, is looked up the general way). An item's slot holds
// its heading too, so a row restating the known heading is settled by the
// same read. Built by the reader before each block; only read while the
// chunks are parsed.
class KnownCodes {
 public:
  // 16 bytes, so that the tables of a survey's codes stay in the cache.
  struct Slot {
    uint64_t word = 0;          // the code as ShortWord gives it
    int32_t index = -1;         // the survey's index; -1: empty slot
    uint8_t size = 0;           // bytes of the code
    uint8_t heading_size = 0;   // items: bytes of the heading's code
    uint16_t heading = 0;       // items: the heading's index (see HeadingWord)
  };

  // Holds the regions of `regions` when `with_regions`, and the items of
  // `items` whose item_heading is set.
  void Build(bool with_regions, const CodeTable& regions, const CodeTable& items,
             const std::vector<int>& item_heading, const CodeTable& headings) {
    region_slots_.clear();
    item_slots_.clear();
    heading_words_.clear();
    if (with_regions) {
      Prepare(regions.size(), &region_slots_, &region_shift_);
      for (int r = 0; r < regions.size(); ++r) {
        Insert(regions.Code(r), r, {}, 0, &region_slots_, region_shift_);
      }
    }
    const int num_headings = std::min(headings.size(), 1 << 16);
    for (int h = 0; h < num_headings; ++h) {
      const std::string_view heading = headings.Code(h);
      heading_words_.push_back(ShortWord(heading.data(), std::min<size_t>(heading.size(), 8)));
    }
    Prepare(items.size(), &item_slots_, &item_shift_);
    for (int i = 0; i < items.size(); ++i) {
      const int h = item_heading[i];
      if (h < 0 || h >= num_headings || headings.Code(h).size() > 8) continue;
      Insert(items.Code(i), i, headings.Code(h), h, &item_slots_, item_shift_);
    }
  }

  // The code of the slot's heading (up to its first 8 bytes) as ShortWord gives it.
  uint64_t HeadingWord(const Slot& slot) const { return heading_words_[slot.heading]; }

  // Starts loading the slots of `region` and `item` into the cache, so that
  // their lookups, a little later, need not wait for memory.
  void Prefetch(std::string_view region, std::string_view item) const {
    Prefetch(region, region_slots_, region_shift_);
    Prefetch(item, item_slots_, item_shift_);
  }

  // The slot of region or item `code` (1 to 8 bytes, trimmed), or nullptr.
  const Slot* FindRegion(std::string_view code) const {
    return Find(code, region_slots_, region_shift_);
  }
  const Slot* FindItem(std::string_view code) const {
    return Find(code, item_slots_, item_shift_);
  }

 private:
  static size_t SlotOf(uint64_t word, size_t size, int shift) {
    return static_cast<size_t>(((word ^ (uint64_t{size} << 59)) * 0x9e3779b97f4a7c15ULL) >>
                               shift);
  }

  // At most half full, at least 16 slots.
  static void Prepare(int num_codes, std::vector<Slot>* slots, int* shift) {
    int bits = 4;
    while ((size_t{1} << bits) < 2 * static_cast<size_t>(num_codes)) ++bits;
    slots->assign(size_t{1} << bits, Slot());
    *shift = 64 - bits;
  }

  static void Insert(std::string_view code, int index, std::string_view heading, int heading_index,
                     std::vector<Slot>* slots, int shift) {
    if (code.empty() || code.size() > 8) return;
    const uint64_t word = ShortWord(code.data(), code.size());
    const size_t mask = slots->size() - 1;
    size_t at = SlotOf(word, code.size(), shift);
    while ((*slots)[at].index >= 0) at = (at + 1) & mask;
    (*slots)[at] = {word, index, static_cast<uint8_t>(code.size()),
                    static_cast<uint8_t>(heading.size()), static_cast<uint16_t>(heading_index)};
  }

  static void Prefetch(std::string_view code, const std::vector<Slot>& slots, int shift) {
    if (slots.empty() || code.empty() || code.size() > 8) return;
    __builtin_prefetch(&slots[SlotOf(ShortWord(code.data(), code.size()), code.size(), shift)]);
  }

  static const Slot* Find(std::string_view code, const std::vector<Slot>& slots, int shift) {
    if (slots.empty() || code.empty() || code.size() > 8) return nullptr;
    const uint64_t word = ShortWord(code.data(), code.size());
    const size_t mask = slots.size() - 1;
    for (size_t at = SlotOf(word, code.size(), shift);; at = (at + 1) & mask) {
      const Slot& slot = slots[at];
      if (slot.index < 0) return nullptr;
      if (slot.word == word && slot.size == code.size()) return &slot;
    }
  }

  std::vector<Slot> region_slots_, item_slots_;
  std::vector<uint64_t> heading_words_;
  int region_shift_ = 64, item_shift_ = 64;
};

// Where a chunk writes its quotes: its slice of the survey's arrays, with
// room for `capacity` rows (its records, bounded by its line feeds); a
// column the file lacks is nullptr.
struct QuoteSlice {
  int32_t* region = nullptr;
  int32_t* item = nullptr;
  double* log_price = nullptr;
  uint8_t* representative = nullptr;
  double* weight = nullptr;
  uint64_t* row_hash = nullptr;
  size_t capacity = 0;

  // Maps the slice's pages in one call per array, by the thread that is
  // about to fill them (a page fault per 4 KiB as the rows were written cost
  // the parse a fifth of its time on the benchmark machine).
  void MapForWriting() const {
    ForEachQuoteArray(*this, [this](const auto* array) {
      internal::MapForWriting(array, capacity * sizeof(*array));
    });
  }
};

struct ChunkResult {
  CodeTable regions;
  CodeTable items;
  CodeTable headings;
  std::vector<LocalItem> item_info;
  // Per local item, the line of the row that first stated its heading here.
  std::vector<int64_t> item_line;
  // Quotes used (rows_used of them), written straight into the slice of
  // the survey's arrays from quote `first_quote` on, with chunk-local region
  // and item indices until the chunk is merged; their lines.
  QuoteSlice slice;
  size_t first_quote = 0;
  QuoteLines lines;
  // Local index -> the survey's, set when the chunk is merged (regions:
  // empty when the chunk holds the survey's indices already).
  std::vector<int> region_map, item_map;
  // Items in the slice: below item_base the survey's index of an item known
  // before the block (with its heading), else item_base + the local index.
  int item_base = 0;

  // Empties the result, keeping the capacity of its arrays.
  void Reset() {
    regions = CodeTable();
    items = CodeTable();
    headings = CodeTable();
    item_info.clear();
    item_line.clear();
    slice = QuoteSlice();
    first_quote = 0;
    lines.Clear();
    region_map.clear();
    item_map.clear();
    rejected.clear();
    num_rejected_not_kept = 0;
    rows_read = 0;
    rows_used = 0;
    num_rows_without_reference = 0;
    items_without_heading.clear();
    items_with_local_origin.clear();
    rejected_first_statements.clear();
    fatal.clear();
    cascade_rows.clear();
    num_cascade_not_kept = 0;
    conflicts.clear();
    conflict_index.clear();
  }
  std::vector<RejectedRow> rejected;
  // Rejected rows beyond the ones kept for the message (under kStop).
  int64_t num_rejected_not_kept = 0;
  int64_t rows_read = 0;
  int64_t rows_used = 0;
  // Rows used whose quantity was taken per 1 unit (no reference_quantity).
  int64_t num_rows_without_reference = 0;
  // Local items rejected for an empty heading before this chunk stated one;
  // an earlier chunk may have stated it, which only a pass in order sees.
  std::vector<int> items_without_heading;
  // Local items whose heading conflict named the line of this chunk that
  // first stated their heading; an earlier chunk may have stated it first.
  std::vector<int> items_with_local_origin;
  // (local item, local heading) of rows that were the chunk's first to state
  // a new item's heading and were rejected for a later field (the price,
  // say): had an earlier chunk stated another heading, a pass in order
  // would have rejected them for the conflict instead.
  std::vector<std::pair<int, int>> rejected_first_statements;
  std::string fatal;  // malformed CSV
  // Rows left out per rejected code (index in LoadState::rejected_codes),
  // and how many of them were not kept.
  std::unordered_map<int, int64_t> cascade_rows;
  int64_t num_cascade_not_kept = 0;
  // Heading conflicts in order of first appearance; "item\0heading" -> index.
  std::vector<ConflictCount> conflicts;
  std::unordered_map<std::string, int> conflict_index;
};

std::string Shortest(double value) {
  std::string text;
  AppendShortest(value, &text);
  return text;
}

// FNV-1a over bytes.
uint64_t Fnv1a(std::string_view text, uint64_t h = 14695981039346656037ull) {
  for (char c : text) h = (h ^ static_cast<unsigned char>(c)) * 1099511628211ull;
  return h;
}

// Hashes every field with its column's name and its length, in the
// columns' hash order, so rows equal field for field (and only those, up to
// a 2^-64 chance) hash alike, in one file or across files. A field is read
// 8 bytes at a time, each word mixed in by one multiply-fold (a byte-wise
// hash cost a multiplication per byte, most of the row's parse); a field of
// up to 8 bytes (most) takes one multiply-fold with its name and length.
uint64_t HashFields(const CsvRecord& record, const PriceColumns& columns) {
  constexpr uint64_t kOdd = 0x9e3779b97f4a7c15ULL;
  uint64_t h = 0x243f6a8885a308d3ULL;
  for (size_t k = 0; k < columns.hash_order.size(); ++k) {
    const std::string_view field = record.fields[columns.hash_order[k]];
    const size_t n = field.size();
    // Name and length in one word: names hash apart, lengths are small.
    const uint64_t name = columns.hash_name[k] + n;
    if (n <= 8) {
      h = MultiplyFold(h ^ ShortWord(field.data(), n), name ^ kOdd);
      continue;
    }
    h = MultiplyFold(h ^ name, kOdd);
    size_t i = 0;
    for (; i + 8 <= n; i += 8) {
      uint64_t word;
      std::memcpy(&word, field.data() + i, 8);
      h = MultiplyFold(h ^ word, kOdd);
    }
    if (i < n) h = MultiplyFold(h ^ ShortWord(field.data() + i, n - i), kOdd);
  }
  return h;
}

// Where an item's heading was first stated, at `line` of the price file
// `path`: "line 40" when the survey has one price file, "rent.csv:40" when
// it has several. The same text whether the statement was merged from an
// earlier chunk or block or is in the chunk at hand, so a message does not
// depend on where blocks end.
std::string ItemOrigin(const LoadState& state, const std::string& path, int64_t line) {
  return state.config->survey.prices.size() == 1 ? "line " + std::to_string(line)
                                                 : path + ":" + std::to_string(line);
}

// Parses one chunk of prices.csv against the state as it was before the
// block. The row is read field by field; each step returns false once it has
// rejected the row.
class ChunkParser {
 public:
  ChunkParser(std::string_view data, int64_t first_line, const PriceColumns& columns,
              const std::string& path, const LoadState& state, const KnownCodes& known,
              bool keep_all_rejected, size_t max_rejected, ChunkResult* out)
      : data_(data),
        reader_(data, first_line, /*skip_bom=*/false),
        columns_(columns),
        path_(path),
        state_(state),
        known_(known),
        keep_all_rejected_(keep_all_rejected),
        max_rejected_(max_rejected),
        out_(out),
        has_heading_(columns.heading >= 0),
        has_flag_(columns.representative >= 0),
        has_weight_(columns.weight >= 0),
        has_quantity_(columns.quantity >= 0) {
    reader_.set_limits(state.config->limits);
    reader_.set_delimiter(columns.format.delimiter);
    local_of_known_.assign(state.items.size(), -1);
    out->item_base = state.items.size();
    fast_items_ = !has_quantity_;
  }

  void Run() {
    while (reader_.Next(&record_)) {
      ++out_->rows_read;
      int64_t line = 0;
      int column = 0;
      std::string problem;
      // A record the reader found all ASCII needs no UTF-8 check (and no call).
      if (!record_.ascii && RowUtf8Problem(record_, columns_.format.delimiter, columns_.names,
                                           &line, &column, &problem)) {
        Reject(column, problem, line);
        continue;
      }
      if (static_cast<int>(record_.fields.size()) != columns_.num_fields) {
        Reject(FieldCountColumn(record_.fields.size(), columns_.num_fields),
               FieldCountProblem(record_.fields.size(), columns_.num_fields));
        continue;
      }
      // The codes' slots are loaded while the price is read and the row
      // hashed (both pure, used once the row gets that far).
      known_.Prefetch(record_.fields[columns_.region],
                      fast_items_ ? record_.fields[columns_.item] : std::string_view());
      const std::string_view price_text = record_.fields[columns_.price];
      price_status_ =
          ParsePlainDecimal(price_text, columns_.format.decimal, &price_value_)
              ? NumberStatus::kOk
              : ParseNumber(price_text, &price_value_, columns_.format.decimal);
      const uint64_t row_hash = HashFields(record_, columns_);
      if (!ReadRegion()) continue;
      // An item known before the block with the row's heading (or none) is
      // settled by one lookup; the rest take the general way.
      int item = KnownItem();
      double price = 0.0, weight = 1.0;
      bool representative = false;
      if (item >= 0) {
        if (!ReadPrice(&price) || !ReadFlag(&representative) ||
            !ReadPositive(columns_.weight, "weight", &weight)) {
          continue;
        }
      } else {
        if (!ReadItem()) continue;
        LocalItem& info = out_->item_info[item_local_];
        if (info.rejected >= 0) {
          RejectCascade(columns_.item + 1, info.rejected);
          continue;
        }
        // A heading first stated by this row counts only once the row is
        // used, so a rejected row never files an item.
        int new_heading = -1;
        if ((info.global < 0 || has_heading_) && !ReadHeading(info, &new_heading)) continue;
        if (!ReadPrice(&price) || !ReadFlag(&representative) ||
            !ReadPositive(columns_.weight, "weight", &weight) || !ConvertPrice(&info, &price)) {
          if (new_heading >= 0) out_->rejected_first_statements.emplace_back(item_local_, new_heading);
          continue;
        }
        if (new_heading >= 0) {
          info.local_heading = new_heading;
          out_->item_line[item_local_] = record_.line;
        }
        item = out_->item_base + item_local_;
      }
      // Every used row is a record, and the slice has room for them all;
      // checked in every build, as a write past it would corrupt the next.
      const size_t q = static_cast<size_t>(out_->rows_used++);
      if (q >= out_->slice.capacity) std::abort();
      QuoteSlice& slice = out_->slice;
      slice.region[q] = region_local_;
      slice.item[q] = item;
      slice.log_price[q] = std::log(price);
      if (has_flag_) slice.representative[q] = representative ? 1 : 0;
      if (has_weight_) slice.weight[q] = weight;
      slice.row_hash[q] = row_hash;
      out_->lines.Add(q, record_.line);
    }
    if (!reader_.error().empty()) out_->fatal = path_ + ":" + reader_.error();
  }

 private:
  // Rejects the row for `what` at `column` of `line` (0: the row's first line).
  void Reject(int column, const std::string& what, int64_t line = 0,
              RejectionCause cause = RejectionCause::kRow) {
    // Under kStop rows of rejected codes are not kept (see
    // Rejections::KeepsRow); they are described once per code.
    if (keep_all_rejected_ ||
        (cause != RejectionCause::kRejectedCode && out_->rejected.size() < max_rejected_)) {
      RejectedRow row{path_, record_.line,
                      LocatedMessage(path_, line > 0 ? line : record_.line, column, what),
                      std::string(record_.raw)};
      row.cause = cause;
      out_->rejected.push_back(std::move(row));
    } else if (cause == RejectionCause::kRejectedCode) {
      ++out_->num_cascade_not_kept;
    } else {
      ++out_->num_rejected_not_kept;
    }
  }

  // Rejects the row because its region or item (rejected code `code`) was
  // rejected in regions.csv or items.csv.
  void RejectCascade(int column, int code) {
    ++out_->cascade_rows[code];
    Reject(column, RejectedCodeReason(state_.rejected_codes[code]), 0,
           RejectionCause::kRejectedCode);
  }

  // Rejects the row for filing its item under `heading`, not `first` (stated at `origin`).
  void RejectConflict(std::string_view item, std::string_view heading, std::string_view first,
                      const std::string& origin) {
    std::string key = std::string(item) + '\0' + std::string(heading);
    const auto [it, inserted] =
        out_->conflict_index.emplace(std::move(key), static_cast<int>(out_->conflicts.size()));
    if (inserted) {
      out_->conflicts.push_back({std::string(item), std::string(heading), 0, record_.line});
    }
    ++out_->conflicts[it->second].num_rows;
    Reject(columns_.heading + 1,
           "item " + QuoteValue(item) + " is filed under heading " + QuoteValue(heading) +
               " but under " + QuoteValue(first) + " at " + origin,
           0, RejectionCause::kHeadingConflict);
  }

  // The survey's index of the row's item when it was known before the
  // block with a heading, and the row's heading is empty or that one (the
  // general way would accept the item as it stands); else -1.
  int KnownItem() const {
    if (!fast_items_) return -1;
    const std::string_view code = record_.fields[columns_.item];
    if (code.empty() || IsBlank(code.front()) || IsBlank(code.back())) return -1;
    const KnownCodes::Slot* slot = known_.FindItem(code);
    if (slot == nullptr) return -1;
    if (has_heading_) {
      const std::string_view heading = record_.fields[columns_.heading];
      if (!heading.empty() && (heading.size() != slot->heading_size ||
                               ShortWord(heading.data(), heading.size()) !=
                                   known_.HeadingWord(*slot))) {
        return -1;
      }
    }
    return slot->index;
  }

  static bool IsBlank(char c) { return c == ' ' || c == '\t'; }

  bool ReadRegion() {
    const std::string_view region = record_.fields[columns_.region];
    if (!region.empty() && !IsBlank(region.front()) && !IsBlank(region.back())) {
      if (const KnownCodes::Slot* slot = known_.FindRegion(region); slot != nullptr) {
        region_local_ = slot->index;
        return true;
      }
    }
    if (region_cached_ && EqualBytes(region, last_region_)) return true;
    const std::string_view code = Trim(region);
    // With regions.csv every region is known before the first block, and the
    // global table is only read while chunks are parsed: one lookup gives
    // the survey's index (a code in the table is trimmed and valid).
    if (state_.regions_fixed) {
      if (const int global = state_.regions.Find(code); global >= 0) {
        region_local_ = global;
        region_cached_ = Remember(region, &last_region_);
        return true;
      }
    }
    if (std::string problem = CheckCode(code, "region"); !problem.empty()) {
      Reject(columns_.region + 1, problem);
      return false;
    }
    if (state_.regions_fixed) {
      const auto rejected = state_.rejected_region_index.find(std::string(code));
      if (rejected != state_.rejected_region_index.end()) {
        RejectCascade(columns_.region + 1, rejected->second);
      } else {
        Reject(columns_.region + 1,
               "region " + QuoteValue(code) + " is not in " + state_.config->survey.regions);
      }
      return false;
    }
    region_local_ = out_->regions.Intern(code);
    region_cached_ = Remember(region, &last_region_);
    return true;
  }

  bool ReadItem() {
    const std::string_view item = record_.fields[columns_.item];
    if (item_cached_ && EqualBytes(item, last_item_)) return true;
    // A code known before this block (items.csv, or an earlier block) is
    // one lookup in the survey's table, read-only while the chunks are
    // parsed and valid by construction; the chunk's own table interns only
    // the codes it has not seen before. (Guessing the item that followed
    // this one last time saved nothing once a table slot settles a short
    // code in one read, and rows in random order defeat it.)
    const std::string_view code = Trim(item);
    const int known = state_.items.empty() ? -1 : state_.items.Find(code);
    int index = known >= 0 ? local_of_known_[known] : -1;
    if (index < 0) index = InternItem(code, known);
    if (index < 0) {
      item_local_ = -1;
      item_cached_ = false;
      return false;
    }
    item_local_ = index;
    item_cached_ = Remember(item, &last_item_);
    return true;
  }

  // Keeps a view of `field` in *last when it points into the chunk's text,
  // which outlives the record (a field unescaped into the record's scratch
  // does not); returns whether it did.
  bool Remember(std::string_view field, std::string_view* last) const {
    const auto at = reinterpret_cast<uintptr_t>(field.data());
    const auto begin = reinterpret_cast<uintptr_t>(data_.data());
    if (at < begin || at + field.size() > begin + data_.size()) return false;
    *last = field;
    return true;
  }

  // Returns the chunk-local index of item `code` (`known`: its index in the
  // survey's table, or -1), adding it at its first row in the chunk; -1
  // after rejecting the row for an invalid code.
  int InternItem(std::string_view code, int known) {
    if (known < 0) {
      if (std::string problem = CheckCode(code, "item"); !problem.empty()) {
        Reject(columns_.item + 1, problem);
        return -1;
      }
    }
    const int index = out_->items.Intern(code);
    if (index == static_cast<int>(out_->item_info.size())) {
      // An item known before this block counts only once its heading is known.
      int global = known;
      if (global >= 0 && state_.item_heading[global] < 0) global = -1;
      int rejected = -1;
      if (global < 0 && !state_.rejected_item_index.empty()) {
        const auto found = state_.rejected_item_index.find(std::string(code));
        if (found != state_.rejected_item_index.end()) rejected = found->second;
      }
      out_->item_info.push_back({global, -1, rejected, false});
      out_->item_line.push_back(0);
    }
    if (known >= 0) local_of_known_[known] = index;
    return index;
  }

  // Checks the row's heading against what is known of the item; sets
  // *new_heading when this row is the first to state it.
  bool ReadHeading(const LocalItem& info, int* new_heading) {
    const std::string_view heading =
        has_heading_ ? Trim(record_.fields[columns_.heading]) : std::string_view();
    const std::string_view item_code = out_->items.Code(item_local_);
    if (info.global >= 0) {
      const std::string_view known = state_.headings.Code(state_.item_heading[info.global]);
      if (!heading.empty() && !EqualBytes(heading, known)) {
        // An invalid heading is reported as such, as for an item first seen
        // here, so the reason does not depend on where a block ends.
        std::string problem = CheckCode(heading, "heading");
        if (problem.empty() && state_.headings_fixed && state_.headings.Find(heading) < 0) {
          problem = "heading " + QuoteValue(heading) + " is not in the classification";
        }
        if (problem.empty()) {
          RejectConflict(item_code, heading, known, state_.item_origin[info.global]);
        } else {
          Reject(columns_.heading + 1, problem);
        }
        return false;
      }
      return true;
    }
    if (heading.empty()) {
      if (info.local_heading >= 0) return true;
      RejectMissingHeading(item_code);
      return false;
    }
    if (std::string problem = CheckCode(heading, "heading"); !problem.empty()) {
      Reject(columns_.heading + 1, problem);
      return false;
    }
    if (state_.headings_fixed && state_.headings.Find(heading) < 0) {
      Reject(columns_.heading + 1,
             "heading " + QuoteValue(heading) + " is not in the classification");
      return false;
    }
    if (info.local_heading < 0) {
      *new_heading = out_->headings.Intern(heading);
    } else if (!EqualBytes(out_->headings.Code(info.local_heading), heading)) {
      out_->items_with_local_origin.push_back(item_local_);
      RejectConflict(item_code, heading, out_->headings.Code(info.local_heading),
                     ItemOrigin(state_, path_, out_->item_line[item_local_]));
      return false;
    }
    return true;
  }

  // Rejects a row whose item has no heading yet: none in the row, and the
  // item neither in items.csv nor stated earlier in this chunk.
  void RejectMissingHeading(std::string_view item_code) {
    std::string what;
    if (!has_heading_) {
      what = "item " + QuoteValue(item_code) + " is not in " + state_.config->survey.items;
    } else if (state_.has_catalog) {
      what = "heading is empty and item " + QuoteValue(item_code) + " is not in " +
             state_.config->survey.items;
    } else {
      what = "heading is empty";
    }
    if (has_heading_) out_->items_without_heading.push_back(item_local_);
    Reject(has_heading_ ? columns_.heading + 1 : columns_.item + 1, what);
  }

  // Checks the price Run read (price_status_, price_value_).
  bool ReadPrice(double* price) {
    const std::string_view price_text = record_.fields[columns_.price];
    const NumberStatus status = price_status_;
    if (status == NumberStatus::kOk) *price = price_value_;
    if (status != NumberStatus::kOk) {
      Reject(columns_.price + 1,
             NumberProblem(status, "price", price_text, columns_.format.decimal, columns_.setting));
      return false;
    }
    if (WithinRange(*price)) return true;
    if (!(*price > 0)) {
      Reject(columns_.price + 1, "price " + QuoteValue(price_text) + " is not a positive number");
    } else {
      Reject(columns_.price + 1, MagnitudeProblem("price", price_text, *price));
    }
    return false;
  }

  bool ReadFlag(bool* representative) {
    if (!has_flag_) return true;
    const std::string_view flag = Trim(record_.fields[columns_.representative]);
    if (!flag.empty() && !ParseFlag(flag, representative)) {
      Reject(columns_.representative + 1,
             "representative " + QuoteValue(flag) + " is not one of 1/0, yes/no, true/false");
      return false;
    }
    return true;
  }

  // Reads the optional number in `column` (-1: absent, *value unchanged),
  // which must be positive and finite when the file has the column.
  bool ReadPositive(int column, const char* what, double* value) {
    if (column < 0) return true;
    const std::string_view text = record_.fields[column];
    const NumberStatus status = ParseNumber(text, value, columns_.format.decimal);
    if (status != NumberStatus::kOk) {
      Reject(column + 1, NumberProblem(status, what, text, columns_.format.decimal,
                                       columns_.setting));
      return false;
    }
    if (WithinRange(*value)) return true;
    if (!(*value > 0)) {
      Reject(column + 1, std::string(what) + " " + QuoteValue(text) + " is not a positive number");
    } else {
      Reject(column + 1, MagnitudeProblem(what, text, *value));
    }
    return false;
  }

  // Converts *price, observed for the row's quantity, to the item's
  // reference quantity: price x reference_quantity / quantity (1 when the
  // item has none, noted for a warning).
  bool ConvertPrice(LocalItem* info, double* price) {
    if (!has_quantity_) return true;
    double quantity = 0.0;
    if (!ReadPositive(columns_.quantity, "quantity", &quantity)) return false;
    // reference_quantity of items.csv; NaN when not given.
    const double reference_quantity = info->global >= 0
                                          ? state_.item_reference_quantity[info->global]
                                          : std::numeric_limits<double>::quiet_NaN();
    const bool without_reference = std::isnan(reference_quantity);
    const double reference = without_reference ? 1.0 : reference_quantity;
    const double converted = *price * reference / quantity;
    if (!WithinRange(converted)) {
      Reject(columns_.quantity + 1,
             "price " + QuoteValue(Trim(record_.fields[columns_.price])) + " for quantity " +
                 QuoteValue(Trim(record_.fields[columns_.quantity])) +
                 " is out of range at the reference quantity (found " + Shortest(converted) +
                 ", outside " + kInputRange.smallest_text + " to " + kInputRange.largest_text + ")");
      return false;
    }
    if (without_reference) {
      info->quantity_without_reference = true;
      ++out_->num_rows_without_reference;
    }
    *price = converted;
    return true;
  }

  const std::string_view data_;
  CsvReader reader_;
  CsvRecord record_;
  const PriceColumns& columns_;
  const std::string& path_;
  const LoadState& state_;
  const KnownCodes& known_;
  const bool keep_all_rejected_;
  const size_t max_rejected_;
  ChunkResult* out_;
  const bool has_heading_;
  const bool has_flag_;
  const bool has_weight_;
  const bool has_quantity_;
  // Whether KnownItem may settle a row (not with a quantity column, whose
  // conversion notes per item whether it had a reference quantity).
  bool fast_items_ = false;
  // The last region and item fields read, when they are views into the
  // chunk's text (see Remember), and their indices.
  std::string_view last_region_, last_item_;
  bool region_cached_ = false, item_cached_ = false;
  int region_local_ = -1, item_local_ = -1;
  // The row's price as ParseNumber read it.
  NumberStatus price_status_ = NumberStatus::kOk;
  double price_value_ = 0.0;
  // Per item of the survey's table, its local index (-1: not seen yet).
  std::vector<int> local_of_known_;
};

void ParsePriceChunk(std::string_view data, int64_t first_line, const PriceColumns& columns,
                     const std::string& path, const LoadState& state, const KnownCodes& known,
                     bool keep_all_rejected, size_t max_rejected, ChunkResult* out) {
  ChunkParser(data, first_line, columns, path, state, known, keep_all_rejected, max_rejected, out)
      .Run();
}

// The bytes of the chunk that starts at `start` of a block of `size` bytes:
// `chunk` (LoadOptions::chunk_bytes), but a quarter of that in the block's
// last two chunks' worth, so that the threads, which all wait for the
// block's last chunk, wait for a short one.
size_t ChunkBytesAt(size_t start, size_t size, size_t chunk) {
  return size - start > 2 * chunk ? chunk : std::max<size_t>(chunk / 4, 1);
}

// Chunk start offsets at record boundaries, ChunkBytesAt apart or a little more.
std::vector<size_t> ChunkStarts(std::string_view data, size_t chunk) {
  std::vector<size_t> starts = {0};
  const bool has_quotes = std::memchr(data.data(), '"', data.size()) != nullptr;
  if (!has_quotes) {
    size_t next = ChunkBytesAt(0, data.size(), chunk);
    while (next < data.size()) {
      const size_t newline = data.find('\n', next);
      if (newline == std::string_view::npos || newline + 1 >= data.size()) break;
      starts.push_back(newline + 1);
      next = newline + 1 + ChunkBytesAt(newline + 1, data.size(), chunk);
    }
    return starts;
  }
  bool quoted = false;
  size_t next = ChunkBytesAt(0, data.size(), chunk);
  for (size_t i = 0; i + 1 < data.size(); ++i) {
    const char c = data[i];
    if (c == '"') quoted = !quoted;
    if (c == '\n' && !quoted && i + 1 >= next) {
      starts.push_back(i + 1);
      next = i + 1 + ChunkBytesAt(i + 1, data.size(), chunk);
    }
  }
  return starts;
}

// Where a block's chunks start and the line each starts on (then the line
// after the block), found by the task that reads the block ahead, so the
// parse of a block starts with no serial pass over its text.
struct ChunkPlan {
  std::vector<size_t> starts;
  std::vector<int64_t> lines;

  // Plans the chunks of `data` (whole records) starting at line
  // `first_line`, about `chunk` bytes each.
  void Make(std::string_view data, int64_t first_line, size_t chunk) {
    starts = ChunkStarts(data, chunk);
    lines.assign(starts.size() + 1, first_line);
    for (size_t c = 0; c < starts.size(); ++c) {
      const size_t end = c + 1 < starts.size() ? starts[c + 1] : data.size();
      lines[c + 1] = lines[c] + CountLineFeeds(data.substr(starts[c], end - starts[c]));
    }
  }
};

class PriceReader {
 public:
  PriceReader(const PriceSource& source, const std::string& setting, const LoadOptions& options,
              double later_bytes, LoadState* state, Rejections* rejections, InputFileSummary* file)
      : later_bytes_(later_bytes),
        path_(source.path),
        source_(source),
        options_(options),
        limits_(state->config->limits),
        format_(source.format),
        state_(state),
        rejections_(rejections),
        file_(file),
        first_quote_(state->quotes.size()) {
    columns_.setting = setting;
  }

  bool Read(std::string* error) {
    CsvBlockReader blocks(path_, std::max<int64_t>(options_.block_bytes, 1 << 16), limits_,
                          format_.delimiter);
    // Nothing is parsed until the first block is read: a first block of two
    // chunks (the later ones growing to block_bytes) is read in a few
    // milliseconds, where a whole block kept the other threads waiting 20-40 ms.
    blocks.set_first_block_bytes(2 * options_.chunk_bytes);
    if (!blocks.Open(error)) return false;
    std::string read_error;
    const bool ok = ReadBlocks(&blocks, &read_error, error);
    // After a failed parse, the bytes up to the block that failed (a block
    // read ahead of it does not count).
    file_->size_bytes = ok || !read_error.empty() ? blocks.num_bytes_read() : bytes_seen_;
    file_->sha256 = digest_.HexDigest();
    return ok;
  }

 private:
  size_t ChunkBytes() const { return static_cast<size_t>(options_.chunk_bytes); }

  // The blocks hold whole records (CsvBlockReader); the first holds the
  // header whole. The next block is read while this one is parsed; a
  // failure to read it (*read_error) counts once this one is done.
  bool ReadBlocks(CsvBlockReader* blocks, std::string* read_error, std::string* error) {
    bool header_done = false;
    CsvBlock block, next;
    ChunkPlan plan, next_plan;
    bool has_block = blocks->Next(&block, read_error);
    while (has_block) {
      bytes_seen_ += static_cast<int64_t>(block.fresh.size());
      std::string_view data = block.records;
      int64_t line = block.first_line;
      if (!header_done && !data.empty()) {
        CsvReader reader(data, line, /*skip_bom=*/false);
        reader.set_limits(limits_);
        reader.set_delimiter(format_.delimiter);
        if (!ReadPriceHeader(&reader, error)) return false;
        data.remove_prefix(reader.position());
        line = reader.line();
        header_done = true;
        plan.Make(data, line, ChunkBytes());
      } else if (!header_done) {
        plan.Make(data, line, ChunkBytes());  // blank lines before the header
      }
      // The new bytes are hashed alongside the parse of their block; the
      // next block is read and planned meanwhile (after the header, which
      // the first block holds whole, every block is records only).
      bool has_next = false;
      const auto read_next = [&] {
        has_next = blocks->Next(&next, read_error);
        if (has_next && header_done) next_plan.Make(next.records, next.first_line, ChunkBytes());
      };
      if (!ParseBlock(data, plan, block.fresh, read_next, error)) return false;
      std::swap(block, next);
      std::swap(plan, next_plan);
      has_block = has_next;
    }
    if (!read_error->empty()) {
      *error = *read_error;
      return false;
    }
    if (!header_done) {
      *error = path_ + ": file is empty (expected a header row with columns " +
               JoinNames({source_.HeaderOf("region"), source_.HeaderOf("item"),
                          source_.HeaderOf("price")}) +
               ")";
      return false;
    }
    return true;
  }

  bool ReadPriceHeader(CsvReader* reader, std::string* error) {
    Columns found;
    const std::vector<std::string>& ours = PriceColumnNames();
    std::vector<std::string> wanted;
    for (const std::string& name : ours) wanted.push_back(source_.HeaderOf(name));
    if (!ReadHeader(reader, path_, format_.delimiter, wanted,
                    {true, true, true, false, false, false, false}, &found, file_, error)) {
      return false;
    }
    columns_.names = std::move(found.names);
    columns_.format = format_;
    columns_.region = found.index[0];
    columns_.item = found.index[1];
    columns_.price = found.index[2];
    columns_.heading = found.index[3];
    columns_.representative = found.index[4];
    columns_.weight = found.index[5];
    columns_.quantity = found.index[6];
    columns_.num_fields = found.num_fields;
    if (columns_.heading < 0 && !state_->has_catalog) {
      *error = path_ + ":1: no column " + QuoteValue(wanted[3]) +
               " and no items file (survey.items) to give each item's heading";
      return false;
    }
    SetHashOrder(found.index);
    return true;
  }

  // Our columns first, in PriceColumnNames() order, then the file's other
  // columns by name (in header order among equal names).
  void SetHashOrder(const std::vector<int>& ours) {
    const std::vector<std::string>& names = PriceColumnNames();
    std::vector<char> taken(columns_.num_fields, 0);
    for (size_t k = 0; k < ours.size(); ++k) {
      if (ours[k] < 0) continue;
      taken[ours[k]] = 1;
      columns_.hash_order.push_back(ours[k]);
      columns_.hash_name.push_back(Fnv1a(names[k]));
    }
    std::vector<int> others;
    for (int c = 0; c < columns_.num_fields; ++c) {
      if (!taken[c]) others.push_back(c);
    }
    std::stable_sort(others.begin(), others.end(),
                     [&](int a, int b) { return columns_.names[a] < columns_.names[b]; });
    for (int c : others) {
      columns_.hash_order.push_back(c);
      columns_.hash_name.push_back(Fnv1a(columns_.names[c]));
    }
  }

  // Parses one block of whole records in the chunks of `plan`, hashing
  // `to_hash` and calling `read_next` (which reads the next block)
  // alongside. Each chunk writes its quotes straight into its slice of the
  // survey's arrays (no chunk arrays to copy from, no second write).
  bool ParseBlock(std::string_view data, const ChunkPlan& plan, std::string_view to_hash,
                  const std::function<void()>& read_next, std::string* error) {
    if (data.empty()) {
      digest_.Update(to_hash.data(), to_hash.size());
      read_next();
      return true;
    }
    const std::vector<size_t>& starts = plan.starts;
    const std::vector<int64_t>& lines = plan.lines;
    const int64_t first_line = lines[0];
    const int num_chunks = static_cast<int>(starts.size());
    // Chunk c's slice begins at quote slot_begin[c]: room for one row per
    // record, and a record ends at a line feed or at the end of the chunk.
    std::vector<size_t> slot_begin(num_chunks + 1, state_->quotes.size());
    for (int c = 0; c < num_chunks; ++c) {
      const size_t end = c + 1 < num_chunks ? starts[c + 1] : data.size();
      const bool open_end = end > starts[c] && data[end - 1] != '\n';
      slot_begin[c + 1] = slot_begin[c] + static_cast<size_t>(lines[c + 1] - lines[c]) + open_end;
    }
    const QuotePlaces before = PlacesOfQuotes();
    ReserveQuotes(slot_begin[num_chunks]);
    const NewColumns new_columns = GrowQuotes(slot_begin[num_chunks]);
    AdviseQuotePages();
    // Chunk results are kept between blocks so their tables keep their
    // capacity instead of being allocated (and page-faulted) again.
    known_.Build(state_->regions_fixed, state_->regions, state_->items, state_->item_heading,
                 state_->headings);
    std::vector<ChunkResult>& results = results_;
    results.resize(starts.size());
    for (int c = 0; c < num_chunks; ++c) {
      results[c].Reset();
      SetSlice(slot_begin[c], slot_begin[c + 1], &results[c]);
    }
    const bool keep_all = options_.invalid_rows == InvalidRowPolicy::kSkip;
    const size_t max_rejected = static_cast<size_t>(std::max(options_.max_reported_rows, 0));
    // Two more tasks than chunks, first in line: one reads the next block,
    // one hashes this block's new bytes (blocks are hashed in order: one
    // block at a time), while the chunks are parsed.
#pragma omp parallel for schedule(dynamic, 1) num_threads(NumThreads(num_chunks + 2))
    for (int task = 0; task < num_chunks + 2; ++task) {
      if (task == 0) {
        read_next();
        continue;
      }
      if (task == 1) {
        digest_.Update(to_hash.data(), to_hash.size());
        continue;
      }
      const int c = task - 2;
      const size_t end = c + 1 < num_chunks ? starts[c + 1] : data.size();
      results[c].slice.MapForWriting();
      ParsePriceChunk(data.substr(starts[c], end - starts[c]), lines[c], columns_, path_, *state_,
                      known_, keep_all, max_rejected, &results[c]);
    }
    if (HasCrossChunkConflict(results)) {
      // Two chunks state different headings for a new item, or a chunk
      // lacks a heading or names the first statement of one an earlier
      // chunk stated: only a pass in file order can tell which statement
      // comes first. It writes over the slices.
      results.resize(1);
      results[0].Reset();
      SetSlice(slot_begin[0], slot_begin[num_chunks], &results[0]);
      ParsePriceChunk(data, first_line, columns_, path_, *state_, known_, keep_all, max_rejected,
                      &results[0]);
    }
    // Merged in file order up to a malformed record: the rows before it
    // count as read whatever the block size, so the summary of a failed
    // load does not depend on it.
    size_t num_merged = 0;
    bool malformed = false;
    while (num_merged < results.size() && !malformed) {
      ChunkResult& result = results[num_merged++];
      Merge(&result);
      if (!result.fatal.empty()) {
        *error = result.fatal;
        malformed = true;
      }
    }
    FinishQuotes(results, num_merged, slot_begin[0], new_columns);
    if (Moved(before, PlacesOfQuotes())) ++state_->num_quote_array_moves;
    return !malformed;
  }

  // Before a block's quotes are placed: makes room in the survey's quote
  // arrays for `needed` quotes (those kept so far and the block's slots), so
  // that they do not move as they grow (a vector outgrowing its capacity is
  // copied whole into one twice as large; bench/HISTORY.md, "Eleventh
  // round"). At the file's first block, and at any block that would not fit,
  // they are reserved for this file and the price files after it as
  // estimated from their sizes (the bytes seen so far for a file without a
  // size, a pipe) and this file's quotes and slots per byte so far, 5 % over,
  // and by at least half as much again at a renewal, so that a pipe or a file
  // growing as it is read is still read in linear time. A file's size is a
  // hint (a file can be sparse), so the estimate is held to half the
  // machine's memory: address space only until quotes are written. A
  // reservation that cannot be had leaves the arrays to grow as they need.
  void ReserveQuotes(size_t needed) {
    QuoteArrays& quotes = state_->quotes;
    const size_t capacity = QuoteCapacity();
    if (reserved_ && needed <= capacity) return;
    if (!reserved_ && needed <= first_quote_) return;  // no rows yet to estimate from
    const bool first = !reserved_;
    reserved_ = true;
    std::error_code ec;
    const double file_bytes = static_cast<double>(std::filesystem::file_size(path_, ec));
    double estimate = static_cast<double>(needed);
    if (bytes_seen_ > 0 && needed > first_quote_) {
      const double seen = static_cast<double>(bytes_seen_);
      const double bytes_to_read = (ec ? seen : std::max(file_bytes, seen)) + later_bytes_;
      estimate = static_cast<double>(first_quote_) +
                 1.05 * static_cast<double>(needed - first_quote_) * bytes_to_read / seen;
    }
    const double limit = HalfTheMemory() / static_cast<double>(BytesPerQuote());
    size_t total = std::max(needed, static_cast<size_t>(std::min(estimate, limit)));
    if (!first) total = std::max(total, capacity + capacity / 2);
    if (total <= capacity) return;
    try {
      quotes.region.reserve(total);
      quotes.item.reserve(total);
      quotes.log_price.reserve(total);
      quotes.row_hash.reserve(total);
      if (UsesFlags()) quotes.representative.reserve(total);
      if (UsesWeights()) quotes.weight.reserve(total);
    } catch (const std::bad_alloc&) {
      // GrowQuotes sizes them as it can.
    }
  }

  // Asks for huge pages for the whole room of the survey's quote arrays
  // (again at each block: an array that grew has moved, and the advice
  // stays with the old place). Each chunk's task then maps its slice in one
  // call before it writes (QuoteSlice::MapForWriting): on the benchmark
  // machine T took 3.3-3.7 s with both against 4.0-4.4 s on 4 KiB pages
  // mapped the same way, and equal times as the first run after a minute of
  // idle (bench/HISTORY.md, "Fourteenth round"). Huge pages faulted in by
  // the parsing threads as they wrote had been slower ("Eleventh round").
  void AdviseQuotePages() const {
    ForEachQuoteArray(state_->quotes, [](const auto& array) { AdviseHugePages(array); });
  }

  // Whether the survey's flag and weight arrays are filled for this file's
  // quotes: the file has the column, or an earlier file had it (its quotes
  // then get 0 or 1; SettleColumn).
  bool UsesFlags() const { return columns_.representative >= 0 || !state_->quotes.representative.empty(); }
  bool UsesWeights() const { return columns_.weight >= 0 || !state_->quotes.weight.empty(); }

  // The quotes the survey's arrays in use hold without moving.
  size_t QuoteCapacity() const {
    const QuoteArrays& quotes = state_->quotes;
    size_t capacity = std::min({quotes.region.capacity(), quotes.item.capacity(), quotes.log_price.capacity(),
                                quotes.row_hash.capacity()});
    if (UsesFlags()) capacity = std::min(capacity, quotes.representative.capacity());
    if (UsesWeights()) capacity = std::min(capacity, quotes.weight.capacity());
    return capacity;
  }

  // Bytes of the survey's arrays in use per quote.
  size_t BytesPerQuote() const {
    return 2 * sizeof(int32_t) + sizeof(double) + sizeof(uint64_t) + (UsesFlags() ? sizeof(uint8_t) : 0) +
           (UsesWeights() ? sizeof(double) : 0);
  }

  // Half the machine's physical memory in bytes (16 GiB when unknown).
  static double HalfTheMemory() {
    const long pages = sysconf(_SC_PHYS_PAGES), page_bytes = sysconf(_SC_PAGESIZE);
    if (pages <= 0 || page_bytes <= 0) return 16.0 * (1 << 30);
    return 0.5 * static_cast<double>(pages) * static_cast<double>(page_bytes);
  }

  // Where each of the survey's quote arrays starts (null when empty).
  using QuotePlaces = std::array<const void*, 6>;
  QuotePlaces PlacesOfQuotes() const {
    QuotePlaces places;
    size_t k = 0;
    ForEachQuoteArray(std::as_const(state_->quotes),
                      [&](const auto& array) { places[k++] = array.empty() ? nullptr : array.data(); });
    return places;
  }
  // Whether an array that held quotes `before` holds them elsewhere `after`.
  static bool Moved(const QuotePlaces& before, const QuotePlaces& after) {
    for (size_t k = 0; k < before.size(); ++k) {
      if (before[k] != nullptr && after[k] != nullptr && after[k] != before[k]) return true;
    }
    return false;
  }

  // Whether the block's quotes are the first to fill the flag or weight
  // array (which stays empty until a quote of a file with the column is used).
  struct NewColumns {
    bool flags = false;
    bool weights = false;
  };

  // Sizes the survey's arrays of the file's columns to `size` quotes,
  // leaving the new ones unwritten.
  NewColumns GrowQuotes(size_t size) {
    QuoteArrays& quotes = state_->quotes;
    NewColumns new_columns;
    quotes.region.resize(size);
    quotes.item.resize(size);
    quotes.log_price.resize(size);
    quotes.row_hash.resize(size);
    if (columns_.representative >= 0) {
      new_columns.flags = quotes.representative.empty();
      quotes.representative.resize(size);
    }
    if (columns_.weight >= 0) {
      new_columns.weights = quotes.weight.empty();
      quotes.weight.resize(size);
    }
    return new_columns;
  }

  // Points `result` at quotes [begin, end) of the survey's arrays.
  void SetSlice(size_t begin, size_t end, ChunkResult* result) {
    QuoteArrays& quotes = state_->quotes;
    QuoteSlice& slice = result->slice;
    slice.region = quotes.region.data() + begin;
    slice.item = quotes.item.data() + begin;
    slice.log_price = quotes.log_price.data() + begin;
    slice.row_hash = quotes.row_hash.data() + begin;
    if (columns_.representative >= 0) slice.representative = quotes.representative.data() + begin;
    if (columns_.weight >= 0) slice.weight = quotes.weight.data() + begin;
    slice.capacity = end - begin;
    result->first_quote = begin;
  }

  // Adds a chunk's rows for one item and heading to the item's conflict.
  void MergeConflict(const ConflictCount& conflict) {
    const auto [it, inserted] = state_->heading_conflict_index.emplace(
        conflict.item, static_cast<int>(state_->heading_conflicts.size()));
    if (inserted) {
      HeadingConflict entry;
      entry.item = conflict.item;
      state_->heading_conflicts.push_back(std::move(entry));
    }
    std::vector<HeadingConflict::Other>& others = state_->heading_conflicts[it->second].others;
    for (HeadingConflict::Other& other : others) {
      if (other.heading == conflict.heading) {
        other.num_rows += conflict.num_rows;
        return;
      }
    }
    others.push_back({conflict.heading, conflict.num_rows, conflict.first_line, path_});
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
      // A conflict must name the block's first statement, not the chunk's.
      for (int i : result.items_with_local_origin) {
        if (stated.count(result.items.Code(i)) > 0) return true;
      }
      // A row rejected for its price after stating a heading an earlier
      // chunk contradicts is, in file order, rejected for the conflict.
      for (const auto& [i, h] : result.rejected_first_statements) {
        const auto it = stated.find(result.items.Code(i));
        if (it != stated.end() && it->second != result.headings.Code(h)) return true;
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
    state_->num_quotes_without_reference += result->num_rows_without_reference;
    for (RejectedRow& row : result->rejected) rejections_->Add(std::move(row), file_);
    rejections_->Count(result->num_rejected_not_kept, file_);
    rejections_->Count(result->num_cascade_not_kept, file_, RejectionCause::kRejectedCode);
    for (const auto& [code, num_rows] : result->cascade_rows) {
      state_->rejected_codes[code].num_price_rows += num_rows;
    }
    for (const ConflictCount& conflict : result->conflicts) MergeConflict(conflict);
    // With regions.csv the chunks hold the survey's region indices already.
    const bool regions_global = state_->regions_fixed;
    std::vector<int>& region_map = result->region_map;
    region_map.resize(regions_global ? 0 : result->regions.size());
    for (int r = 0; r < static_cast<int>(region_map.size()); ++r) {
      region_map[r] = state_->regions.Intern(result->regions.Code(r));
    }
    std::vector<int>& item_map = result->item_map;
    item_map.resize(result->items.size());
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
        state_->item_reference_quantity.push_back(std::numeric_limits<double>::quiet_NaN());
      }
      if (info.quantity_without_reference) state_->items_without_reference.insert(global);
      if (state_->item_heading[global] < 0 && info.local_heading >= 0) {
        // First statement of this item's heading (no items.csv entry).
        state_->item_heading[global] =
            state_->headings.Intern(result->headings.Code(info.local_heading));
        // With several price files the origin names its file.
        state_->item_origin[global] = ItemOrigin(*state_, path_, result->item_line[i]);
      }
    }
    state_->num_quotes += result->rows_used;
  }

  // Settles the quotes of the first `num_chunks` merged chunks, which
  // follow quote `block_begin`, in file order: their indices are mapped to
  // the survey's in place (chunks in parallel), the gaps that rejected rows
  // left at the ends of their slices are closed, and the arrays are cut to
  // the quotes used (dropping the slices of chunks after a malformed record).
  void FinishQuotes(const std::vector<ChunkResult>& results, size_t num_chunks,
                    size_t block_begin, NewColumns new_columns) {
    const int num_threads = NumThreads(static_cast<int>(num_chunks));
#pragma omp parallel for schedule(dynamic, 1) num_threads(num_threads)
    for (int c = 0; c < static_cast<int>(num_chunks); ++c) MapIndices(results[c]);
    QuoteArrays& quotes = state_->quotes;
    size_t end = block_begin;
    for (size_t c = 0; c < num_chunks; ++c) {
      const ChunkResult& result = results[c];
      const size_t n = static_cast<size_t>(result.rows_used);
      if (result.first_quote != end) {
        MoveDown(result.first_quote, n, end, &quotes.region);
        MoveDown(result.first_quote, n, end, &quotes.item);
        MoveDown(result.first_quote, n, end, &quotes.log_price);
        MoveDown(result.first_quote, n, end, &quotes.row_hash);
        if (columns_.representative >= 0) {
          MoveDown(result.first_quote, n, end, &quotes.representative);
        }
        if (columns_.weight >= 0) MoveDown(result.first_quote, n, end, &quotes.weight);
      }
      state_->quote_lines.Append(result.lines, end);
      end += n;
    }
    quotes.region.resize(end);
    quotes.item.resize(end);
    quotes.log_price.resize(end);
    quotes.row_hash.resize(end);
    // An array stays empty until a quote of a file with its column is
    // used; the quotes of the other files are not representative (0) and
    // weigh 1.
    SettleColumn(block_begin, end, new_columns.flags, uint8_t{0}, &quotes.representative);
    SettleColumn(block_begin, end, new_columns.weights, 1.0, &quotes.weight);
  }

  // Cuts the flag or weight array to `end` quotes, giving the quotes of
  // files without the column `value`; an array the block was first to fill
  // is emptied again when the block used no quote, else its quotes before
  // `block_begin` get `value`.
  template <typename T, typename Vector>
  static void SettleColumn(size_t block_begin, size_t end, bool new_column, T value,
                           Vector* array) {
    if (new_column && end == block_begin) {
      array->clear();
      return;
    }
    if (new_column) std::fill(array->begin(), array->begin() + block_begin, value);
    if (!array->empty()) array->resize(end, value);
  }

  // Moves quotes [from, from + n) of `array` down to `to` (<= from).
  template <typename Vector>
  static void MoveDown(size_t from, size_t n, size_t to, Vector* array) {
    std::memmove(array->data() + to, array->data() + from, n * sizeof(*array->data()));
  }

  // Maps the chunk's region and item indices to the survey's in its slice
  // (regions: not when they are the survey's already; items: only those
  // at or past ChunkResult::item_base).
  static void MapIndices(const ChunkResult& result) {
    const size_t n = static_cast<size_t>(result.rows_used);
    const std::vector<int>& region_map = result.region_map;
    if (!region_map.empty()) {
      int32_t* region = result.slice.region;
      for (size_t q = 0; q < n; ++q) region[q] = region_map[region[q]];
    }
    const std::vector<int>& item_map = result.item_map;
    if (!item_map.empty()) {
      int32_t* item = result.slice.item;
      const int32_t base = result.item_base;
      for (size_t q = 0; q < n; ++q) {
        if (item[q] >= base) item[q] = item_map[item[q] - base];
      }
    }
  }

 private:
  // Bytes of the price files read after this one (ReserveQuotes).
  double later_bytes_;
  std::string path_;
  const PriceSource& source_;
  const LoadOptions& options_;
  const ReadLimits& limits_;
  const CsvFormat format_;
  LoadState* state_;
  Rejections* rejections_;
  InputFileSummary* file_;
  PriceColumns columns_;
  Sha256 digest_;
  KnownCodes known_;
  std::vector<ChunkResult> results_;
  int64_t bytes_seen_ = 0;
  bool reserved_ = false;
  // The survey's quotes before this file's (ReserveQuotes's estimate).
  size_t first_quote_ = 0;
};

}  // namespace

bool ReadPrices(const PriceSource& source, const std::string& setting, const LoadOptions& options,
                double later_bytes, LoadState* state, Rejections* rejections, InputFileSummary* file,
                std::string* error) {
  PriceReader prices(source, setting, options, later_bytes, state, rejections, file);
  return prices.Read(error);
}

}  // namespace paritas::internal
