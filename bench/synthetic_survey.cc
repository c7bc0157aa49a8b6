// Synthetic survey generation and writing. Cells are chosen first (a bitmap
// over region x item), then quotes are drawn in region-then-item order, so
// the quote vectors come out sorted without a sort; files are formatted with
// std::to_chars into one large buffer per file and written with fwrite.
#include "synthetic_survey.h"

#include <algorithm>
#include <cassert>
#include <cerrno>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <limits>
#include <string_view>
#include <system_error>

namespace paritas::synthetic {
namespace {

// One stream per random quantity (see the header): changing one knob must not
// shift the draws of the others.
enum Stream : uint64_t {
  kRegionLevelStream = 1,
  kDeviationStream = 2,
  kItemLevelStream = 3,
  kCoverageStream = 4,
  kRepresentativeStream = 5,
  kNoiseStream = 6,
  kPopulationStream = 7,
  kExpenditureStream = 8,
};

// Item price levels span a kilo of flour to a month's rent, roughly.
constexpr double kMinItemPrice = 0.5;
constexpr double kMaxItemPrice = 500.0;
constexpr double kMinPopulation = 20000.0;
constexpr double kMaxPopulation = 5000000.0;
// Per-head annual budget (currency units) and the spread of heading shares
// across headings and across regions, log points.
constexpr double kBudgetPerHead = 12000.0;
constexpr double kHeadingShareSd = 0.5;
constexpr double kRegionalShareSd = 0.15;
// Significant digits written for prices and expenditures.
constexpr int kPriceDigits = 6;
constexpr int kExpenditureDigits = 9;
// Flush the write buffer to the file at this size, bytes.
constexpr size_t kFlushBytes = size_t{16} << 20;
constexpr double kTwoPi = 6.283185307179586476925286766559;

std::string FormatDouble(double value) {
  char buffer[64];
  auto result = std::to_chars(buffer, buffer + sizeof(buffer), value);
  return std::string(buffer, result.ptr);
}

int NumDigits(int64_t value) {
  int digits = 1;
  while (value >= 10) {
    value /= 10;
    ++digits;
  }
  return digits;
}

// Codes like r0001: a prefix and a zero-padded 1-based number, padded to at
// least `min_width` digits and wide enough for `count`.
std::vector<std::string> MakeCodes(char prefix, int count, int min_width) {
  const int width = std::max(min_width, NumDigits(count));
  std::vector<std::string> codes(count);
  for (int i = 0; i < count; ++i) {
    char number[16];
    const char* end = std::to_chars(number, number + sizeof(number), i + 1).ptr;
    const size_t num_digits = static_cast<size_t>(end - number);
    std::string& code = codes[i];
    code.assign(1 + width, '0');
    code[0] = prefix;
    code.replace(code.size() - num_digits, num_digits, number, num_digits);
  }
  return codes;
}

// Writes `value` with at most `significant_digits` (1-15) significant digits
// in plain decimal notation without trailing zeros (7.05441, 13.9, 1234570)
// into `out` (>= 48 bytes) and returns the end. The mantissa is rounded in
// IEEE arithmetic with exact powers of ten (no log10) and printed as an
// integer, which is about twice as fast as to_chars with a precision and
// gave the same text for 20 million test values. Falls back to to_chars
// outside 1e-6 <= |value| < 1e15.
char* FormatSignificant(double value, int significant_digits, char* out) {
  static constexpr double kPowersOfTen[] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,
                                            1e8,  1e9,  1e10, 1e11, 1e12, 1e13, 1e14, 1e15,
                                            1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};
  assert(significant_digits >= 1 && significant_digits <= 15);
  const double magnitude = std::abs(value);
  if (!(magnitude >= 1e-6 && magnitude < 1e15)) {
    return std::to_chars(out, out + 48, value, std::chars_format::general, significant_digits).ptr;
  }
  // 10^exponent <= magnitude < 10^(exponent + 1); 1 / 10^m is inexact, so
  // within an ulp of 10^-m the exponent may be one off, costing one digit.
  int exponent = 0;
  if (magnitude >= 1.0) {
    while (magnitude >= kPowersOfTen[exponent + 1]) ++exponent;
  } else {
    while (magnitude < 1.0 / kPowersOfTen[-exponent]) --exponent;
  }
  int shift = significant_digits - 1 - exponent;  // decimals kept; < 0 for large values
  const double scaled =
      shift >= 0 ? magnitude * kPowersOfTen[shift] : magnitude / kPowersOfTen[-shift];
  int64_t mantissa = static_cast<int64_t>(std::nearbyint(scaled));
  while (shift > 0 && mantissa % 10 == 0) {
    mantissa /= 10;
    --shift;
  }
  char digits[24];
  char* digits_end = std::to_chars(digits, digits + sizeof(digits), mantissa).ptr;
  const int num_digits = static_cast<int>(digits_end - digits);
  char* p = out;
  if (value < 0) *p++ = '-';
  if (shift <= 0) {
    p = std::copy(digits, digits_end, p);
    p = std::fill_n(p, -shift, '0');
  } else if (num_digits > shift) {
    p = std::copy(digits, digits_end - shift, p);
    *p++ = '.';
    p = std::copy(digits_end - shift, digits_end, p);
  } else {
    *p++ = '0';
    *p++ = '.';
    p = std::fill_n(p, shift - num_digits, '0');
    p = std::copy(digits, digits_end, p);
  }
  return p;
}

// Writes one file through a buffer, to a temporary name renamed on Close.
class BufferedFile {
 public:
  explicit BufferedFile(const std::filesystem::path& path) : path_(path) {
    temp_path_ = path_;
    temp_path_ += ".tmp";
    file_ = std::fopen(temp_path_.string().c_str(), "wb");
    if (file_ == nullptr) {
      error_ = path_.string() + ": cannot open file for writing: " + std::strerror(errno);
    }
    buffer_.reserve(kFlushBytes + 4096);
  }
  ~BufferedFile() {
    if (file_ != nullptr) {
      std::fclose(file_);
      std::error_code ignored;
      std::filesystem::remove(temp_path_, ignored);
    }
  }
  BufferedFile(const BufferedFile&) = delete;
  BufferedFile& operator=(const BufferedFile&) = delete;

  void Append(std::string_view text) {
    buffer_.append(text);
    if (buffer_.size() >= kFlushBytes) Flush();
  }
  void Append(char c) { buffer_.push_back(c); }
  void AppendInteger(int64_t value) {
    char digits[24];
    auto result = std::to_chars(digits, digits + sizeof(digits), value);
    buffer_.append(digits, result.ptr);
  }
  // Appends `value` with at most `significant_digits` significant digits.
  void AppendDouble(double value, int significant_digits) {
    char digits[48];
    buffer_.append(digits, FormatSignificant(value, significant_digits, digits));
  }

  // Writes what is left, closes and renames into place.
  bool Close(std::string* error) {
    Flush();
    if (file_ != nullptr && std::fclose(file_) != 0 && error_.empty()) {
      error_ = path_.string() + ": cannot close file: " + std::strerror(errno);
    }
    file_ = nullptr;
    if (error_.empty()) {
      std::error_code code;
      std::filesystem::rename(temp_path_, path_, code);
      if (code) error_ = path_.string() + ": cannot rename temporary file: " + code.message();
    }
    if (!error_.empty()) {
      std::error_code ignored;
      std::filesystem::remove(temp_path_, ignored);
      *error = error_;
      return false;
    }
    return true;
  }

  int64_t num_bytes_written() const { return num_bytes_written_; }

 private:
  void Flush() {
    if (file_ != nullptr && error_.empty() && !buffer_.empty()) {
      if (std::fwrite(buffer_.data(), 1, buffer_.size(), file_) != buffer_.size()) {
        error_ = path_.string() + ": cannot write file: " + std::strerror(errno);
      }
      num_bytes_written_ += static_cast<int64_t>(buffer_.size());
    }
    buffer_.clear();
  }

  std::filesystem::path path_;
  std::filesystem::path temp_path_;
  std::FILE* file_ = nullptr;
  std::string buffer_;
  std::string error_;
  int64_t num_bytes_written_ = 0;
};

}  // namespace

// ---------------------------------------------------------------- RandomStream

uint64_t RandomStream::SplitMix64(uint64_t* state) {
  uint64_t z = (*state += 0x9e3779b97f4a7c15ULL);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
  return z ^ (z >> 31);
}

RandomStream::RandomStream(uint64_t seed, uint64_t stream) {
  // Mixing the stream number through splitmix64 first keeps streams of
  // neighbouring seeds apart (seed s, stream t is not seed s + 1, stream t - 1).
  uint64_t mix = stream;
  uint64_t state = seed ^ SplitMix64(&mix);
  for (uint64_t& word : state_) word = SplitMix64(&state);
}

RandomStream RandomStream::FromState(const std::array<uint64_t, 4>& state) {
  assert(state[0] != 0 || state[1] != 0 || state[2] != 0 || state[3] != 0);
  RandomStream stream;
  stream.state_ = state;
  return stream;
}

uint64_t RandomStream::NextBits() {
  // xoshiro256** 1.0, transcribed from the authors' reference code.
  auto rotl = [](uint64_t x, int k) { return (x << k) | (x >> (64 - k)); };
  const uint64_t result = rotl(state_[1] * 5, 7) * 9;
  const uint64_t t = state_[1] << 17;
  state_[2] ^= state_[0];
  state_[3] ^= state_[1];
  state_[1] ^= state_[2];
  state_[0] ^= state_[3];
  state_[2] ^= t;
  state_[3] = rotl(state_[3], 45);
  return result;
}

double RandomStream::NextUniform() { return static_cast<double>(NextBits() >> 11) * 0x1.0p-53; }

double RandomStream::NextNormal() {
  if (has_spare_normal_) {
    has_spare_normal_ = false;
    return spare_normal_;
  }
  // u1 in (0, 1] so the logarithm stays finite.
  const double u1 = static_cast<double>((NextBits() >> 11) + 1) * 0x1.0p-53;
  const double u2 = NextUniform();
  const double radius = std::sqrt(-2.0 * std::log(u1));
  spare_normal_ = radius * std::sin(kTwoPi * u2);
  has_spare_normal_ = true;
  return radius * std::cos(kTwoPi * u2);
}

// ------------------------------------------------------------ SyntheticOptions

bool SyntheticOptions::IsValid(std::string* error) const {
  auto fail = [error](const std::string& message) {
    *error = message;
    return false;
  };
  if (num_regions < 2) {
    return fail("num_regions = " + std::to_string(num_regions) + " is below 2");
  }
  if (num_headings < 1) {
    return fail("num_headings = " + std::to_string(num_headings) + " is below 1");
  }
  if (items_per_heading < 1) {
    return fail("items_per_heading = " + std::to_string(items_per_heading) + " is below 1");
  }
  if (!(coverage > 0.0 && coverage <= 1.0)) {
    return fail("coverage = " + FormatDouble(coverage) + " is outside (0, 1]");
  }
  if (quotes_per_cell < 1) {
    return fail("quotes_per_cell = " + std::to_string(quotes_per_cell) + " is below 1");
  }
  // The negated comparisons also reject NaN.
  if (!(noise_sd >= 0.0 && std::isfinite(noise_sd))) {
    return fail("noise_sd = " + FormatDouble(noise_sd) + " is not a finite value >= 0");
  }
  if (!(region_level_sd >= 0.0 && std::isfinite(region_level_sd))) {
    return fail("region_level_sd = " + FormatDouble(region_level_sd) +
                " is not a finite value >= 0");
  }
  if (!(heading_deviation_sd >= 0.0 && std::isfinite(heading_deviation_sd))) {
    return fail("heading_deviation_sd = " + FormatDouble(heading_deviation_sd) +
                " is not a finite value >= 0");
  }
  if (num_groups < 1 || num_groups > num_headings) {
    return fail("num_groups = " + std::to_string(num_groups) +
                " is outside [1, num_headings = " + std::to_string(num_headings) + "]");
  }
  if (!(representative_share >= 0.0 && representative_share <= 1.0)) {
    return fail("representative_share = " + FormatDouble(representative_share) +
                " is outside [0, 1]");
  }
  const int64_t num_quotes_max =
      int64_t{num_regions} * num_headings * items_per_heading * quotes_per_cell;
  if (num_quotes_max > std::numeric_limits<int>::max()) {
    return fail("num_regions x num_headings x items_per_heading x quotes_per_cell = " +
                std::to_string(num_quotes_max) + " exceeds " +
                std::to_string(std::numeric_limits<int>::max()));
  }
  return true;
}

// -------------------------------------------------------------------- Generate

SyntheticSurvey Generate(const SyntheticOptions& options) {
  std::string error;
  assert(options.IsValid(&error));
  (void)error;

  const int num_regions = options.num_regions;
  const int num_headings = options.num_headings;
  const int items_per_heading = options.items_per_heading;
  const int num_items = num_headings * items_per_heading;
  const int num_groups = options.num_groups;

  SyntheticSurvey survey;
  survey.regions = MakeCodes('r', num_regions, 4);
  survey.headings = MakeCodes('h', num_headings, 3);
  survey.groups = MakeCodes('g', num_groups, 2);
  survey.items = MakeCodes('i', num_items, 5);
  survey.heading_group.resize(num_headings);
  for (int h = 0; h < num_headings; ++h) {
    survey.heading_group[h] = static_cast<int>(int64_t{h} * num_groups / num_headings);
  }
  survey.item_heading.resize(num_items);
  for (int i = 0; i < num_items; ++i) survey.item_heading[i] = i / items_per_heading;

  // Truth.
  RandomStream region_stream(options.seed, kRegionLevelStream);
  RandomStream deviation_stream(options.seed, kDeviationStream);
  survey.true_log_level.resize(size_t{1} * num_regions * num_headings);
  for (int r = 0; r < num_regions; ++r) {
    const double region_level = options.region_level_sd * region_stream.NextNormal();
    for (int h = 0; h < num_headings; ++h) {
      survey.true_log_level[size_t{1} * r * num_headings + h] =
          region_level + options.heading_deviation_sd * deviation_stream.NextNormal();
    }
  }
  RandomStream item_stream(options.seed, kItemLevelStream);
  const double log_min_price = std::log(kMinItemPrice);
  const double log_price_range = std::log(kMaxItemPrice) - log_min_price;
  survey.true_item_log_level.resize(num_items);
  for (double& level : survey.true_item_log_level) {
    level = log_min_price + log_price_range * item_stream.NextUniform();
  }

  // Regions and expenditure.
  RandomStream population_stream(options.seed, kPopulationStream);
  const double log_min_population = std::log(kMinPopulation);
  const double log_population_range = std::log(kMaxPopulation) - log_min_population;
  survey.population.resize(num_regions);
  for (double& population : survey.population) {
    population = std::round(
        std::exp(log_min_population + log_population_range * population_stream.NextUniform()));
  }
  RandomStream expenditure_stream(options.seed, kExpenditureStream);
  std::vector<double> heading_share(num_headings);
  double share_sum = 0.0;
  for (double& share : heading_share) {
    share = std::exp(kHeadingShareSd * expenditure_stream.NextNormal());
    share_sum += share;
  }
  for (double& share : heading_share) share /= share_sum;
  survey.expenditure.resize(size_t{1} * num_regions * num_headings);
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < num_headings; ++h) {
      const size_t cell = size_t{1} * r * num_headings + h;
      survey.expenditure[cell] = survey.population[r] * kBudgetPerHead * heading_share[h] *
                                 std::exp(kRegionalShareSd * expenditure_stream.NextNormal() +
                                          survey.true_log_level[cell]);
    }
  }

  // Which cells are priced. Anchors (first item of each heading) are priced in
  // every region; the rest with probability p chosen so that
  // (1 + (I - 1) p) / I equals the requested coverage.
  const size_t num_cells = size_t{1} * num_regions * num_items;
  std::vector<uint8_t> priced(num_cells, 0);
  double other_probability = 1.0;
  if (items_per_heading > 1) {
    other_probability = (options.coverage * items_per_heading - 1.0) / (items_per_heading - 1);
    other_probability = std::clamp(other_probability, 0.0, 1.0);
  }
  RandomStream coverage_stream(options.seed, kCoverageStream);
  std::vector<uint8_t> item_priced(num_items, 0);
  for (int r = 0; r < num_regions; ++r) {
    uint8_t* row = priced.data() + size_t{1} * r * num_items;
    for (int i = 0; i < num_items; ++i) {
      const bool is_anchor = i % items_per_heading == 0;
      // Draw for every cell, anchors included, so the pattern of one region
      // does not depend on another's.
      const double u = coverage_stream.NextUniform();
      if (is_anchor || u < other_probability) {
        row[i] = 1;
        item_priced[i] = 1;
      }
    }
  }
  // An item nobody priced would be dropped by any loader; give it one region.
  for (int i = 0; i < num_items; ++i) {
    if (item_priced[i]) continue;
    const int r =
        std::min(num_regions - 1, static_cast<int>(coverage_stream.NextUniform() * num_regions));
    priced[size_t{1} * r * num_items + i] = 1;
  }

  // Representative flags per cell.
  std::vector<uint8_t> representative(num_cells, 0);
  if (options.representative_share > 0.0) {
    RandomStream representative_stream(options.seed, kRepresentativeStream);
    for (int r = 0; r < num_regions; ++r) {
      const size_t row = size_t{1} * r * num_items;
      for (int h = 0; h < num_headings; ++h) {
        const int first = h * items_per_heading;
        bool any = false;
        for (int i = first; i < first + items_per_heading; ++i) {
          const double u = representative_stream.NextUniform();
          if (priced[row + i] && u < options.representative_share) {
            representative[row + i] = 1;
            any = true;
          }
        }
        if (!any) representative[row + first] = 1;
      }
    }
  }

  // Quotes.
  size_t num_priced_cells = 0;
  for (uint8_t flag : priced) num_priced_cells += flag;
  const size_t num_quotes = num_priced_cells * options.quotes_per_cell;
  survey.quote_region.reserve(num_quotes);
  survey.quote_item.reserve(num_quotes);
  survey.quote_price.reserve(num_quotes);
  survey.quote_representative.reserve(num_quotes);
  RandomStream noise_stream(options.seed, kNoiseStream);
  for (int r = 0; r < num_regions; ++r) {
    const size_t row = size_t{1} * r * num_items;
    for (int i = 0; i < num_items; ++i) {
      if (!priced[row + i]) continue;
      const double mean_log_price =
          survey.true_log_level[size_t{1} * r * num_headings + survey.item_heading[i]] +
          survey.true_item_log_level[i];
      for (int q = 0; q < options.quotes_per_cell; ++q) {
        survey.quote_region.push_back(r);
        survey.quote_item.push_back(i);
        survey.quote_price.push_back(
            std::exp(mean_log_price + options.noise_sd * noise_stream.NextNormal()));
        survey.quote_representative.push_back(representative[row + i]);
      }
    }
  }
  return survey;
}

// ----------------------------------------------------------------- WriteSurvey

bool WriteSurvey(const SyntheticSurvey& survey, const std::string& folder, std::string* error) {
  namespace fs = std::filesystem;
  const size_t num_regions = survey.regions.size();
  const size_t num_headings = survey.headings.size();
  const size_t num_items = survey.items.size();
  const size_t num_quotes = survey.quote_price.size();
  if (survey.heading_group.size() != num_headings || survey.item_heading.size() != num_items ||
      survey.expenditure.size() != num_regions * num_headings ||
      survey.population.size() != num_regions || survey.quote_region.size() != num_quotes ||
      survey.quote_item.size() != num_quotes ||
      (!survey.quote_representative.empty() && survey.quote_representative.size() != num_quotes)) {
    *error = "synthetic survey has vectors of inconsistent sizes";
    return false;
  }
  std::error_code code;
  fs::create_directories(folder, code);
  if (code) {
    *error = folder + ": cannot create folder: " + code.message();
    return false;
  }
  const fs::path dir(folder);

  bool has_representative = false;
  for (uint8_t flag : survey.quote_representative) has_representative |= flag != 0;
  {
    BufferedFile out(dir / "prices.csv");
    out.Append(has_representative ? "region,item,price,representative\n" : "region,item,price\n");
    for (size_t q = 0; q < num_quotes; ++q) {
      out.Append(survey.regions[survey.quote_region[q]]);
      out.Append(',');
      out.Append(survey.items[survey.quote_item[q]]);
      out.Append(',');
      out.AppendDouble(survey.quote_price[q], kPriceDigits);
      if (has_representative) out.Append(survey.quote_representative[q] ? ",1" : ",0");
      out.Append('\n');
    }
    if (!out.Close(error)) return false;
  }
  {
    BufferedFile out(dir / "items.csv");
    out.Append("item,heading\n");
    for (size_t i = 0; i < num_items; ++i) {
      out.Append(survey.items[i]);
      out.Append(',');
      out.Append(survey.headings[survey.item_heading[i]]);
      out.Append('\n');
    }
    if (!out.Close(error)) return false;
  }
  {
    BufferedFile out(dir / "expenditure.csv");
    out.Append("region,heading,expenditure\n");
    for (size_t r = 0; r < num_regions; ++r) {
      for (size_t h = 0; h < num_headings; ++h) {
        out.Append(survey.regions[r]);
        out.Append(',');
        out.Append(survey.headings[h]);
        out.Append(',');
        out.AppendDouble(survey.expenditure[r * num_headings + h], kExpenditureDigits);
        out.Append('\n');
      }
    }
    if (!out.Close(error)) return false;
  }
  {
    BufferedFile out(dir / "regions.csv");
    out.Append("region,name,population\n");
    for (size_t r = 0; r < num_regions; ++r) {
      out.Append(survey.regions[r]);
      out.Append(",Synthetic region ");
      out.AppendInteger(static_cast<int64_t>(r + 1));
      out.Append(',');
      out.AppendInteger(std::llround(survey.population[r]));
      out.Append('\n');
    }
    if (!out.Close(error)) return false;
  }
  {
    BufferedFile out(dir / "classification.yaml");
    out.Append("all:\n");
    for (size_t g = 0; g < survey.groups.size(); ++g) {
      out.Append("  ");
      out.Append(survey.groups[g]);
      out.Append(": [");
      bool first = true;
      for (size_t h = 0; h < num_headings; ++h) {
        if (survey.heading_group[h] != static_cast<int>(g)) continue;
        if (!first) out.Append(", ");
        out.Append(survey.headings[h]);
        first = false;
      }
      out.Append("]\n");
    }
    if (!out.Close(error)) return false;
  }
  {
    BufferedFile out(dir / "config.yaml");
    out.Append(
        "survey:\n"
        "  prices: prices.csv\n"
        "  items: items.csv\n"
        "  expenditure: expenditure.csv\n"
        "  regions: regions.csv\n"
        "classification: classification.yaml\n"
        "output: out\n");
    if (!out.Close(error)) return false;
  }
  return true;
}

}  // namespace paritas::synthetic
