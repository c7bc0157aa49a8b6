// Tests of the CSV layer: the RFC 4180 grammar (RFC 4180, section 2, rules
// 1-7), exact error texts, robustness on hostile input (random and mutated
// bytes, truncation, huge fields, a million columns), chunked reading, writing
// and file access.
#include "paritas/base/csv.h"

#include <gtest/gtest.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <ctime>
#include <filesystem>
#include <random>
#include <string>
#include <thread>
#include <vector>

#include "paritas/base/code_table.h"
#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::ReadTextFile;
using ::paritas::testing::WriteTextFile;

// A record with its views copied, so records read from different buffers can
// be compared.
struct OwnedRecord {
  std::vector<std::string> fields;
  int64_t line = 0;
  int64_t offset = 0;
  std::string raw;
  bool operator==(const OwnedRecord&) const = default;
};

// Everything a reader yields for `data`: the records and the final error.
struct ReadResult {
  std::vector<OwnedRecord> records;
  std::string error;
};

// Reads all of `data`; `offset_base` is added to offsets so that chunks can be
// compared with the whole buffer.
ReadResult ReadAll(std::string_view data, int64_t first_line = 1, bool skip_bom = true,
                   int64_t offset_base = 0, const ReadLimits& limits = ReadLimits()) {
  ReadResult result;
  CsvReader reader(data, first_line, skip_bom);
  reader.set_limits(limits);
  CsvRecord record;
  // Each record consumes at least one byte, so more iterations mean a hang.
  for (size_t guard = 0; guard <= data.size() + 1 && reader.Next(&record); ++guard) {
    OwnedRecord owned;
    for (std::string_view field : record.fields) owned.fields.emplace_back(field);
    owned.line = record.line;
    owned.offset = record.offset + offset_base;
    owned.raw = std::string(record.raw);
    result.records.push_back(std::move(owned));
  }
  result.error = reader.error();
  return result;
}

std::vector<std::vector<std::string>> FieldsOf(const ReadResult& result) {
  std::vector<std::vector<std::string>> fields;
  for (const OwnedRecord& record : result.records) fields.push_back(record.fields);
  return fields;
}

// Reads `data` in the chunks SplitAtRecordBoundaries chooses, stopping at the
// first chunk that fails, as a parallel loader reporting errors in file order
// would.
ReadResult ReadInChunks(std::string_view data, int num_chunks) {
  std::vector<int64_t> first_lines;
  const std::vector<size_t> starts = SplitAtRecordBoundaries(data, num_chunks, 1, &first_lines);
  EXPECT_EQ(starts.size(), first_lines.size());
  ReadResult all;
  for (size_t i = 0; i < starts.size(); ++i) {
    const size_t stop = i + 1 < starts.size() ? starts[i + 1] : data.size();
    ReadResult part = ReadAll(data.substr(starts[i], stop - starts[i]), first_lines[i],
                              /*skip_bom=*/i == 0, static_cast<int64_t>(starts[i]));
    for (OwnedRecord& record : part.records) all.records.push_back(std::move(record));
    if (!part.error.empty()) {
      all.error = part.error;
      break;
    }
  }
  return all;
}

// ---------------------------------------------------------------- grammar

TEST(CsvReader, ReadsFieldsLineOffsetAndRawOfEachRecord) {
  const std::string data = "code,price\nA1,2.50\nB2,13\n";
  const ReadResult result = ReadAll(data);
  ASSERT_EQ(result.error, "");
  ASSERT_EQ(result.records.size(), 3u);
  EXPECT_EQ(result.records[1], (OwnedRecord{{"A1", "2.50"}, 2, 11, "A1,2.50"}));
  EXPECT_EQ(result.records[2], (OwnedRecord{{"B2", "13"}, 3, 19, "B2,13"}));
}

TEST(CsvReader, PointsUnquotedFieldsIntoTheBufferWithoutCopying) {
  const std::string data = "ab,\"cd\"\n";
  CsvReader reader(data);
  CsvRecord record;
  ASSERT_TRUE(reader.Next(&record));
  EXPECT_EQ(record.fields[0].data(), data.data());
  EXPECT_EQ(record.fields[1].data(), data.data() + 4);
  EXPECT_TRUE(record.scratch.empty());
}

TEST(CsvReader, TreatsCrlfLikeLf) {
  const ReadResult result = ReadAll("a,b\r\nc,d\r\n");
  ASSERT_EQ(result.records.size(), 2u);
  EXPECT_EQ(result.records[0], (OwnedRecord{{"a", "b"}, 1, 0, "a,b"}));
  EXPECT_EQ(result.records[1], (OwnedRecord{{"c", "d"}, 2, 5, "c,d"}));
  EXPECT_EQ(result.error, "");
}

TEST(CsvReader, ReadsTheLastRecordWithoutFinalNewline) {
  EXPECT_EQ(FieldsOf(ReadAll("a,b\nc,d")),
            (std::vector<std::vector<std::string>>{{"a", "b"}, {"c", "d"}}));
  // A file cut between CR and LF still ends its last record cleanly.
  const ReadResult cut = ReadAll("a,b\r\nc,d\r");
  ASSERT_EQ(cut.records.size(), 2u);
  EXPECT_EQ(cut.records[1].raw, "c,d");
  EXPECT_EQ(cut.error, "");
}

TEST(CsvReader, SkipsUtf8ByteOrderMarkAndCountsOffsetsFromTheBufferStart) {
  const ReadResult result = ReadAll("\xEF\xBB\xBFname,x\n1,2\n");
  ASSERT_EQ(result.records.size(), 2u);
  EXPECT_EQ(result.records[0], (OwnedRecord{{"name", "x"}, 1, 3, "name,x"}));
}

TEST(CsvReader, KeepsByteOrderMarkAsDataWhenNotAskedToSkipIt) {
  const ReadResult result = ReadAll("\xEF\xBB\xBFname\n", 1, /*skip_bom=*/false);
  ASSERT_EQ(result.records.size(), 1u);
  EXPECT_EQ(result.records[0].fields, (std::vector<std::string>{"\xEF\xBB\xBFname"}));
}

TEST(CsvReader, SkipsBlankLinesButCountsThem) {
  const ReadResult result = ReadAll("\n\r\na\n\n\nb\r\n\r\n");
  ASSERT_EQ(result.records.size(), 2u);
  EXPECT_EQ(result.records[0], (OwnedRecord{{"a"}, 3, 3, "a"}));
  EXPECT_EQ(result.records[1], (OwnedRecord{{"b"}, 6, 7, "b"}));
  EXPECT_EQ(result.error, "");
}

TEST(CsvReader, ReadsNothingFromEmptyOrBlankData) {
  for (const char* data : {"", "\n", "\r\n\n", "\xEF\xBB\xBF", "\r"}) {
    const ReadResult result = ReadAll(data);
    EXPECT_TRUE(result.records.empty()) << data;
    EXPECT_EQ(result.error, "") << data;
  }
}

TEST(CsvReader, KeepsEmptyFieldsIncludingATrailingOne) {
  EXPECT_EQ(FieldsOf(ReadAll(",a,,\n,\n\"\"\n")),
            (std::vector<std::vector<std::string>>{{"", "a", "", ""}, {"", ""}, {""}}));
  // A trailing comma at the very end of the data still opens a last field.
  EXPECT_EQ(FieldsOf(ReadAll("x,")), (std::vector<std::vector<std::string>>{{"x", ""}}));
}

TEST(CsvReader, KeepsSpacesAroundUnquotedFields) {
  // RFC 4180 section 2 rule 4: spaces are part of a field.
  EXPECT_EQ(FieldsOf(ReadAll(" a , b\n")), (std::vector<std::vector<std::string>>{{" a ", " b"}}));
}

TEST(CsvReader, UnquotesCommasDoubledQuotesAndNewlinesInsideQuotes) {
  // RFC 4180 section 2 rules 6 and 7.
  const std::string data = "\"a,b\",\"say \"\"hi\"\"\",\"two\nlines\"\nnext,\"\"\"\"\n";
  const ReadResult result = ReadAll(data);
  ASSERT_EQ(result.error, "");
  ASSERT_EQ(result.records.size(), 2u);
  EXPECT_EQ(
      result.records[0],
      (OwnedRecord{
          {"a,b", "say \"hi\"", "two\nlines"}, 1, 0, "\"a,b\",\"say \"\"hi\"\"\",\"two\nlines\""}));
  EXPECT_EQ(result.records[1], (OwnedRecord{{"next", "\""}, 3, 31, "next,\"\"\"\""}));
}

TEST(CsvReader, KeepsCrLfAndLoneCrInsideQuotesAsData) {
  const ReadResult result = ReadAll("\"a\rb\",\"c\r\nd\"\r\nz\n");
  ASSERT_EQ(result.error, "");
  ASSERT_EQ(result.records.size(), 2u);
  EXPECT_EQ(result.records[0].fields, (std::vector<std::string>{"a\rb", "c\r\nd"}));
  // Lines are counted by LF only, so the lone CR starts no line.
  EXPECT_EQ(result.records[1].line, 3);
}

TEST(CsvReader, KeepsEveryViewValidWhenManyFieldsNeedUnescaping) {
  // Fields of growing size would reallocate a scratch that grew field by field.
  std::string data;
  std::vector<std::string> expected;
  for (int i = 0; i < 60; ++i) {
    if (i > 0) data += ',';
    std::string field(static_cast<size_t>(i) * 37, static_cast<char>('a' + i % 26));
    field += "\"q\"";
    expected.push_back(field);
    AppendCsvField(field, &data);
  }
  data += "\n\"x\"\"y\",plain\n";
  CsvReader reader(data);
  CsvRecord record;
  ASSERT_TRUE(reader.Next(&record));
  ASSERT_EQ(record.fields.size(), expected.size());
  for (size_t i = 0; i < expected.size(); ++i) EXPECT_EQ(record.fields[i], expected[i]) << i;
  // The same record object serves the next row with its own fresh views.
  ASSERT_TRUE(reader.Next(&record));
  EXPECT_EQ(record.fields, (std::vector<std::string_view>{"x\"y", "plain"}));
}

TEST(CsvReader, ReadsNulAndOtherBinaryBytesAsData) {
  static constexpr char kBytes[] = "a\0b,\0\n\xff\xfe,\x01\n";
  const std::string data(kBytes, sizeof kBytes - 1);
  const ReadResult result = ReadAll(data);
  ASSERT_EQ(result.error, "");
  EXPECT_EQ(FieldsOf(result),
            (std::vector<std::vector<std::string>>{{std::string("a\0b", 3), std::string("\0", 1)},
                                                   {"\xff\xfe", "\x01"}}));
}

TEST(CsvReader, StartsLineNumbersAtTheGivenFirstLine) {
  const ReadResult result = ReadAll("a\nb\n", 41);
  ASSERT_EQ(result.records.size(), 2u);
  EXPECT_EQ(result.records[0].line, 41);
  EXPECT_EQ(result.records[1].line, 42);
}

// ----------------------------------------------------------------- errors

TEST(CsvReader, ReportsUnterminatedQuotedFieldWhereItOpened) {
  const ReadResult result = ReadAll("a,b\nc,d,\"open\nmore\n");
  EXPECT_EQ(result.error, "2:3: unterminated quoted field (opened here)");
  EXPECT_EQ(FieldsOf(result), (std::vector<std::vector<std::string>>{{"a", "b"}}));
  // A doubled quote at the very end does not close the field.
  EXPECT_EQ(ReadAll("\"x\"\"").error, "1:1: unterminated quoted field (opened here)");
  EXPECT_EQ(ReadAll("\"").error, "1:1: unterminated quoted field (opened here)");
}

TEST(CsvReader, ReportsQuoteInsideUnquotedField) {
  EXPECT_EQ(ReadAll("a,b\"c\n").error, "1:2: unexpected quote in unquoted field");
  EXPECT_EQ(ReadAll("ok\nx,y,z\"\n").error, "2:3: unexpected quote in unquoted field");
}

TEST(CsvReader, ReportsTextAfterClosingQuoteOnTheLineOfThatText) {
  EXPECT_EQ(ReadAll("\"a\"b,c\n").error, "1:1: unexpected text after closing quote");
  EXPECT_EQ(ReadAll("\"a\" ,c\n").error, "1:1: unexpected text after closing quote");
  // The quoted field spans lines 1-2; the stray text is on line 2.
  EXPECT_EQ(ReadAll("x,\"multi\nline\"y\n").error, "2:2: unexpected text after closing quote");
}

TEST(CsvReader, ReportsCarriageReturnNotFollowedByLineFeed) {
  EXPECT_EQ(ReadAll("a,b\rc,d\n").error,
            "1:2: stray carriage return (line ends must be LF or CRLF)");
  EXPECT_EQ(ReadAll("\"a\"\rb\n").error,
            "1:1: stray carriage return (line ends must be LF or CRLF)");
  EXPECT_EQ(ReadAll("a\n\rb\n").error, "2:1: stray carriage return (line ends must be LF or CRLF)");
}

TEST(CsvReader, StaysFailedAfterAnError) {
  CsvReader reader("a\"\nb\n");
  CsvRecord record;
  EXPECT_FALSE(reader.Next(&record));
  EXPECT_TRUE(record.fields.empty());
  EXPECT_FALSE(reader.Next(&record));
  EXPECT_EQ(reader.error(), "1:1: unexpected quote in unquoted field");
}

TEST(CsvReader, ReadsEveryPrefixOfAValidFileAsAPrefixOfItsRecords) {
  // Cutting a file anywhere may shorten its last record or leave a quote open,
  // but never changes the records before the cut.
  const std::string data = "id,\"na,me\"\r\n7,\"say \"\"a\"\"\nnext\"\r\n\n8,x\n\"\",9";
  const ReadResult full = ReadAll(data);
  ASSERT_EQ(full.error, "");
  ASSERT_EQ(full.records.size(), 4u);
  for (size_t length = 0; length <= data.size(); ++length) {
    const ReadResult cut = ReadAll(std::string_view(data).substr(0, length));
    ASSERT_LE(cut.records.size(), full.records.size()) << length;
    for (size_t i = 0; i + 1 < cut.records.size(); ++i) {
      EXPECT_EQ(cut.records[i], full.records[i]) << length;
    }
    if (!cut.records.empty()) {
      const OwnedRecord& last = cut.records.back();
      const OwnedRecord& whole = full.records[cut.records.size() - 1];
      EXPECT_EQ(last.offset, whole.offset) << length;
      EXPECT_EQ(whole.raw.compare(0, last.raw.size(), last.raw), 0) << length;
    }
    EXPECT_TRUE(cut.error.empty() ||
                cut.error.find(": unterminated quoted field (opened here)") != std::string::npos)
        << length << ": " << cut.error;
  }
}

// ------------------------------------------------------------- robustness

TEST(CsvReader, ReadsHundredMegabyteFieldsUnderRaisedLimits) {
  const size_t kNumBytes = size_t{100} << 20;
  ReadLimits limits;
  limits.max_field_bytes = limits.max_record_bytes = int64_t{1} << 30;
  {
    std::string data(kNumBytes, 'p');
    data += ",tail\nz\n";
    const ReadResult result = ReadAll(data, 1, true, 0, limits);
    ASSERT_EQ(result.error, "");
    ASSERT_EQ(result.records.size(), 2u);
    EXPECT_EQ(result.records[0].fields[0].size(), kNumBytes);
    EXPECT_EQ(result.records[0].fields[1], "tail");
  }
  {
    // One quoted field of 100 MB holding commas, newlines and doubled quotes.
    const std::string unit = "x,\n\"\"";  // 5 bytes, reads as 4.
    const size_t num_units = kNumBytes / unit.size();
    std::string data = "\"";
    data.reserve(kNumBytes + 16);
    for (size_t i = 0; i < num_units; ++i) data += unit;
    data += "\",b\nend\n";
    CsvReader reader(data);
    reader.set_limits(limits);
    CsvRecord record;
    ASSERT_TRUE(reader.Next(&record));
    ASSERT_EQ(record.fields.size(), 2u);
    ASSERT_EQ(record.fields[0].size(), num_units * 4);
    EXPECT_EQ(record.fields[0].substr(0, 8), "x,\n\"x,\n\"");
    EXPECT_EQ(record.fields[1], "b");
    ASSERT_TRUE(reader.Next(&record));
    EXPECT_EQ(record.line, static_cast<int64_t>(num_units) + 2);
  }
}

// ----------------------------------------------------------------- limits

ReadLimits SmallLimits(int64_t max_field_bytes, int64_t max_record_bytes) {
  ReadLimits limits;
  limits.max_field_bytes = max_field_bytes;
  limits.max_record_bytes = max_record_bytes;
  return limits;
}

TEST(CsvReader, RefusesAFieldBeyondTheLimitNamingItsLineAndColumn) {
  const ReadLimits limits = SmallLimits(4, 100);
  EXPECT_EQ(ReadAll("ab,abcd\nab,cdefg\n", 1, true, 0, limits).error,
            "2:2: a field longer than 4 bytes (limits.max_field_bytes); raise the limit if the "
            "file is right");
  // A quoted field is named where it opens; its quotes do not count.
  EXPECT_EQ(ReadAll("x\n\"abcd\"\n\"ab\ncde\"\n", 1, true, 0, limits).error,
            "3:1: a quoted field (opened here) longer than 4 bytes (limits.max_field_bytes); raise "
            "the limit if the file is right");
  EXPECT_EQ(ReadAll("a\n\"abcdef", 1, true, 0, limits).error,
            "2:1: a quoted field (opened here) longer than 4 bytes (limits.max_field_bytes); raise "
            "the limit if the file is right");
  EXPECT_EQ(ReadAll("a\n\"abc", 1, true, 0, limits).error,
            "2:1: unterminated quoted field (opened here)");
}

TEST(CsvReader, RefusesARecordBeyondTheLimitAtItsFirstLine) {
  const ReadLimits limits = SmallLimits(100, 10);
  const ReadResult exact =
      ReadAll("abcde,ghij\r\n", 1, true, 0, limits);  // 10 bytes, line end aside.
  EXPECT_EQ(exact.error, "");
  EXPECT_EQ(exact.records.size(), 1u);
  EXPECT_EQ(ReadAll("a,b\nabcde,\"g\nhijk\"\n", 1, true, 0, limits).error,
            "2: a record longer than 10 bytes (limits.max_record_bytes); raise the limit if the "
            "file is right");
  EXPECT_EQ(ReadAll("abcde,ghij,", 1, true, 0, limits).error,
            "1: a record longer than 10 bytes (limits.max_record_bytes); raise the limit if the "
            "file is right");
}

// The limit crossed at the earlier byte of the record is named, so a block
// boundary inside the record cannot change the message.
TEST(CsvReader, NamesTheLimitCrossedFirst) {
  const ReadLimits limits = SmallLimits(5, 8);
  // Field 2 starts at byte 4; its limit falls at byte 9, after the record's (8).
  EXPECT_EQ(ReadAll("abc,defghij\n", 1, true, 0, limits).error,
            "1: a record longer than 8 bytes (limits.max_record_bytes); raise the limit if the "
            "file is right");
  EXPECT_EQ(ReadAll("abcdefg,h\n", 1, true, 0, limits).error,
            "1:1: a field longer than 5 bytes (limits.max_field_bytes); raise the limit if the "
            "file is right");
}

TEST(ReadLimits, DefaultsAreValidAndFormatAsTheConfigWritesThem) {
  std::string error;
  EXPECT_TRUE(ReadLimits().IsValid(&error)) << error;
  ReadLimits limits;
  limits.max_record_bytes = 0;
  EXPECT_FALSE(limits.IsValid(&error));
  EXPECT_EQ(error, "limits.max_record_bytes must be from 1 byte to 1 TiB, found 0");
  limits = ReadLimits();
  limits.max_yaml_depth = 300;
  EXPECT_FALSE(limits.IsValid(&error));
  EXPECT_EQ(error, "limits.max_yaml_depth must be from 1 to 256, found 300");
  EXPECT_EQ(FormatByteSize(16 << 20), "16 MiB");
  EXPECT_EQ(FormatByteSize(1536), "1536 bytes");
  EXPECT_EQ(FormatByteSize(int64_t{3} << 30), "3 GiB");
  EXPECT_EQ(FormatByteSize(1), "1 byte");
  int64_t bytes = 0;
  ASSERT_TRUE(ParseByteSize("64 MiB", &bytes));
  EXPECT_EQ(bytes, int64_t{64} << 20);
  ASSERT_TRUE(ParseByteSize("2gb", &bytes));
  EXPECT_EQ(bytes, int64_t{2} << 30);
  ASSERT_TRUE(ParseByteSize(" 1000 ", &bytes));
  EXPECT_EQ(bytes, 1000);
  for (const char* bad : {"", "MiB", "-1", "1.5 MiB", "12 furlongs", "99999999999 TiB", "1e6"}) {
    EXPECT_FALSE(ParseByteSize(bad, &bytes)) << bad;
  }
}

TEST(CsvReader, ReadsAMillionColumnsQuickly) {
  const int kNumColumns = 1000000;
  std::string data;
  for (int i = 0; i < kNumColumns; ++i) {
    if (i > 0) data += ',';
    data += std::to_string(i % 1000);
  }
  data += "\n1,\"2\"\n";
  const auto start = std::chrono::steady_clock::now();
  CsvReader reader(data);
  CsvRecord record;
  ASSERT_TRUE(reader.Next(&record));
  const double seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  ASSERT_EQ(record.fields.size(), static_cast<size_t>(kNumColumns));
  EXPECT_EQ(record.fields[0], "0");
  EXPECT_EQ(record.fields[123456], "456");
  EXPECT_EQ(record.fields[kNumColumns - 1], "999");
  std::printf("a million columns (%zu bytes) read in %.4f s\n", data.size(), seconds);
  ASSERT_TRUE(reader.Next(&record));
  EXPECT_EQ(record.fields, (std::vector<std::string_view>{"1", "2"}));
  EXPECT_EQ(record.line, 2);
}

// Bytes drawn mostly from those the grammar cares about, so random strings
// reach every branch.
char RandomCsvByte(std::mt19937_64& rng) {
  static constexpr char kAlphabet[] = {',', '"',  '\n',   '\r',   'a',
                                       ' ', '\0', '\xEF', '\xBB', '\xBF'};
  const int pick = static_cast<int>(rng() % 14);
  if (pick < 10) return kAlphabet[pick];
  return static_cast<char>(rng() % 256);
}

// A valid CSV text of random records, written with AppendCsvRecord.
std::string RandomValidCsv(std::mt19937_64& rng, std::vector<std::vector<std::string>>* rows) {
  std::string text;
  const int num_rows = static_cast<int>(rng() % 6);
  for (int r = 0; r < num_rows; ++r) {
    std::vector<std::string> row(1 + rng() % 5);
    for (std::string& field : row) {
      const int length = static_cast<int>(rng() % 7);
      for (int k = 0; k < length; ++k) field += RandomCsvByte(rng);
    }
    std::vector<std::string_view> views(row.begin(), row.end());
    AppendCsvRecord(views, &text);
    if (rows != nullptr) rows->push_back(std::move(row));
  }
  return text;
}

// Checks what must hold for any input: termination, views inside the buffer
// or the scratch, and chunked reading agreeing with a single pass.
void CheckInvariants(const std::string& data) {
  CsvReader reader(data);
  CsvRecord record;
  size_t num_records = 0;
  int64_t previous_line = 0;
  while (reader.Next(&record)) {
    ASSERT_LE(++num_records, data.size()) << "no progress";
    ASSERT_GE(record.offset, 0);
    ASSERT_EQ(record.raw.data(), data.data() + record.offset);
    ASSERT_LE(static_cast<size_t>(record.offset) + record.raw.size(), data.size());
    ASSERT_GT(record.line, previous_line);
    previous_line = record.line;
    ASSERT_FALSE(record.fields.empty());
    for (std::string_view field : record.fields) {
      const bool in_raw = field.data() >= record.raw.data() &&
                          field.data() + field.size() <= record.raw.data() + record.raw.size();
      const bool in_scratch =
          field.data() >= record.scratch.data() &&
          field.data() + field.size() <= record.scratch.data() + record.scratch.size();
      ASSERT_TRUE(in_raw || in_scratch);
    }
  }
  const ReadResult whole = ReadAll(data);
  for (int num_chunks : {2, 3, 7}) {
    const ReadResult chunked = ReadInChunks(data, num_chunks);
    ASSERT_EQ(chunked.records, whole.records) << num_chunks;
    ASSERT_EQ(chunked.error, whole.error) << num_chunks;
  }
}

TEST(CsvReader, SurvivesRandomBytesAndMutatedValidFiles) {
  std::mt19937_64 rng(20240611);
  for (int trial = 0; trial < 4000; ++trial) {
    std::string data;
    if (trial % 2 == 0) {
      const size_t length = rng() % 64;
      for (size_t k = 0; k < length; ++k) data += RandomCsvByte(rng);
    } else {
      data = RandomValidCsv(rng, nullptr);
      const int num_mutations = static_cast<int>(rng() % 4);
      for (int m = 0; m < num_mutations && !data.empty(); ++m) {
        const size_t at = rng() % data.size();
        switch (rng() % 4) {
          case 0:
            data[at] = RandomCsvByte(rng);
            break;
          case 1:
            data.insert(data.begin() + at, RandomCsvByte(rng));
            break;
          case 2:
            data.erase(at, 1);
            break;
          default:
            data.resize(at);
            break;
        }
      }
    }
    SCOPED_TRACE("trial " + std::to_string(trial));
    // An exactly sized heap copy lets a sanitizer build see any overread.
    CheckInvariants(std::string(data.begin(), data.end()));
    if (::testing::Test::HasFatalFailure()) return;
  }
}

// ----------------------------------------------------------------- chunks

TEST(SplitAtRecordBoundaries, StartsChunksAfterNewlinesOutsideQuotes) {
  // Byte offsets: "a,1\n" 0-3, "\"b\nb\",2\n" 4-11, "c,3\n" 12-15, "d,4\n" 16-19.
  // The first target, 20 / 3 = 6, is the LF inside the quoted field, so the
  // second chunk starts only at 12 (line 4); the target 13 gives 16 (line 5).
  const std::string data = "a,1\n\"b\nb\",2\nc,3\nd,4\n";
  std::vector<int64_t> first_lines;
  EXPECT_EQ(SplitAtRecordBoundaries(data, 3, 1, &first_lines), (std::vector<size_t>{0, 12, 16}));
  EXPECT_EQ(first_lines, (std::vector<int64_t>{1, 4, 5}));
  EXPECT_EQ(SplitAtRecordBoundaries(data, 3, 10, &first_lines), (std::vector<size_t>{0, 12, 16}));
  EXPECT_EQ(first_lines, (std::vector<int64_t>{10, 13, 14}));
}

TEST(SplitAtRecordBoundaries, ReturnsOneChunkForEmptyDataOrFewerThanOneChunk) {
  std::vector<int64_t> first_lines;
  EXPECT_EQ(SplitAtRecordBoundaries("", 8, 2, &first_lines), (std::vector<size_t>{0}));
  EXPECT_EQ(first_lines, (std::vector<int64_t>{2}));
  EXPECT_EQ(SplitAtRecordBoundaries("a\nb\n", 0, 1, nullptr), (std::vector<size_t>{0}));
  EXPECT_EQ(SplitAtRecordBoundaries("a\nb\n", -3, 1, nullptr), (std::vector<size_t>{0}));
}

TEST(SplitAtRecordBoundaries, MakesNoEmptyChunksWhenAskedForMoreThanThereAreRecords) {
  EXPECT_EQ(SplitAtRecordBoundaries("a\nb\nc\n", 100, 1, nullptr), (std::vector<size_t>{0, 2, 4}));
  EXPECT_EQ(SplitAtRecordBoundaries("\"a\nb\nc\"\n", 100, 1, nullptr), (std::vector<size_t>{0}));
}

TEST(SplitAtRecordBoundaries, ChunksReadToExactlyTheRecordsOfOnePass) {
  std::mt19937_64 rng(7);
  std::string data;
  for (int i = 0; i < 3000; ++i) {
    data += 'R';
    data += std::to_string(i % 17);
    data += ',';
    switch (rng() % 5) {
      case 0:
        data += "\"multi\nline ";
        data += std::to_string(i);
        data += '"';
        break;
      case 1:
        data += "\"say \"\"x\"\",\r\n\"\"\"";
        break;  // say "x",CRLF"
      case 2:
        data += std::to_string(rng() % 100000);
        break;
      case 3:
        data += "\"\n\n\"";
        break;
      default:
        data += "";
        break;
    }
    data += i % 7 == 0 ? "\r\n" : "\n";
    if (i % 11 == 0) data += "\n";  // Blank lines.
  }
  const ReadResult whole = ReadAll(data);
  ASSERT_EQ(whole.error, "");
  ASSERT_EQ(whole.records.size(), 3000u);
  for (int num_chunks = 1; num_chunks <= 24; ++num_chunks) {
    std::vector<int64_t> first_lines;
    const std::vector<size_t> starts = SplitAtRecordBoundaries(data, num_chunks, 1, &first_lines);
    EXPECT_EQ(starts.size(), static_cast<size_t>(num_chunks));
    const ReadResult chunked = ReadInChunks(data, num_chunks);
    EXPECT_EQ(chunked.error, "");
    EXPECT_TRUE(chunked.records == whole.records) << num_chunks << " chunks";
  }
}

// ----------------------------------------------------------------- header

TEST(CsvHeader, FindsNamesAfterTrimmingSpaces) {
  const CsvHeader header({" region", "item ", "  price  ", "Price"});
  EXPECT_EQ(header.names(), (std::vector<std::string>{"region", "item", "price", "Price"}));
  EXPECT_EQ(header.Find("region"), 0);
  EXPECT_EQ(header.Find(" item"), 1);
  EXPECT_EQ(header.Find("price"), 2);
  EXPECT_EQ(header.Find("Price"), 3);  // Case matters.
  EXPECT_EQ(header.Find("quantity"), -1);
  EXPECT_EQ(header.Find("reg"), -1);
  EXPECT_TRUE(header.duplicates().empty());
}

TEST(CsvHeader, KeepsFirstOccurrenceAndListsEachDuplicateOnce) {
  const CsvHeader header({"a", "b", "b ", "a", "b", "c"});
  EXPECT_EQ(header.Find("a"), 0);
  EXPECT_EQ(header.Find("b"), 1);
  EXPECT_EQ(header.Find("c"), 5);
  EXPECT_EQ(header.duplicates(), (std::vector<std::string>{"b", "a"}));
}

TEST(CsvHeader, FindsNothingInAnEmptyHeader) {
  const CsvHeader header;
  EXPECT_EQ(header.Find(""), -1);
  EXPECT_TRUE(header.names().empty());
}

// ---------------------------------------------------------------- writing

TEST(AppendCsvField, QuotesOnlyFieldsThatNeedIt) {
  const auto quoted = [](std::string_view field) {
    std::string out;
    AppendCsvField(field, &out);
    return out;
  };
  EXPECT_EQ(quoted("plain-1.5"), "plain-1.5");
  EXPECT_EQ(quoted(""), "");
  EXPECT_EQ(quoted("in side"), "in side");
  EXPECT_EQ(quoted("a,b"), "\"a,b\"");
  EXPECT_EQ(quoted("say \"hi\""), "\"say \"\"hi\"\"\"");
  EXPECT_EQ(quoted("\""), "\"\"\"\"");
  EXPECT_EQ(quoted("a\nb"), "\"a\nb\"");
  EXPECT_EQ(quoted("a\rb"), "\"a\rb\"");
  EXPECT_EQ(quoted(" lead"), "\" lead\"");
  EXPECT_EQ(quoted("trail "), "\"trail \"");
  EXPECT_EQ(quoted("\xEF\xBB\xBFx"), "\"\xEF\xBB\xBFx\"");
}

TEST(AppendCsvRecord, WritesALoneEmptyFieldAsTwoQuotes) {
  std::string out;
  AppendCsvRecord({""}, &out);
  AppendCsvRecord({"a", "", "b,c"}, &out);
  EXPECT_EQ(out, "\"\"\na,,\"b,c\"\n");
}

TEST(AppendCsvRecord, RoundTripsRandomFieldsThroughTheReader) {
  std::mt19937_64 rng(99);
  for (int trial = 0; trial < 2000; ++trial) {
    std::vector<std::vector<std::string>> rows;
    const std::string text = RandomValidCsv(rng, &rows);
    const ReadResult result = ReadAll(text);
    ASSERT_EQ(result.error, "") << trial;
    ASSERT_EQ(FieldsOf(result), rows) << trial;
  }
}

// ------------------------------------------------------------------ files

TEST(ReadWholeFile, ReportsAMissingFileWithTheSystemReason) {
  const std::string path = MakeTempDir("csv_missing") + "/absent.csv";
  std::string contents = "stale";
  std::string error;
  EXPECT_FALSE(ReadWholeFile(path, 1 << 20, "", &contents, &error));
  EXPECT_EQ(error, path + ": cannot open file: No such file or directory");
  EXPECT_EQ(contents, "");
}

TEST(ReadWholeFile, ReportsAFolderAsUnreadable) {
  const std::string dir = MakeTempDir("csv_folder");
  std::string contents;
  std::string error;
  EXPECT_FALSE(ReadWholeFile(dir, 1 << 20, "", &contents, &error));
  EXPECT_EQ(error, dir + ": cannot read file: Is a directory");
}

TEST(ReadWholeFile, ReadsFilesWhoseSizeTheSystemDoesNotReport) {
  // /proc files report size 0; their contents must still be read in full.
  std::string contents;
  std::string error;
  ASSERT_TRUE(ReadWholeFile("/proc/self/status", 1 << 20, "", &contents, &error)) << error;
  EXPECT_EQ(contents.rfind("Name:", 0), 0u);
  EXPECT_NE(contents.find("\nPid:"), std::string::npos);
}

TEST(ReadWholeFile, StopsBeyondTheLimitWhateverTheFileIs) {
  const std::string path = MakeTempDir("csv_whole_limit") + "/items.csv";
  WriteTextFile(path, std::string(1024, 'x'));
  std::string contents;
  std::string error;
  ASSERT_TRUE(ReadWholeFile(path, 1024, LimitAdvice("limits.max_file_bytes"), &contents, &error));
  EXPECT_EQ(contents.size(), 1024u);
  EXPECT_FALSE(ReadWholeFile(path, 1023, LimitAdvice("limits.max_file_bytes"), &contents, &error));
  EXPECT_EQ(error, path +
                       ": file larger than 1023 bytes (limits.max_file_bytes); raise the limit "
                       "if the file is right");
  // A device reports size 0 and never ends.
  EXPECT_FALSE(
      ReadWholeFile("/dev/zero", 1 << 20, LimitAdvice("limits.max_file_bytes"), &contents, &error));
  EXPECT_EQ(error,
            "/dev/zero: file larger than 1 MiB (limits.max_file_bytes); raise the limit if "
            "the file is right");
  EXPECT_EQ(contents, "");
}

// A writer on another thread feeds a FIFO in small pieces.
class FifoWriter {
 public:
  FifoWriter(const std::string& path, std::string data) {
    EXPECT_EQ(::mkfifo(path.c_str(), 0600), 0);
    thread_ = std::thread([path, data = std::move(data)] {
      std::FILE* out = std::fopen(path.c_str(), "wb");
      if (out == nullptr) return;
      for (size_t at = 0; at < data.size(); at += 1000) {
        std::fwrite(data.data() + at, 1, std::min<size_t>(1000, data.size() - at), out);
        std::fflush(out);
      }
      std::fclose(out);
    });
  }
  ~FifoWriter() { thread_.join(); }

 private:
  std::thread thread_;
};

TEST(ReadWholeFile, ReadsAFifo) {
  const std::string path = MakeTempDir("csv_whole_fifo") + "/regions.csv";
  const std::string data = "region\n" + std::string(100000, 'r') + "\n";
  std::string contents;
  std::string error;
  {
    FifoWriter writer(path, data);
    ASSERT_TRUE(ReadWholeFile(path, 1 << 20, "", &contents, &error)) << error;
  }
  EXPECT_TRUE(contents == data);
}

// Reads `path` with a CsvBlockReader and returns the records as one reader
// over the whole file sees them, the concatenated fresh bytes and the error.
struct BlockRead {
  ReadResult result;
  std::string fresh;
  std::string error;
  bool has_bom = false;
  int64_t num_bytes_read = 0;
};
BlockRead ReadInBlocks(const std::string& path, int64_t block_bytes,
                       const ReadLimits& limits = ReadLimits(), int64_t first_block_bytes = 0,
                       std::vector<size_t>* fresh_sizes = nullptr) {
  BlockRead out;
  CsvBlockReader blocks(path, block_bytes, limits);
  if (first_block_bytes > 0) blocks.set_first_block_bytes(first_block_bytes);
  if (!blocks.Open(&out.error)) return out;
  CsvBlock block;
  while (blocks.Next(&block, &out.error)) {
    out.fresh.append(block.fresh);
    if (fresh_sizes != nullptr) fresh_sizes->push_back(block.fresh.size());
    const ReadResult part = ReadAll(block.records, block.first_line, false, 0, limits);
    for (const OwnedRecord& record : part.records) {
      OwnedRecord copy = record;
      copy.offset = 0;  // Offsets are relative to each block.
      out.result.records.push_back(std::move(copy));
    }
    if (!part.error.empty()) {
      out.result.error = part.error;
      break;
    }
  }
  out.has_bom = blocks.has_bom();
  out.num_bytes_read = blocks.num_bytes_read();
  return out;
}

TEST(CsvBlockReader, YieldsTheRecordsOfOnePassWhateverTheBlockSize) {
  // A byte-order mark, blank lines before the header, CRLF, quoted line
  // breaks and a last record without a line end.
  std::string data = "\xEF\xBB\xBF\n\r\n\nregion,note,value\r\n";
  std::mt19937_64 rng(99);
  for (int row = 0; row < 3000; ++row) {
    data += "r" + std::to_string(rng() % 50) + ",";
    data += row % 7 == 0 ? "\"a,\nb \"\"q\"\"\"" : "plain";
    data += "," + std::to_string(rng() % 1000) + (row % 3 == 0 ? "\r\n" : "\n");
    if (row % 500 == 0) data += "\n\n";
  }
  data += "last,x,1";
  const std::string path = MakeTempDir("csv_blocks") + "/data.csv";
  WriteTextFile(path, data);
  ReadResult whole = ReadAll(data);
  for (OwnedRecord& record : whole.records) record.offset = 0;
  for (int64_t block_bytes : {64, 100, 4096, 1 << 20}) {
    const BlockRead read = ReadInBlocks(path, block_bytes);
    EXPECT_EQ(read.error, "") << block_bytes;
    EXPECT_EQ(read.result.error, "") << block_bytes;
    EXPECT_EQ(read.result.records, whole.records) << block_bytes;
    EXPECT_TRUE(read.fresh == data) << block_bytes;
    EXPECT_TRUE(read.has_bom);
    EXPECT_EQ(read.num_bytes_read, static_cast<int64_t>(data.size()));
  }
}

// A small first block, each next one twice as large up to the block size:
// the same records and bytes as fixed blocks.
TEST(CsvBlockReader, GrowsFromASmallFirstBlockToTheBlockSizeWithTheSameRecords) {
  std::string data = "region,item,price\n";
  for (int row = 0; row < 2000; ++row) {
    data += "r" + std::to_string(row % 37) + ",i" + std::to_string(row % 11) + "," +
            std::to_string(row) + (row % 5 == 0 ? "\r\n" : "\n");
  }
  const std::string path = MakeTempDir("csv_block_ramp") + "/data.csv";
  WriteTextFile(path, data);
  ReadResult whole = ReadAll(data);
  for (OwnedRecord& record : whole.records) record.offset = 0;
  std::vector<size_t> sizes;
  const BlockRead read = ReadInBlocks(path, 4096, ReadLimits(), 256, &sizes);
  EXPECT_EQ(read.error, "");
  EXPECT_EQ(read.result.records, whole.records);
  EXPECT_TRUE(read.fresh == data);
  ASSERT_GE(sizes.size(), 7u);
  const std::vector<size_t> first = {256, 512, 1024, 2048, 4096, 4096};
  EXPECT_EQ(std::vector<size_t>(sizes.begin(), sizes.begin() + 6), first);
  // A first block above the block size is the block size.
  sizes.clear();
  EXPECT_EQ(ReadInBlocks(path, 4096, ReadLimits(), 1 << 20, &sizes).result.records, whole.records);
  EXPECT_EQ(sizes.front(), 4096u);
}

// A slot holds a code's length and first 8 bytes: codes sharing them, and
// codes of every short length, must still be told apart.
TEST(CodeTable, TellsApartCodesSharingTheirFirstBytesAndShortCodes) {
  const std::vector<std::string> codes = {"",          "a",         "ab",        "abc",
                                          "abcd",      "abcdefgh",  "abcdefgh1", "abcdefgh2",
                                          "abcdefgh12345678x", "abcdefgh12345678y", "ba", "b a"};
  CodeTable table;
  for (size_t k = 0; k < codes.size(); ++k) EXPECT_EQ(table.Intern(codes[k]), static_cast<int>(k));
  for (int round = 0; round < 300; ++round) table.Intern("x" + std::to_string(round));  // grows
  for (size_t k = 0; k < codes.size(); ++k) {
    EXPECT_EQ(table.Find(codes[k]), static_cast<int>(k)) << codes[k];
    EXPECT_EQ(table.Intern(codes[k]), static_cast<int>(k)) << codes[k];
    EXPECT_EQ(table.Code(static_cast<int>(k)), codes[k]);
  }
  EXPECT_EQ(table.Find("abcdefgh3"), -1);
  EXPECT_EQ(table.Find("abcdefgh12345678z"), -1);
  EXPECT_EQ(table.Find("aa"), -1);
  EXPECT_EQ(table.size(), static_cast<int>(codes.size()) + 300);
}

// The price reader parses a block while the next one is read: the text of
// the block handed out last must not move or change during that call.
TEST(CsvBlockReader, KeepsTheLastBlockIntactWhileTheNextIsRead) {
  std::string data = "region,value\n";
  for (int row = 0; row < 2000; ++row) data += "r" + std::to_string(row) + "," + std::to_string(row % 97) + "\n";
  const std::string path = MakeTempDir("csv_blocks_kept") + "/data.csv";
  WriteTextFile(path, data);
  CsvBlockReader blocks(path, 100, ReadLimits());
  std::string error;
  ASSERT_TRUE(blocks.Open(&error)) << error;
  CsvBlock last, next;
  ASSERT_TRUE(blocks.Next(&last, &error));
  std::string joined;
  int num_blocks = 1;
  for (;;) {
    const std::string copy(last.records);
    const char* const where = last.records.data();
    const bool more = blocks.Next(&next, &error);
    // The view still points where it did, at the same text.
    EXPECT_EQ(last.records.data(), where);
    EXPECT_TRUE(last.records == copy) << "block " << num_blocks;
    joined += copy;
    if (!more) break;
    last = next;
    ++num_blocks;
  }
  EXPECT_EQ(error, "");
  EXPECT_GT(num_blocks, 100);
  EXPECT_TRUE(joined == data);
}

// Only records the field scan saw to be ASCII skip the UTF-8 check.
// Records followed by at least 16 bytes are split from whole 16-byte blocks
// when plain (unquoted ASCII fields, LF end); every other kind of record in
// the same data, and the limits, must come out as byte-by-byte reading gives
// them.
TEST(CsvReader, ReadsPlainAndOtherRecordsAlikeWhenBlocksFollow) {
  const std::string padding = "pad,pad,pad,pad,pad,pad\n";
  const std::string long_field(300, 'L');
  const std::string data = "a,,c\n"                 // plain, an empty field
                           "r\xc3\xa9gion,9\n"      // not ASCII
                           "\n\n"                   // blank lines, counted
                           "cr,line\r\n"            // CRLF
                           "\"q,1\",2\n"             // quoted
                           "x," + long_field + "\n"  // longer than 256 bytes
                           "last,one,\n" + padding + padding;
  const ReadResult result = ReadAll(data);
  ASSERT_EQ(result.error, "");
  ASSERT_EQ(result.records.size(), 8u);
  const std::vector<std::vector<std::string>> fields = FieldsOf(result);
  EXPECT_EQ(fields[0], (std::vector<std::string>{"a", "", "c"}));
  EXPECT_EQ(fields[1], (std::vector<std::string>{"r\xc3\xa9gion", "9"}));
  EXPECT_EQ(fields[2], (std::vector<std::string>{"cr", "line"}));
  EXPECT_EQ(fields[3], (std::vector<std::string>{"q,1", "2"}));
  EXPECT_EQ(fields[4], (std::vector<std::string>{"x", long_field}));
  EXPECT_EQ(fields[5], (std::vector<std::string>{"last", "one", ""}));
  // Lines: the blank lines 3 and 4 are skipped.
  const std::vector<int64_t> lines = {1, 2, 5, 6, 7, 8, 9, 10};
  for (size_t k = 0; k < lines.size(); ++k) EXPECT_EQ(result.records[k].line, lines[k]) << k;
  EXPECT_EQ(result.records[2].raw, "cr,line");
  EXPECT_EQ(result.records[5].raw, "last,one,");
  EXPECT_EQ(result.records[5].offset, static_cast<int64_t>(data.find("last")));
  CsvReader reader(data);
  CsvRecord record;
  std::vector<bool> ascii;
  while (reader.Next(&record)) ascii.push_back(record.ascii);
  EXPECT_EQ(ascii, (std::vector<bool>{true, false, true, false, true, true, true, true}));
  // The limits hold for records split from blocks: the same messages as
  // for the records at the end of the data above.
  EXPECT_EQ(ReadAll("ab,abcd\nab,cdefg\n" + padding, 1, true, 0, SmallLimits(4, 100)).error,
            "2:2: a field longer than 4 bytes (limits.max_field_bytes); raise the limit if the "
            "file is right");
  EXPECT_EQ(ReadAll("abc,defghij\n" + padding, 1, true, 0, SmallLimits(5, 8)).error,
            "1: a record longer than 8 bytes (limits.max_record_bytes); raise the limit if the "
            "file is right");
  const ReadResult exact = ReadAll("abcde,ghij\nab\n" + padding, 1, true, 0, SmallLimits(100, 10));
  // 10 bytes, line end aside, are within the limit; the padding row (23) is not.
  EXPECT_EQ(exact.records.size(), 2u);
  EXPECT_EQ(exact.error,
            "3: a record longer than 10 bytes (limits.max_record_bytes); raise the limit if the "
            "file is right");
}

TEST(CsvReader, MarksRecordsSeenToBeAsciiOnly) {
  const std::string data =
      "plain,ascii,row\n"
      "z\xc3\xbcrich,ok\n"
      "a longer field that takes more than sixteen bytes,\xff\n"
      "\"quoted\",x\n";
  CsvReader reader(data);
  CsvRecord record;
  std::vector<bool> ascii;
  while (reader.Next(&record)) ascii.push_back(record.ascii);
  EXPECT_EQ(ascii, (std::vector<bool>{true, false, false, false}));
  int64_t line = 0;
  int field = 0;
  CsvReader again(data);
  for (int k = 0; k < 3; ++k) again.Next(&record);
  ASSERT_TRUE(FindInvalidUtf8(record, ',', &line, &field));
  EXPECT_EQ(line, 3);
  EXPECT_EQ(field, 2);
}

// Records beyond a limit are named by the limit crossed at the earlier
// byte, so where a block ends never changes the message.
TEST(CsvBlockReader, GivesTheSameLimitErrorWhateverTheBlockSize) {
  const ReadLimits limits = SmallLimits(40, 100);
  const std::string path = MakeTempDir("csv_blocks_limits") + "/data.csv";
  std::mt19937_64 rng(7);
  for (int trial = 0; trial < 300; ++trial) {
    std::string data;
    for (int row = 0; row < 40; ++row) {
      const int num_fields = 1 + static_cast<int>(rng() % 6);
      for (int f = 0; f < num_fields; ++f) {
        if (f > 0) data += ',';
        const size_t length = rng() % 100 < 97 ? rng() % 12 : rng() % 160;
        const bool quoted = rng() % 4 == 0;
        if (quoted) data += '"';
        for (size_t k = 0; k < length; ++k) data += quoted && k % 9 == 4 ? '\n' : 'x';
        if (quoted) data += '"';
      }
      data += '\n';
    }
    WriteTextFile(path, data);
    const std::string expected = ReadAll(data, 1, true, 0, limits).error;
    for (int64_t block_bytes : {64, 97, 256}) {
      const BlockRead read = ReadInBlocks(path, block_bytes, limits);
      const std::string found =
          !read.error.empty() ? read.error.substr(path.size() + 1) : read.result.error;
      ASSERT_EQ(found, expected) << "trial " << trial << ", block " << block_bytes;
    }
  }
}

TEST(CsvBlockReader, ReadsAFifoFedInSmallPieces) {
  const std::string path = MakeTempDir("csv_blocks_fifo") + "/prices.csv";
  std::string data = "region,price\n";
  for (int row = 0; row < 20000; ++row) data += "r" + std::to_string(row % 13) + ",\"1\n2\"\n";
  BlockRead read;
  {
    FifoWriter writer(path, data);
    read = ReadInBlocks(path, 4096);
  }
  EXPECT_EQ(read.error, "");
  ASSERT_EQ(read.result.records.size(), 20001u);
  EXPECT_EQ(read.result.records.back().line, 40000);
  EXPECT_TRUE(read.fresh == data);
}

// /dev/zero has no line end: reading stops at the limit instead of growing
// the buffer, having read at most a block and the limit.
TEST(CsvBlockReader, StopsAtTheLimitOnAFileWithoutLineEnds) {
  const BlockRead zeros = ReadInBlocks("/dev/zero", 1 << 16);
  EXPECT_EQ(zeros.error,
            "/dev/zero:1:1: a field longer than 1 MiB (limits.max_field_bytes); raise "
            "the limit if the file is right");
  EXPECT_LE(zeros.num_bytes_read, (16 << 20) + 2 * (1 << 16));
  const std::string path = MakeTempDir("csv_blocks_long") + "/prices.csv";
  WriteTextFile(path, "region,price\n" + std::string(300, ',') + "\n");
  const BlockRead commas = ReadInBlocks(path, 64, SmallLimits(10, 200));
  EXPECT_EQ(commas.error, path +
                              ":2: a record longer than 200 bytes (limits.max_record_bytes); "
                              "raise the limit if the file is right");
  EXPECT_EQ(ReadInBlocks(path, 1 << 16, SmallLimits(10, 200)).result.error,
            "2: a record longer than 200 bytes (limits.max_record_bytes); raise the limit if the "
            "file is right");
}

TEST(CsvBlockReader, ReportsAMissingFileAndAnEmptyOne) {
  const std::string dir = MakeTempDir("csv_blocks_missing");
  EXPECT_EQ(ReadInBlocks(dir + "/absent.csv", 4096).error,
            dir + "/absent.csv: cannot open file: No such file or directory");
  WriteTextFile(dir + "/blank.csv", "\n\r\n\n");
  const BlockRead blank = ReadInBlocks(dir + "/blank.csv", 64);
  EXPECT_EQ(blank.error, "");
  EXPECT_TRUE(blank.result.records.empty());
  EXPECT_EQ(blank.fresh, "\n\r\n\n");
}

TEST(WriteFileAtomically, WritesBinaryContentsThatReadBackExactly) {
  const std::string path = MakeTempDir("csv_write") + "/out.csv";
  std::string contents(3 << 20, '\0');
  for (size_t i = 0; i < contents.size(); ++i) contents[i] = static_cast<char>(i * 131 % 251);
  std::string error;
  ASSERT_TRUE(WriteFileAtomically(path, contents, &error)) << error;
  std::string read_back;
  ASSERT_TRUE(ReadWholeFile(path, 8 << 20, "", &read_back, &error)) << error;
  EXPECT_TRUE(read_back == contents);
}

TEST(WriteFileAtomically, ReplacesAnExistingFileAndLeavesNoTemporaryFile) {
  const std::string dir = MakeTempDir("csv_replace");
  const std::string path = dir + "/out.csv";
  WriteTextFile(path, "old contents that are longer\n");
  std::string error;
  ASSERT_TRUE(WriteFileAtomically(path, "new\n", &error)) << error;
  EXPECT_EQ(ReadTextFile(path), "new\n");
  std::vector<std::string> entries;
  for (const auto& entry : std::filesystem::directory_iterator(dir)) {
    entries.push_back(entry.path().filename().string());
  }
  EXPECT_EQ(entries, (std::vector<std::string>{"out.csv"}));
}

TEST(WriteFileAtomically, ReportsAMissingFolder) {
  const std::string path = MakeTempDir("csv_nofolder") + "/absent/out.csv";
  std::string error;
  EXPECT_FALSE(WriteFileAtomically(path, "x", &error));
  const std::string temp_prefix = path + ".tmp." + std::to_string(::getpid()) + ".";
  ASSERT_EQ(error.rfind(path + ": cannot create temporary file '" + temp_prefix, 0), 0u) << error;
  EXPECT_TRUE(error.ends_with("': No such file or directory")) << error;
}

// Two writes never share a temporary name, and a file already holding the
// next name is not truncated: the name is created exclusively.
TEST(WriteFileAtomically, TemporaryNamesAreUniqueAndNeverTruncateAFile) {
  const std::string dir = MakeTempDir("csv_unique_temp");
  const std::string path = dir + "/out.csv";
  const std::string prefix = path + ".tmp." + std::to_string(::getpid()) + ".";
  // Plant files under the next few names a counter could give.
  for (int k = 0; k < 50; ++k) WriteTextFile(prefix + std::to_string(k), "keep");
  std::string error;
  ASSERT_TRUE(WriteFileAtomically(path, "new\n", &error)) << error;
  EXPECT_EQ(ReadTextFile(path), "new\n");
  for (int k = 0; k < 50; ++k) EXPECT_EQ(ReadTextFile(prefix + std::to_string(k)), "keep") << k;
}

TEST(WriteFileAtomically, RemovesTheTemporaryFileWhenTheRenameFails) {
  // Renaming a file onto a folder fails even for root, unlike permissions.
  const std::string dir = MakeTempDir("csv_rename");
  const std::string path = dir + "/taken";
  std::filesystem::create_directory(path);
  std::string error;
  EXPECT_FALSE(WriteFileAtomically(path, "x", &error));
  const std::string prefix = path + ": cannot rename temporary file '" + path + ".tmp." +
                             std::to_string(::getpid()) + ".";
  ASSERT_EQ(error.rfind(prefix, 0), 0u) << error;
  ASSERT_TRUE(error.ends_with("' into place: Is a directory")) << error;
  std::vector<std::string> entries;
  for (const auto& entry : std::filesystem::directory_iterator(dir)) {
    entries.push_back(entry.path().filename().string());
  }
  EXPECT_EQ(entries, (std::vector<std::string>{"taken"}));
  EXPECT_TRUE(std::filesystem::is_directory(path));
}

// ------------------------------------------------------------ throughput

// Appends `value` in decimal with at least `num_digits` digits.
void AppendDigits(unsigned value, int num_digits, std::string* out) {
  char digits[16];
  int n = 0;
  do {
    digits[n++] = static_cast<char>('0' + value % 10);
    value /= 10;
  } while (value != 0 || n < num_digits);
  while (n > 0) out->push_back(digits[--n]);
}

TEST(CsvReader, MeasuresThroughputOnATypicalPriceFile) {
  // A figure for the README, not an assertion on time: 200 MB of short codes
  // and numbers in four columns, the shape of a price survey. CPU time is
  // printed beside wall time because a busy machine inflates the latter.
  const size_t kNumBytes = size_t{200} << 20;
  std::string data;
  data.reserve(kNumBytes + 64);
  uint64_t state = 12345;
  size_t num_rows = 0;
  while (data.size() < kNumBytes) {
    state = state * 6364136223846793005ULL + 1442695040888963407ULL;  // Knuth's MMIX LCG.
    const unsigned r = static_cast<unsigned>(state >> 33);
    data += 'R';
    AppendDigits(r % 40, 2, &data);
    data += ",I";
    AppendDigits((r >> 6) % 30000, 5, &data);
    data += ',';
    AppendDigits((r >> 3) % 500, 1, &data);
    data += '.';
    AppendDigits(r % 100, 2, &data);
    data += ',';
    AppendDigits(1 + r % 9, 1, &data);
    data += '\n';
    ++num_rows;
  }
  const std::clock_t cpu_start = std::clock();
  const auto wall_start = std::chrono::steady_clock::now();
  CsvReader reader(data);
  CsvRecord record;
  size_t num_records = 0;
  size_t num_field_bytes = 0;
  while (reader.Next(&record)) {
    ++num_records;
    for (std::string_view field : record.fields) num_field_bytes += field.size();
  }
  const double cpu_seconds = static_cast<double>(std::clock() - cpu_start) / CLOCKS_PER_SEC;
  const double wall_seconds =
      std::chrono::duration<double>(std::chrono::steady_clock::now() - wall_start).count();
  EXPECT_EQ(reader.error(), "");
  EXPECT_EQ(num_records, num_rows);
  // Each row has three commas and one LF besides its field bytes.
  EXPECT_EQ(num_field_bytes, data.size() - 4 * num_rows);
  const double num_megabytes = data.size() / 1e6;
  std::printf("read %.1f MB (%zu records): %.0f MB/s of CPU time, %.0f MB/s of wall time\n",
              num_megabytes, num_records, num_megabytes / std::max(cpu_seconds, 1e-9),
              num_megabytes / std::max(wall_seconds, 1e-9));
}

// Lengths around the 16-byte blocks and past the 255 blocks a byte lane
// counts before it is summed; all line feeds fill every lane to 255.
TEST(CountLineFeeds, MatchesAByteCountAtEveryLengthAndDensity) {
  std::mt19937 random(5);
  for (const double density : {0.0, 0.03, 0.5, 1.0}) {
    std::bernoulli_distribution is_line_feed(density);
    std::string data;
    for (size_t n = 0; n < 9000; ++n) {
      const std::string_view head(data.data(), n);
      if (n < 100 || n % 61 == 0 || (n >= 4070 && n <= 4100)) {
        EXPECT_EQ(CountLineFeeds(head), std::count(head.begin(), head.end(), '\n'))
            << "length " << n << ", density " << density;
      }
      data.push_back(is_line_feed(random) ? '\n' : static_cast<char>('a' + n % 26));
    }
    // From an odd offset, so no load is aligned.
    const std::string_view tail = std::string_view(data).substr(3);
    EXPECT_EQ(CountLineFeeds(tail), std::count(tail.begin(), tail.end(), '\n'));
  }
}

TEST(CsvReader, SplitsOnASemicolonAndKeepsQuotedSemicolonsAndCommas) {
  CsvReader reader("region;price;note\nAAR;11,77;\"a;b\"\n");
  reader.set_delimiter(';');
  CsvRecord record;
  ASSERT_TRUE(reader.Next(&record));
  ASSERT_TRUE(reader.Next(&record));
  EXPECT_EQ(record.fields, (std::vector<std::string_view>{"AAR", "11,77", "a;b"}));
  EXPECT_FALSE(reader.Next(&record));
  EXPECT_EQ(reader.error(), "");
}

TEST(CsvReader, SplitsOnATab) {
  CsvReader reader("a\tb,c\t\"d\te\"\n");
  reader.set_delimiter('\t');
  CsvRecord record;
  ASSERT_TRUE(reader.Next(&record));
  EXPECT_EQ(record.fields, (std::vector<std::string_view>{"a", "b,c", "d\te"}));
}

TEST(CsvReader, NamesTheFieldOfTextAfterAClosingQuoteBySemicolons) {
  CsvReader reader("a;\"b\"x;c\n");
  reader.set_delimiter(';');
  CsvRecord record;
  EXPECT_FALSE(reader.Next(&record));
  EXPECT_EQ(reader.error(), "1:2: unexpected text after closing quote");
}

TEST(FindInvalidUtf8InRecord, NamesTheLineAndFieldOfTheByte) {
  // The bad byte is in field 3, on the second line of a quoted field.
  CsvReader reader("x;y;z\nAAR;\"a;b\";\"first\nsec\xe9nd\"\n");
  reader.set_delimiter(';');
  CsvRecord record;
  int64_t line = 0;
  int field = 0;
  ASSERT_TRUE(reader.Next(&record));
  EXPECT_FALSE(FindInvalidUtf8(record, ';', &line, &field));
  ASSERT_TRUE(reader.Next(&record));
  ASSERT_TRUE(FindInvalidUtf8(record, ';', &line, &field));
  EXPECT_EQ(line, 3);
  EXPECT_EQ(field, 3);
}

TEST(CsvFormat, RefusesADecimalCommaWithCommaDelimitersAndUnknownCharacters) {
  std::string error;
  EXPECT_TRUE(CsvFormat().IsValid(&error)) << error;
  EXPECT_TRUE((CsvFormat{';', ','}.IsValid(&error))) << error;
  EXPECT_FALSE((CsvFormat{',', ','}.IsValid(&error)));
  EXPECT_EQ(error, "decimal ',' needs delimiter ';' or tab (a comma cannot separate both)");
  EXPECT_FALSE((CsvFormat{'|', '.'}.IsValid(&error)));
  EXPECT_EQ(error, "delimiter '|' is not one of ',', ';', tab");
}

}  // namespace
}  // namespace paritas
