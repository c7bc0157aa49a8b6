// Number parsing goes through std::from_chars: locale-independent, no
// allocation, and about ten times faster than strtod with a locale lookup.
#include "paritas/base/text.h"

#include <algorithm>
#include <charconv>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <cstring>

#include "base/plain_decimal.h"

namespace paritas {

std::string_view Trim(std::string_view text) {
  size_t begin = 0;
  while (begin < text.size() && (text[begin] == ' ' || text[begin] == '\t')) ++begin;
  size_t end = text.size();
  while (end > begin && (text[end - 1] == ' ' || text[end - 1] == '\t')) --end;
  return text.substr(begin, end - begin);
}

namespace {

// For a decimal number that from_chars found out of range: true when its
// magnitude is below 1 (underflow), false when above (overflow). Only the
// position of the first significant digit and the exponent matter.
bool IsBelowOne(std::string_view text) {
  if (!text.empty() && (text.front() == '-' || text.front() == '+')) text.remove_prefix(1);
  const size_t e = text.find_first_of("eE");
  int64_t exponent = 0;
  if (e != std::string_view::npos) {
    std::string_view digits = text.substr(e + 1);
    const bool negative = !digits.empty() && digits.front() == '-';
    if (!digits.empty() && (digits.front() == '-' || digits.front() == '+')) {
      digits.remove_prefix(1);
    }
    for (char c : digits) exponent = std::min<int64_t>(exponent * 10 + (c - '0'), int64_t{1} << 40);
    if (negative) exponent = -exponent;
  }
  const std::string_view mantissa = text.substr(0, e);
  const size_t point = std::min(mantissa.find('.'), mantissa.size());
  const size_t first = mantissa.find_first_of("123456789");
  if (first == std::string_view::npos) return true;
  // Decimal exponent of the first significant digit.
  const int64_t lead = first < point ? static_cast<int64_t>(point - first) - 1
                                     : static_cast<int64_t>(point) - static_cast<int64_t>(first);
  return lead + exponent < 0;
}

}  // namespace

NumberStatus ParseNumber(std::string_view text, double* value, char decimal) {
  if (internal::ParsePlainDecimal(text, decimal, value)) return NumberStatus::kOk;
  if (decimal == ',') {
    // from_chars reads only '.': the comma becomes one, and a '.' (a
    // thousands separator, or a decimal point in a comma file) is refused.
    if (text.find('.') != std::string_view::npos) return NumberStatus::kInvalid;
    std::string copy(text);
    std::replace(copy.begin(), copy.end(), ',', '.');
    return ParseNumber(copy, value, '.');
  }
  text = Trim(text);
  if (text.empty()) return NumberStatus::kEmpty;
  if (text.front() == '+') {
    text.remove_prefix(1);
    if (text.empty() || text.front() == '-' || text.front() == '+') return NumberStatus::kInvalid;
  }
  double parsed = 0.0;
  auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), parsed);
  if (end != text.data() + text.size()) return NumberStatus::kInvalid;
  if (ec == std::errc::result_out_of_range) {
    return IsBelowOne(text) ? NumberStatus::kUnderflow : NumberStatus::kOverflow;
  }
  if (ec != std::errc()) return NumberStatus::kInvalid;
  if (!std::isfinite(parsed)) return NumberStatus::kNonFinite;
  *value = parsed;
  return NumberStatus::kOk;
}

std::string ToLower(std::string_view text) {
  std::string out(text);
  for (char& c : out) {
    if (c >= 'A' && c <= 'Z') c = static_cast<char>(c - 'A' + 'a');
  }
  return out;
}

bool ParseFlag(std::string_view text, bool* value) {
  const std::string lower = ToLower(Trim(text));
  if (lower == "1" || lower == "yes" || lower == "true") {
    *value = true;
    return true;
  }
  if (lower == "0" || lower == "no" || lower == "false") {
    *value = false;
    return true;
  }
  return false;
}

void AppendFixed(double value, int decimals, std::string* out) {
  if (std::isnan(value)) return;
  char buffer[384];
  auto [end, ec] =
      std::to_chars(buffer, buffer + sizeof(buffer), value, std::chars_format::fixed, decimals);
  if (ec != std::errc()) return;
  std::string_view text(buffer, end - buffer);
  // A value that rounds to zero prints without its sign, so output does not
  // depend on the sign of a rounding residue.
  if (text.front() == '-' && text.find_first_not_of("-0.") == std::string_view::npos) {
    text.remove_prefix(1);
  }
  out->append(text);
}

void AppendShortest(double value, std::string* out) {
  if (std::isnan(value)) return;
  char buffer[64];
  // -0 reads back equal to 0; printing it as "0" keeps the text independent
  // of the sign of a zero.
  if (value == 0.0) value = 0.0;
  auto [end, ec] = std::to_chars(buffer, buffer + sizeof(buffer), value);
  if (ec != std::errc()) return;
  out->append(buffer, end - buffer);
}

void AppendInteger(int64_t value, std::string* out) {
  char buffer[24];
  const auto result = std::to_chars(buffer, buffer + sizeof(buffer), value);
  out->append(buffer, result.ptr - buffer);
}

std::string FormatFixed(double value, int decimals) {
  std::string out;
  AppendFixed(value, decimals, &out);
  return out;
}

std::string FormatReadable(double value, int decimals) {
  const double size = std::fabs(value);
  if (!std::isfinite(value) || value == 0 ||
      (size >= 10 * std::pow(10.0, -decimals) && size < 1e9)) {
    return FormatFixed(value, decimals);
  }
  char buffer[32];
  std::snprintf(buffer, sizeof(buffer), "%.3g", value);
  return buffer;
}

std::string FormatShareAsPercent(double share) {
  std::string text = FormatFixed(100.0 * share, 4);
  if (text.find('.') == std::string::npos) return text;
  while (text.back() == '0') text.pop_back();
  if (text.back() == '.') text.pop_back();
  return text;
}

double PercentToShare(double percent) {
  std::string text;
  AppendShortest(percent, &text);
  text += "e-2";
  double share = 0.0;
  const auto [end, ec] = std::from_chars(text.data(), text.data() + text.size(), share);
  return ec == std::errc() && end == text.data() + text.size() ? share : percent / 100.0;
}

std::string FormatCount(int64_t value) {
  const std::string digits = std::to_string(value < 0 ? -value : value);
  std::string out;
  for (size_t i = 0; i < digits.size(); ++i) {
    if (i > 0 && (digits.size() - i) % 3 == 0) out += ',';
    out += digits[i];
  }
  return value < 0 ? "-" + out : out;
}

std::string QuoteValue(std::string_view text) {
  size_t cut = std::min<size_t>(text.size(), 60);
  // Never inside a UTF-8 character: continuation bytes are 10xxxxxx.
  while (cut < text.size() && cut > 0 && (static_cast<unsigned char>(text[cut]) & 0xC0) == 0x80) {
    --cut;
  }
  std::string shown(text.substr(0, cut));
  for (char& c : shown) {
    if (c == '\n' || c == '\r') c = ' ';
  }
  if (text.size() > cut) shown += "...";
  return "'" + shown + "'";
}

std::string LocatedMessage(const std::string& path, int64_t line, int column, const std::string& what) {
  std::string out = path + ":" + std::to_string(line);
  if (column > 0) out += ":" + std::to_string(column);
  return out + ": " + what;
}

std::string NumberProblem(NumberStatus status, std::string_view what, std::string_view text) {
  switch (status) {
    case NumberStatus::kEmpty:
      return std::string(what) + " is empty";
    case NumberStatus::kInvalid:
      return std::string(what) + " " + QuoteValue(text) + " is not a number";
    case NumberStatus::kNonFinite:
      return std::string(what) + " " + QuoteValue(text) + " is not a finite number";
    case NumberStatus::kOverflow:
      return std::string(what) + " " + QuoteValue(text) +
             " is outside the range of numbers (overflow: beyond 1.8e308)";
    case NumberStatus::kUnderflow:
      return std::string(what) + " " + QuoteValue(text) +
             " is outside the range of numbers (underflow: nearer to zero than 4.9e-324)";
    case NumberStatus::kOk:
      break;
  }
  return "";
}

namespace {

bool IsDigit(char c) { return c >= '0' && c <= '9'; }
bool AllDigits(std::string_view text) {
  return !text.empty() && std::all_of(text.begin(), text.end(), IsDigit);
}

// True when `digits` is a whole number grouped by `separator` in threes:
// "1,200,000", "12,000".
bool IsGroupedNumber(std::string_view digits, char separator) {
  size_t at = digits.find(separator);
  if (at == std::string_view::npos || at == 0 || at > 3 || !AllDigits(digits.substr(0, at))) {
    return false;
  }
  while (at != std::string_view::npos) {
    const size_t next = digits.find(separator, at + 1);
    const std::string_view group = digits.substr(
        at + 1, next == std::string_view::npos ? std::string_view::npos : next - at - 1);
    if (group.size() != 3 || !AllDigits(group)) return false;
    at = next;
  }
  return true;
}

std::string Without(std::string_view text, std::string_view removed) {
  std::string out;
  for (char c : text) {
    if (removed.find(c) == std::string_view::npos) out += c;
  }
  return out;
}

}  // namespace

std::string NumberHint(std::string_view text, char decimal, std::string_view setting) {
  text = Trim(text);
  std::string_view body = text;
  if (!body.empty() && (body.front() == '-' || body.front() == '+')) body.remove_prefix(1);
  const char other = decimal == ',' ? '.' : ',';
  // The whole part (before the file's own decimal mark) and what follows.
  const size_t mark = body.find(decimal);
  const std::string_view whole = body.substr(0, mark);
  const std::string_view fraction =
      mark == std::string_view::npos ? std::string_view() : body.substr(mark + 1);
  if (mark != std::string_view::npos && !AllDigits(fraction)) return "";
  const std::string thousands = "thousands separators are not allowed (write " +
                                Without(text, std::string(1, other) + " '") + ")";
  if (whole.find_first_of(" '") != std::string_view::npos) {
    // "1 200 000", "1'200'000": spaces or apostrophes between digit groups.
    const bool grouped =
        IsGroupedNumber(Without(whole, "'"), ' ') || IsGroupedNumber(Without(whole, " "), '\'');
    return grouped && whole.find(other) == std::string_view::npos ? thousands : "";
  }
  const bool as_thousands = IsGroupedNumber(whole, other);
  // One foreign mark, digits on both sides, and no mark of the file's own.
  const size_t foreign = whole.find(other);
  const bool as_decimal = mark == std::string_view::npos && foreign != std::string_view::npos &&
                          whole.find(other, foreign + 1) == std::string_view::npos &&
                          AllDigits(whole.substr(0, foreign)) &&
                          AllDigits(whole.substr(foreign + 1));
  std::string decimal_hint;
  if (decimal == ',') {
    decimal_hint = "this file's decimal mark is ','";
    if (!setting.empty()) decimal_hint += " (" + std::string(setting) + ")";
  } else if (setting.empty()) {
    decimal_hint = "a decimal comma is not allowed here (write " +
                   std::string(whole.substr(0, foreign)) + "." +
                   std::string(whole.substr(foreign + 1)) + ")";
  } else {
    decimal_hint =
        "a decimal comma needs decimal: ',' for this file (" + std::string(setting) + ")";
  }
  if (as_thousands && as_decimal) return thousands + ", and " + decimal_hint;
  if (as_thousands) return thousands;
  if (as_decimal) return decimal_hint;
  return "";
}

std::string NumberProblem(NumberStatus status, std::string_view what, std::string_view text,
                          char decimal, std::string_view setting) {
  std::string problem = NumberProblem(status, what, text);
  if (status == NumberStatus::kInvalid) {
    const std::string hint = NumberHint(text, decimal, setting);
    if (!hint.empty()) problem += "; " + hint;
  }
  return problem;
}

int EditDistance(std::string_view a, std::string_view b, int max_distance) {
  const int n = static_cast<int>(a.size()), m = static_cast<int>(b.size());
  // Only cells within `bound` of the diagonal can hold a distance up to
  // `bound` (Ukkonen 1985); the others count as kFar. The distance never
  // exceeds the longer length, so a larger bound is no bound.
  const int bound = std::min(max_distance, std::max(n, m));
  if (std::abs(n - m) > bound) return bound + 1;
  const int kFar = bound + 1;
  // Optimal string alignment: a swap of adjacent characters is one edit, so
  // row i also reads row i - 2 (`before`), inside the band of row i - 2.
  std::vector<int> before(m + 1, kFar), previous(m + 1), current(m + 1);
  for (int j = 0; j <= m; ++j) previous[j] = std::min(j, kFar);
  for (int i = 1; i <= n; ++i) {
    const int lo = std::max(1, i - bound), hi = std::min(m, i + bound);
    current[0] = std::min(i, kFar);
    current[lo - 1] = lo == 1 ? current[0] : kFar;
    int row_min = current[lo - 1];
    for (int j = lo; j <= hi; ++j) {
      const int substitution = previous[j - 1] + (a[i - 1] == b[j - 1] ? 0 : 1);
      int best = std::min({previous[j] + 1, current[j - 1] + 1, substitution, kFar});
      if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1]) {
        best = std::min(best, before[j - 2] + 1);
      }
      current[j] = best;
      row_min = std::min(row_min, best);
    }
    if (hi < m) current[hi + 1] = kFar;  // The next row's band reaches one further.
    // Distances never fall along a diagonal, swaps included, so a row beyond
    // the bound leaves every later row beyond it.
    if (row_min >= kFar) return kFar;
    std::swap(before, previous);
    std::swap(previous, current);
  }
  return previous[m];
}

std::string NameKey(std::string_view text) {
  std::string key = ToLower(Trim(text));
  for (char& c : key) {
    if (c == '_' || c == ' ') c = '-';
  }
  return key;
}

std::string NearestName(std::string_view word, const std::vector<std::string>& candidates) {
  // Codes are at most 200 bytes: a longer word is no typo of one, and each
  // candidate would cost |word| x |candidate| steps.
  constexpr size_t kMaxWordBytes = 256;
  if (word.size() > kMaxWordBytes) return "";
  const std::string lower_word = NameKey(word);
  const int limit = std::max(2, static_cast<int>(word.size()) / 3);
  std::string best;
  int best_distance = limit + 1;
  for (const std::string& candidate : candidates) {
    // The distance is at least the difference in length.
    const size_t length_gap = candidate.size() > lower_word.size()
                                  ? candidate.size() - lower_word.size()
                                  : lower_word.size() - candidate.size();
    if (length_gap >= static_cast<size_t>(best_distance)) continue;
    const int distance = EditDistance(lower_word, NameKey(candidate), best_distance - 1);
    if (distance < best_distance) {
      best_distance = distance;
      best = candidate;
    }
  }
  return best;
}

std::string NotOneOf(std::string_view what, std::string_view value,
                     const std::vector<std::string>& names) {
  std::string out =
      std::string(what) + " " + QuoteValue(value) + " is not one of: " + JoinNames(names);
  const std::string nearest = NearestName(value, names);
  if (!nearest.empty()) out += "; did you mean '" + nearest + "'?";
  return out;
}

std::string JoinNames(const std::vector<std::string>& names, std::string_view separator) {
  std::string out;
  for (size_t i = 0; i < names.size(); ++i) {
    if (i > 0) out.append(separator);
    out.append(names[i]);
  }
  return out;
}

namespace {

// Length of the valid UTF-8 sequence starting at text[i] and its code point;
// 0 when the bytes there are not valid UTF-8 (overlong forms, surrogates and
// values above U+10FFFF included).
int Utf8Sequence(std::string_view text, size_t i, uint32_t* code_point) {
  const unsigned char c = static_cast<unsigned char>(text[i]);
  int length = 0;
  uint32_t cp = 0, min = 0;
  if (c < 0x80) {
    *code_point = c;
    return 1;
  } else if ((c & 0xE0) == 0xC0) {
    length = 2, cp = c & 0x1F, min = 0x80;
  } else if ((c & 0xF0) == 0xE0) {
    length = 3, cp = c & 0x0F, min = 0x800;
  } else if ((c & 0xF8) == 0xF0) {
    length = 4, cp = c & 0x07, min = 0x10000;
  } else {
    return 0;
  }
  if (i + length > text.size()) return 0;
  for (int k = 1; k < length; ++k) {
    const unsigned char next = static_cast<unsigned char>(text[i + k]);
    if ((next & 0xC0) != 0x80) return 0;
    cp = (cp << 6) | (next & 0x3F);
  }
  if (cp < min || cp > 0x10FFFF || (cp >= 0xD800 && cp <= 0xDFFF)) return 0;
  *code_point = cp;
  return length;
}

bool IsBidiControl(uint32_t cp) {
  return cp == 0x061C || cp == 0x200E || cp == 0x200F || (cp >= 0x202A && cp <= 0x202E) ||
         (cp >= 0x2066 && cp <= 0x2069);
}

}  // namespace

size_t FindInvalidUtf8(std::string_view text) {
  size_t i = 0;
  while (i < text.size()) {
    // Runs of ASCII, eight bytes at a time.
    while (i + 8 <= text.size()) {
      uint64_t word;
      std::memcpy(&word, text.data() + i, 8);
      if ((word & 0x8080808080808080ull) != 0) break;
      i += 8;
    }
    if (i >= text.size()) break;
    uint32_t cp = 0;
    const int length = Utf8Sequence(text, i, &cp);
    if (length == 0) return i;
    i += length;
  }
  return std::string_view::npos;
}

std::string ValidUtf8(std::string_view text) {
  static const char* kHex = "0123456789abcdef";
  if (FindInvalidUtf8(text) == std::string_view::npos) return std::string(text);
  std::string out;
  for (size_t i = 0; i < text.size();) {
    uint32_t cp = 0;
    const int length = Utf8Sequence(text, i, &cp);
    if (length > 0) {
      out.append(text.substr(i, length));
      i += length;
      continue;
    }
    const unsigned char c = static_cast<unsigned char>(text[i++]);
    out += "\\x";
    out += kHex[c >> 4];
    out += kHex[c & 15];
  }
  return out;
}

std::string Utf8Problem(std::string_view what, std::string_view field) {
  return std::string(what) + " " + QuoteValue(VisibleText(field)) + " is not valid UTF-8 (" +
         std::string(kUtf8Advice) + ")";
}

std::string VisibleText(std::string_view text) {
  static const char* kHex = "0123456789abcdef";
  std::string out;
  out.reserve(text.size());
  for (size_t i = 0; i < text.size();) {
    uint32_t cp = 0;
    const int length = Utf8Sequence(text, i, &cp);
    if (length == 0) {
      const unsigned char c = static_cast<unsigned char>(text[i]);
      out += "\\x";
      out += kHex[c >> 4];
      out += kHex[c & 15];
      ++i;
      continue;
    }
    if ((cp < 0x20 && cp != '\n' && cp != '\t') || cp == 0x7F) {
      out += "\\x";
      out += kHex[cp >> 4];
      out += kHex[cp & 15];
    } else if ((cp >= 0x80 && cp <= 0x9F) || IsBidiControl(cp)) {
      char buffer[16];  // Room for any 32-bit value, so no truncation warning.
      std::snprintf(buffer, sizeof(buffer), "\\u%04x", static_cast<unsigned>(cp));
      out += buffer;
    } else {
      out.append(text.substr(i, length));
    }
    i += length;
  }
  return out;
}

}  // namespace paritas
