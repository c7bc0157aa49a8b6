// Limits on what the readers accept, so that every input is read in bounded
// memory whatever it is: a regular file, a pipe or a device such as
// /dev/zero. Input beyond a limit is refused with a message naming the file,
// the line where it applies, the limit and the key that raises it, e.g.
// "prices.csv:1: a record longer than 16 MiB (limits.max_record_bytes);
// raise the limit if the file is right".
//
// The same struct is the `limits:` section of the run configuration
// (RunConfig::limits) and DeflateOptions::limits, so the key in a message
// names the setting in both.
#ifndef PARITAS_BASE_READ_LIMITS_H_
#define PARITAS_BASE_READ_LIMITS_H_

#include <cstdint>
#include <string>
#include <string_view>

namespace paritas {

struct ReadLimits {
  // Largest CSV file read whole: regions.csv, items.csv, expenditure.csv,
  // and for deflate parities.csv and sensitivity/bootstrap.csv. Default
  // 256 MiB: the largest of these in a real survey is expenditure.csv
  // (regions x headings rows of about 30 bytes: 30 MB at 1,000 x 1,000) or
  // a parities.csv (nodes x regions rows of about 100 bytes: 100 MB at
  // 1,000 x 1,000). prices.csv and the file deflated are streamed and have
  // no size limit.
  int64_t max_file_bytes = int64_t{256} << 20;
  // Largest YAML file: the configuration and the classification. Default
  // 1 MiB, a hundred times a classification of 5,000 headings. yaml-cpp
  // takes up to about 250 bytes of memory per byte of YAML (a dense flow
  // list), so this also bounds its memory to about 250 MB. The
  // configuration file itself is read under the default.
  int64_t max_yaml_bytes = int64_t{1} << 20;
  // Longest CSV record (one row, header included, without its line end).
  // Default 16 MiB: real rows are under a kilobyte and a header of 100,000
  // columns about 1 MB. A streamed file holds at most one block plus this
  // much text, so a file without line ends (/dev/zero) stops here.
  int64_t max_record_bytes = int64_t{16} << 20;
  // Longest CSV field (the bytes between separators, quotes excluded).
  // Default 1 MiB: codes are at most 200 bytes, numbers a few dozen,
  // names and descriptions rarely a kilobyte.
  int64_t max_field_bytes = int64_t{1} << 20;
  // Deepest nesting of YAML collections (a mapping or list inside another
  // counts one level). Default 64: a classification of depth d nests about
  // 2d + 1 levels, and real ones have d <= 10. At most 256, since yaml-cpp
  // itself stops at 500 levels with an unclear message.
  int max_yaml_depth = 64;

  // Byte limits from 1 byte to 1 TiB; max_yaml_depth from 1 to 256.
  bool IsValid(std::string* error) const;
};

// Largest value a byte limit may take (1 TiB).
inline constexpr int64_t kMaxByteLimit = int64_t{1} << 40;
// Largest value of max_yaml_depth.
inline constexpr int kMaxYamlDepthLimit = 256;

// Returns a byte count as the config would write it: "16 MiB", "4 KiB",
// "1 GiB" when a whole number of those units, else "1000 bytes" ("1 byte").
std::string FormatByteSize(int64_t bytes);

// Parses a byte count: a whole number, optionally followed (after spaces or
// not) by a unit KiB, MiB, GiB or TiB (case-insensitive; "KB", "MB", "GB"
// and "TB" mean the same powers of 1,024). Returns false on anything else,
// on a negative number or on overflow.
bool ParseByteSize(std::string_view text, int64_t* bytes);

// Returns the tail of every limit message, e.g.
// "(limits.max_record_bytes); raise the limit if the file is right".
std::string LimitAdvice(std::string_view key);

}  // namespace paritas

#endif  // PARITAS_BASE_READ_LIMITS_H_
