// Small text utilities shared by the readers and writers: locale-free number
// parsing and formatting (std::from_chars / std::to_chars, so output is
// byte-identical everywhere), case-insensitive names and "did you mean".
#ifndef PARITAS_BASE_TEXT_H_
#define PARITAS_BASE_TEXT_H_

#include <cstdint>
#include <limits>
#include <string>
#include <string_view>
#include <vector>

namespace paritas {

// Outcome of parsing a number.
enum class NumberStatus {
  kOk,
  kEmpty,
  kInvalid,
  kNonFinite,  // inf or nan
  kOverflow,   // finite but larger in magnitude than the largest double (1.8e308)
  kUnderflow,  // finite and not zero but so near zero it would read as 0 (below 4.9e-324)
};

// Parses a decimal number (leading and trailing ASCII spaces allowed, a
// leading '+' allowed). Rejects empty text, trailing garbage, inf/nan, and
// numbers beyond the range of a double (subnormal numbers are read).
// `decimal` is the decimal mark: '.' (default) or ','; under ',' a '.' is
// refused, so "1.200" is never read as 1.2 or 1200.
NumberStatus ParseNumber(std::string_view text, double* value, char decimal = '.');

// Parses a 1/0, yes/no, true/false flag (case-insensitive, spaces trimmed).
// Returns false when the text is none of these.
bool ParseFlag(std::string_view text, bool* value);

// Removes leading and trailing ASCII spaces and tabs.
std::string_view Trim(std::string_view text);

// Lower-cases ASCII letters.
std::string ToLower(std::string_view text);

// Appends `value` with `decimals` digits after the point ("-0" printed as
// "0"); NaN appends nothing (an empty CSV cell).
void AppendFixed(double value, int decimals, std::string* out);
// Appends the shortest text that reads back as exactly `value`; NaN appends
// nothing.
void AppendShortest(double value, std::string* out);
// Appends `value` in decimal, as std::to_string does, without a temporary.
void AppendInteger(int64_t value, std::string* out);
// Returns AppendFixed as a string.
std::string FormatFixed(double value, int decimals);
// Returns FormatFixed(value, decimals) when that shows at least two
// significant digits and at most 9 before the point; otherwise three
// significant digits ("0.00413", "1.5e+12"), as printf's %.3g. For
// messages about figures of any size (a price per gram, an absurd quote).
std::string FormatReadable(double value, int decimals);

// Returns a share as a percentage with at most 4 decimals, trailing zeros
// dropped: 0.95 -> "95", 0.999 -> "99.9", 0.015 -> "1.5". For interval
// levels, which a whole-number format showed as "100" for 99.9 %.
std::string FormatShareAsPercent(double share);

// Returns the share a percentage stands for, read from the percentage's
// shortest decimal text with the point moved two places, so that 99.9
// gives exactly the double of 0.999 (99.9 / 100 gives the next one up).
double PercentToShare(double percent);

// Returns a whole number with thousands separated by commas: "12,345".
std::string FormatCount(int64_t value);

// Returns a value quoted for a message, 'like this': cut after 60 bytes
// ("...", never inside a UTF-8 character) and with line breaks shown as
// spaces, so a message stays one line.
std::string QuoteValue(std::string_view text);

// Says what a number ParseNumber refused as kInvalid was likely meant to be,
// for the end of its message; empty when nothing fits. Under decimal '.':
// "thousands separators are not allowed (write 1200000)" for '1,200,000'
// (also '1 200 000' and '1'200'000'), "a decimal comma needs decimal: ','
// for this file (survey.prices)" for '11,77' (`setting` names the file's
// configuration key; empty: "a decimal comma is not allowed here (write
// 11.77)"), both for '1,200'. Under decimal ',' the same with the roles of
// '.' and ',' swapped: "this file's decimal mark is ',' (survey.prices)".
std::string NumberHint(std::string_view text, char decimal, std::string_view setting);

// Returns "path:line:column: what" (": what" after the line when column is 0),
// the form of every message about a data row.
std::string LocatedMessage(const std::string& path, int64_t line, int column, const std::string& what);

// Describes why `text` is not a usable number, e.g. "price 'abc' is not a
// number"; empty for kOk.
std::string NumberProblem(NumberStatus status, std::string_view what, std::string_view text);
// The same, with NumberHint after "; " for text that is not a number, e.g.
// "population '1,200,000' is not a number; thousands separators are not
// allowed (write 1200000)".
std::string NumberProblem(NumberStatus status, std::string_view what, std::string_view text,
                          char decimal, std::string_view setting);

// Returns the optimal string alignment distance between two strings (edits:
// insert, delete or substitute a character, or swap two adjacent ones, each
// character edited at most once), or max_distance + 1 when it is larger than
// max_distance. A swap counts as one edit because it is a common typo ("PTR"
// for "PRT"). Costs O(|a| x min(max_distance, |b|)) steps: only a band
// around the diagonal is computed.
int EditDistance(std::string_view a, std::string_view b,
                 int max_distance = std::numeric_limits<int>::max());

// Returns `text` trimmed, lower-cased (ASCII) and with '_' and ' ' as '-':
// the form in which "Weighted_Mean" and "weighted-mean" are one name.
std::string NameKey(std::string_view text);

// Returns the candidate closest to `word` by edit distance, compared as
// NameKey (case ignored, '_' and ' ' taken as '-'), when it is close enough to
// be a plausible typo (distance <= max(2, |word| / 3)), else "". A word
// longer than 256 bytes gets no suggestion (codes are at most 200 bytes), so
// a huge word costs nothing.
std::string NearestName(std::string_view word, const std::vector<std::string>& candidates);

// Returns "<what> '<value>' is not one of: a, b, c", followed by "; did you
// mean 'b'?" when NearestName finds one: the message for every named value
// of the configuration and the command line.
std::string NotOneOf(std::string_view what, std::string_view value,
                     const std::vector<std::string>& names);

// Returns `text` safe to show on a terminal or in a report: line feeds and
// tabs are kept; other control characters (C0, DEL, C1), the Unicode
// bidirectional formatting characters (U+061C, U+200E-U+200F, U+202A-U+202E,
// U+2066-U+2069) and bytes that are not valid UTF-8 are shown as visible
// escapes ("\x1b", "\u202e", "\xff"), so data can neither drive the
// terminal nor reorder what is displayed.
std::string VisibleText(std::string_view text);

// Returns the offset of the first byte of `text` that is not part of a valid
// UTF-8 sequence (overlong forms, surrogates and code points above U+10FFFF
// are invalid), or std::string_view::npos when the whole text is valid.
// ASCII text is checked eight bytes at a time.
size_t FindInvalidUtf8(std::string_view text);

// Returns `text` with each byte that is not valid UTF-8 written as "\xNN"
// and everything else unchanged: for text from outside (a file name given
// on the command line) that must be UTF-8 where it goes (JSON).
std::string ValidUtf8(std::string_view text);

// Ends every message about text that is not UTF-8: the likely cause and the
// remedy.
inline constexpr std::string_view kUtf8Advice =
    "the file may be Latin-1 or Windows-1252: save it as UTF-8";

// Returns the problem of `field` (of column `what`) that is not valid UTF-8:
// "region 'Z\xfcrich' is not valid UTF-8 (" + kUtf8Advice + ")", the value
// shown through VisibleText so that the message itself is valid UTF-8.
std::string Utf8Problem(std::string_view what, std::string_view field);

// Joins names with ", ".
std::string JoinNames(const std::vector<std::string>& names, std::string_view separator = ", ");

}  // namespace paritas

#endif  // PARITAS_BASE_TEXT_H_
