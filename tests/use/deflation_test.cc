// Deflation through the library: the published BEA worked example, byte-exact
// preservation of the input, block-size independence, and the accounting of
// bad rows under both policies.
#include "paritas/use/deflation.h"

#include <gtest/gtest.h>

#include <filesystem>
#include <string>

#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::ReadTextFile;
using ::paritas::testing::WriteTextFile;

// A compute output folder with two nodes over regions a, b, c; c has no
// parity for `food`.
std::string WriteParities(const std::string& dir) {
  WriteTextFile(dir + "/parities/parities.csv",
                "node,kind,region,parity,expenditure\n"
                "all,aggregate,a,120.000000,1\n"
                "all,aggregate,b,90.000000,1\n"
                "all,aggregate,c,100.000000,1\n"
                "food,aggregate,a,110.000000,1\n"
                "food,aggregate,b,80.000000,1\n"
                "food,aggregate,c,,1\n");
  return dir + "/parities";
}

DeflateOptions Options(const std::string& dir, const std::string& input_text) {
  DeflateOptions options;
  options.parities_dir = WriteParities(dir);
  options.input_path = dir + "/in.csv";
  options.output_path = dir + "/out.csv";
  options.value_columns = {"income"};
  WriteTextFile(options.input_path, input_text);
  return options;
}

TEST(DeflateOptions, FilledInDefaultsAreValid) {
  DeflateOptions options;
  std::string error;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "no parities folder given (the output folder of compute)");
  options.parities_dir = "p";
  options.input_path = "in.csv";
  options.output_path = "out.csv";
  options.value_columns = {"wage"};
  EXPECT_TRUE(options.IsValid(&error)) << error;
  EXPECT_EQ(options.RejectedPathUsed(), "out_rejected.csv");
  options.node = "food";
  options.node_column = "node";
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "give either a node for all rows or a node column, not both");
  options.node.clear();
  options.value_columns = {"wage", "wage"};
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "value column 'wage' is given twice or is also the region or node column");
  options.value_columns = {"wage"};
  options.output_path = "in.csv";
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error,
            "output file 'in.csv' is the input file 'in.csv': an input is never overwritten; choose another file");
}

// US Bureau of Economic Analysis, "Regional Price Parities" technical note:
// with parities 120 and 90, incomes of 12,000 and 9,000 are both 10,000 in
// national-average prices.
TEST(Deflate, ReproducesTheBeaWorkedExample) {
  const std::string dir = MakeTempDir("deflate_bea");
  DeflateOptions options = Options(dir, "person,region,income\n1,a,12000\n2,b,9000\n");
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(ReadTextFile(options.output_path),
            "person,region,income,income_real\n1,a,12000,10000\n2,b,9000,10000\n");
  EXPECT_EQ(summary.num_rows_read, 2);
  EXPECT_EQ(summary.num_rows_written, 2);
  EXPECT_EQ(summary.num_rows_rejected, 0);
  EXPECT_EQ(summary.node_used, "all");
  const std::string brief = summary.BriefReport();
  EXPECT_EQ(brief.substr(0, brief.find('(')),
            "deflated 2 rows of " + options.input_path + " by node 'all': 2 written, 0 rejected ");
}

TEST(Deflate, KeepsEveryByteOfTheOriginalColumns) {
  const std::string dir = MakeTempDir("deflate_bytes");
  // BOM, CRLF line ends, quoted fields with commas, doubled quotes and a line
  // break, spaces around the region code, no final line end.
  const std::string input =
      "\xEF\xBB\xBF"
      "id,\"note, free\",region,income\r\n"
      "1,\"says \"\"hi\"\", twice\", a ,12000\r\n"
      "2,\"two\nlines\",b,\"9000\"\r\n"
      "3,plain,c,50";
  DeflateOptions options = Options(dir, input);
  options.include_parity = true;
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(ReadTextFile(options.output_path),
            "\xEF\xBB\xBF"
            "id,\"note, free\",region,income,income_real,parity\r\n"
            "1,\"says \"\"hi\"\", twice\", a ,12000,10000,120\r\n"
            "2,\"two\nlines\",b,\"9000\",10000,90\r\n"
            "3,plain,c,50,50,100\r\n");
  EXPECT_EQ(summary.num_rows_written, 3);
}

TEST(Deflate, GivesTheSameOutputWhateverTheBlockSize) {
  const std::string dir = MakeTempDir("deflate_blocks");
  std::string input = "id,region,income,comment\n";
  for (int i = 0; i < 2000; ++i) {
    input += std::to_string(i) + "," +
             (i % 3 == 0   ? "a"
              : i % 3 == 1 ? "b"
                           : "c") +
             "," + std::to_string(1000 + i * 7) + ".5," +
             (i % 5 == 0 ? "\"multi\nline, quoted\"" : "x") + "\n";
  }
  DeflateOptions options = Options(dir, input);
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  const std::string whole = ReadTextFile(options.output_path);
  // 1 KiB blocks cut many records, quoted line breaks included, in two.
  options.block_bytes = 1024;
  options.output_path = dir + "/small_blocks.csv";
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(ReadTextFile(options.output_path), whole);
  EXPECT_EQ(summary.num_rows_read, 2000);
  EXPECT_EQ(summary.num_bytes_read, static_cast<int64_t>(input.size()));
}

// A blank first line used to end the header search early: the block then
// held no whole record and the file was called empty.
TEST(Deflate, ReadsAHeaderLongerThanABlockAfterABlankLine) {
  const std::string dir = MakeTempDir("deflate_blank_long_header");
  std::string header = "region,income";
  for (int c = 0; c < 200; ++c) header += ",column" + std::to_string(c);
  const std::string commas(200, ',');
  DeflateOptions options = Options(dir, "\n" + header + "\na,120" + commas + "\n");
  options.block_bytes = 1024;  // The header is about 2.5 KiB.
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(ReadTextFile(options.output_path),
            header + ",income_real\na,120" + commas + ",100\n");
}

TEST(Deflate, SkipsBadRowsAndListsThemInRejectedCsv) {
  const std::string dir = MakeTempDir("deflate_skip");
  DeflateOptions options = Options(dir,
                                   "id,region,income\n"
                                   "1,a,12000\n"
                                   "2,zz,100\n"
                                   "3,b,\n"
                                   "4,b,abc\n"
                                   "5,b,-5\n"
                                   "6,b\n"
                                   "7,,100\n"
                                   "8,b,9000\n");
  options.invalid_rows = InvalidRowPolicy::kSkip;
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(summary.num_rows_read, 8);
  EXPECT_EQ(summary.num_rows_written, 2);
  EXPECT_EQ(summary.num_rows_rejected, 6);
  EXPECT_EQ(summary.num_rows_read, summary.num_rows_written + summary.num_rows_rejected);
  EXPECT_EQ(ReadTextFile(options.output_path),
            "id,region,income,income_real\n1,a,12000,10000\n8,b,9000,10000\n");
  const std::string in = options.input_path;
  const std::string parities = options.parities_dir + "/parities.csv";
  EXPECT_EQ(summary.rejected_path, dir + "/out_rejected.csv");
  // One row per rejected row; a reason holding a comma is quoted.
  EXPECT_EQ(
      ReadTextFile(summary.rejected_path),
      "file,line,reason,raw\n" + in + ",3," + in + ":3:2: region 'zz' is not a region of " +
          parities + "; did you mean 'a'?,\"2,zz,100\"\n" + in + ",4," + in +
          ":4:3: income is empty,\"3,b,\"\n" + in + ",5," + in +
          ":5:3: income 'abc' is not a number,\"4,b,abc\"\n" + in + ",6," + in +
          ":6:3: income '-5' is negative (negative values need --allow-negative),\"5,b,-5\"\n" +
          in + ",7,\"" + in + ":7:3: row has 2 fields, the header has 3\",\"6,b\"\n" + in + ",8," +
          in + ":8:2: region is empty,\"7,,100\"\n");
  ASSERT_EQ(summary.rejected_rows.size(), 6u);
  EXPECT_EQ(summary.rejected_rows[0].raw, "2,zz,100");
}

TEST(Deflate, StopsOnBadRowsWithoutTouchingTheOutput) {
  const std::string dir = MakeTempDir("deflate_stop");
  DeflateOptions options = Options(dir, "id,region,income\n1,a,12000\n2,ab,1\n3,b,x\n");
  WriteTextFile(options.output_path, "old contents\n");
  DeflateSummary summary;
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.outcome, DeflateOutcome::kInvalidInput);
  EXPECT_EQ(summary.message,
            "2 invalid rows in " + options.input_path +
                "; nothing written; fix them, or pass --invalid-rows skip to leave "
                "them out");
  ASSERT_EQ(summary.rejected_rows.size(), 2u);
  EXPECT_EQ(summary.rejected_rows[0].reason,
            options.input_path + ":3:2: region 'ab' is not a region of " + options.parities_dir +
                "/parities.csv; did you mean 'a'?");
  EXPECT_EQ(summary.num_rows_read, 3);
  EXPECT_EQ(summary.num_rows_written, 0);
  EXPECT_EQ(ReadTextFile(options.output_path), "old contents\n");
  // No temporary file is left behind.
  int num_files = 0;
  for (const auto& entry : std::filesystem::directory_iterator(dir))
    num_files += entry.is_regular_file();
  EXPECT_EQ(num_files, 2);
}

TEST(Deflate, RejectsARegionWithoutParityAtTheNodeAsked) {
  const std::string dir = MakeTempDir("deflate_node");
  DeflateOptions options = Options(dir, "region,income\na,110\nc,5\n");
  options.node = "food";
  DeflateSummary summary;
  EXPECT_FALSE(Deflate(options, &summary));
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(summary.rejected_rows[0].reason,
            options.input_path + ":3:1: region 'c' has no parity for node 'food' in " +
                options.parities_dir + "/parities.csv");
  options.node = "fod";
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message,
            "node 'fod' is not in " + options.parities_dir + "/parities.csv; did you mean 'food'?");
}

TEST(Deflate, TakesTheNodeOfEachRowFromANodeColumn) {
  const std::string dir = MakeTempDir("deflate_node_column");
  DeflateOptions options =
      Options(dir, "region,income,basket\na,110,food\na,120,all\nb,8,food\nb,9,\n");
  options.node_column = "basket";
  options.invalid_rows = InvalidRowPolicy::kSkip;
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(ReadTextFile(options.output_path),
            "region,income,basket,income_real\na,110,food,99.99999999999999\na,120,all,100\nb,8,food,"
            "10\n");
  EXPECT_EQ(summary.node_used, "");
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(summary.rejected_rows[0].reason, options.input_path + ":5:3: basket is empty");
}

TEST(Deflate, AcceptsNegativeValuesWhenAllowed) {
  const std::string dir = MakeTempDir("deflate_negative");
  DeflateOptions options = Options(dir, "region,income\na,-1200\n");
  options.allow_negative = true;
  options.decimals = 1;
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(ReadTextFile(options.output_path), "region,income,income_real\na,-1200,-1000.0\n");
}

// 1.7e308 at parity 90 is 1.9e308 in reference prices, beyond the largest
// double (about 1.797e308, IEEE 754): it used to be written as "inf". The
// real values written are Python's float division of the same numbers.
TEST(Deflate, RejectsAValueWhoseRealValueOverflows) {
  const std::string dir = MakeTempDir("deflate_overflow");
  DeflateOptions options = Options(dir, "region,income\na,1.7e308\nb,1.7e308\nb,1e308\n");
  options.invalid_rows = InvalidRowPolicy::kSkip;
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(summary.num_rows_written, 2);
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(summary.rejected_rows[0].reason,
            options.input_path +
                ":3:2: income '1.7e308' in reference prices (at parity 90) is beyond the largest "
                "number a double holds (about 1.8e308)");
  EXPECT_EQ(ReadTextFile(options.output_path),
            "region,income,income_real\na,1.7e308,1.4166666666666667e+308\nb,1e308,"
            "1.1111111111111112e+308\n");
}

TEST(Deflate, AddsRealValuesAtTheBoundsOfTheParityInterval) {
  const std::string dir = MakeTempDir("deflate_interval");
  DeflateOptions options = Options(dir, "region,income,other\na,12000,3\nb,9000,-1\n");
  options.value_columns = {"income", "other"};
  options.include_interval = true;
  options.allow_negative = true;
  DeflateSummary summary;
  EXPECT_FALSE(Deflate(options, &summary));
  // The command named writes into the parities folder: sensitivity writes
  // under its --output, which need not be the configuration's.
  EXPECT_EQ(summary.message,
            "no parity intervals: " + options.parities_dir +
                "/sensitivity/bootstrap.csv does not exist; run 'paritas sensitivity CONFIG "
                "--output " +
                options.parities_dir + "' with the configuration and options of the compute run");
  WriteTextFile(options.parities_dir + "/sensitivity/bootstrap.csv",
                "node,region,parity,median,lower,upper\n"
                "all,a,120,120,100,150\n"
                "all,b,90,90,,\n");
  // Without run records nobody can tell whether the two runs belong together.
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message, "cannot tell whether the intervals belong to these parities: " +
                                 options.parities_dir + "/run.json: cannot open file: No such file or directory");
  // Records of another reference: refused, naming the difference.
  const std::string record = R"({"tool": {"name": "paritas"}, "configuration": {"reference": "mean",
                                 "config_path": "/surveys/run.yaml"},
                                 "inputs": [{"role": "prices", "sha256": "ab"}]})";
  WriteTextFile(options.parities_dir + "/run.json", record);
  std::string other = record;
  other.replace(other.find("mean"), 4, "cap");
  WriteTextFile(options.parities_dir + "/sensitivity/run.json", other);
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message,
            "the intervals in " + options.parities_dir +
                "/sensitivity come from a sensitivity run on other inputs or settings than "
                "the parities in " +
                options.parities_dir +
                " (\"this run\" = the parities): reference: mean in this run, cap in the "
                "other; run 'paritas sensitivity /surveys/run.yaml --output " +
                options.parities_dir + "' with the configuration and options of the compute run");
  WriteTextFile(options.parities_dir + "/sensitivity/run.json", record);
  options.decimals = 4;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  // real_lower = value / (upper / 100), real_upper = value / (lower / 100);
  // for a negative value the bounds swap so that lower <= upper.
  EXPECT_EQ(ReadTextFile(options.output_path),
            "region,income,other,income_real,other_real,income_real_lower,income_real_upper,"
            "other_real_lower,other_real_upper\n"
            "a,12000,3,10000.0000,2.5000,8000.0000,12000.0000,2.0000,3.0000\n"
            "b,9000,-1,10000.0000,-1.1111,,,,\n");
  // One bound alone gave a real interval without the real value in it
  // (min and max of a number and NaN return the first); a reversed pair is
  // not sensitivity's either. Both are refused, located.
  const std::string bootstrap = options.parities_dir + "/sensitivity/bootstrap.csv";
  const std::pair<std::string, std::string> cases[] = {
      {"all,b,90,90,,95\n", ":3:5: one bound of the interval is empty (lower '', upper '95')"},
      {"all,b,90,90,80,\n", ":3:5: one bound of the interval is empty (lower '80', upper '')"},
      {"all,b,90,90,95,85\n", ":3:5: lower '95' is above upper '85'"},
  };
  for (const auto& [row, message] : cases) {
    WriteTextFile(bootstrap, "node,region,parity,median,lower,upper\nall,a,120,120,100,150\n" + row);
    EXPECT_FALSE(Deflate(options, &summary)) << row;
    EXPECT_EQ(summary.message, bootstrap + message + "; is the file as sensitivity wrote it?");
  }
}

// 100,000 node/region pairs with distinct nodes and regions: a dense
// node x region table needs 10^10 cells (80 GB) and aborted with bad_alloc.
TEST(Deflate, ReadsAParitiesFileOfAHundredThousandDistinctPairs) {
  const std::string dir = MakeTempDir("deflate_sparse_parities");
  std::string parities = "node,kind,region,parity\n";
  for (int i = 0; i < 100000; ++i) {
    parities += "n" + std::to_string(i) + ",aggregate,r" + std::to_string(i) + "," +
                std::to_string(50 + i % 100) + "\n";
  }
  DeflateOptions options = Options(dir, "node,region,income\nn7,r7,570\nn99999,r99999,1490\n");
  WriteTextFile(options.parities_dir + "/parities.csv", parities);
  options.node_column = "node";
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(ReadTextFile(options.output_path),
            "node,region,income,income_real\nn7,r7,570,1000.0000000000001\nn99999,r99999,1490,1000\n");
  // A pair the file does not hold has no parity.
  WriteTextFile(options.input_path, "node,region,income\nn7,r8,1\n");
  EXPECT_FALSE(Deflate(options, &summary));
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(summary.rejected_rows[0].reason,
            options.input_path + ":2:2: region 'r8' has no parity for node 'n7' in " +
                options.parities_dir + "/parities.csv");
}

TEST(Deflate, RefusesDuplicatedAndMalformedRowsOfParitiesCsv) {
  const std::string dir = MakeTempDir("deflate_bad_parities");
  DeflateOptions options = Options(dir, "region,income\na,1\n");
  const std::string parities = options.parities_dir + "/parities.csv";
  WriteTextFile(parities, "node,kind,region,parity\nall,aggregate,a,100\nall,aggregate, a ,90\n");
  DeflateSummary summary;
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message,
            parities + ":3:1: duplicate row for node 'all' and region 'a' (first at line 2)");
  WriteTextFile(parities, "node,kind,region,parity\nall,aggregate,a\n");
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message, parities + ":2:4: row has 3 fields, the header has 4");
  // Beyond what compute can write from inputs within 1e-30 to 1e30 (a
  // parity of 1e-310 made every row's real value overflow).
  WriteTextFile(parities, "node,kind,region,parity\nall,aggregate,a,1e-310\n");
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message,
            parities +
                ":2:4: parity '1e-310' is positive but nearer 0 than 1e-200, where ratios between "
                "regions and their products overflow or lose digits; compute writes none beyond it; "
                "is the file as it wrote it?");
  // A code written with doubled quotes is read like any other.
  WriteTextFile(parities, "node,kind,region,parity\n\"a\"\"ll\",aggregate,a,50\n");
  WriteTextFile(options.input_path, "region,income\na,1\n");
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(summary.node_used, "a\"ll");
}

// Devices and pipes report no size: the input stops at the record limit,
// parities.csv at the file limit.
TEST(Deflate, ReadsInputAndParitiesUnderTheLimits) {
  const std::string dir = MakeTempDir("deflate_limits");
  DeflateOptions options = Options(dir, "region,income\na,1\n");
  options.input_path = "/dev/zero";
  DeflateSummary summary;
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message,
            "/dev/zero:1:1: a field longer than 1 MiB (limits.max_field_bytes); "
            "raise the limit if the file is right");
  EXPECT_LE(summary.num_bytes_read, (16 << 20) + (8 << 20));
  options.input_path = dir + "/in.csv";
  options.limits.max_file_bytes = 100;
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message, options.parities_dir +
                                 "/parities.csv: file larger than 100 bytes "
                                 "(limits.max_file_bytes); raise the limit if "
                                 "the file is right");
  options.limits = ReadLimits();
  options.limits.max_record_bytes = 40;  // parities.csv has rows of up to 35 bytes.
  WriteTextFile(options.input_path,
                "region,income,note\na,120,short\nb,90," + std::string(50, 'x') + "\n");
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message, options.input_path +
                                 ":3: a record longer than 40 bytes "
                                 "(limits.max_record_bytes); raise the limit if "
                                 "the file is right");
  EXPECT_FALSE(std::filesystem::exists(options.output_path));
  options.limits.max_record_bytes = 0;
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message, "limits.max_record_bytes must be from 1 byte to 1 TiB, found 0");
}

TEST(Deflate, ExplainsHeaderProblems) {
  const std::string dir = MakeTempDir("deflate_header");
  DeflateOptions options = Options(dir, "region,incme\na,1\n");
  DeflateSummary summary;
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message,
            options.input_path +
                ":1: missing column 'income' (found: region, incme); did you mean 'incme'?");
  WriteTextFile(options.input_path, "region,income,income_real\na,1,2\n");
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message,
            options.input_path +
                ":1: column 'income_real' already exists; rename it or choose other value "
                "columns");
  std::string many = "region";
  for (int c = 0; c < 100000; ++c) many += ",c" + std::to_string(c);
  WriteTextFile(options.input_path, many + "\n");
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message, options.input_path +
                                 ":1: missing column 'income' (found: region, c0, c1, c2, c3, c4, "
                                 "c5, c6, c7, c8, c9, c10, c11, c12, c13, c14, c15, c16, c17, c18, "
                                 "... (100001 columns))");
  WriteTextFile(options.input_path, "");
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(
      summary.message,
      options.input_path + ": file is empty (expected a header row with columns region, income)");
  WriteTextFile(options.input_path, "region,income\na,\"1\n");
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message, options.input_path + ":2:2: unterminated quoted field (opened here)");
  EXPECT_FALSE(std::filesystem::exists(options.output_path));
}

TEST(Deflate, RejectsLatin1CodesAndHeadersButCopiesOtherColumnsAsTheyAre) {
  const std::string dir = MakeTempDir("deflate_latin1");
  // Row 2's name is Latin-1 but deflate does not read it; row 3's region is.
  DeflateOptions options = Options(dir, "name,region,income\nJos\xe9,a,12000\nAnn,\xe4,100\n");
  options.invalid_rows = InvalidRowPolicy::kSkip;
  DeflateSummary summary;
  ASSERT_TRUE(Deflate(options, &summary)) << summary.message;
  EXPECT_EQ(ReadTextFile(options.output_path),
            "name,region,income,income_real\nJos\xe9,a,12000,10000\n");
  ASSERT_EQ(summary.rejected_rows.size(), 1u);
  EXPECT_EQ(summary.rejected_rows[0].reason,
            options.input_path +
                ":3:2: region '\\xe4' is not valid UTF-8 (the file may be "
                "Latin-1 or Windows-1252: save it as UTF-8)");
  WriteTextFile(options.input_path, "name,r\xe9gion,region,income\na,b,a,1\n");
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message, options.input_path +
                                 ":1:2: column name 'r\\xe9gion' is not valid UTF-8 (the file "
                                 "may be Latin-1 or Windows-1252: save it as UTF-8)");
}

// A second byte-order mark (a file joined from two saved ones) would stay in
// the first column's name, match no column and not read back the same once
// the output opens with it: the header is refused where the mark is.
TEST(Deflate, RefusesAColumnNameThatStartsWithASecondByteOrderMark) {
  const std::string dir = MakeTempDir("deflate_two_marks");
  DeflateOptions options =
      Options(dir, "\xEF\xBB\xBF\xEF\xBB\xBFid,region,income\n1,a,12000\n");
  DeflateSummary summary;
  EXPECT_FALSE(Deflate(options, &summary));
  EXPECT_EQ(summary.message,
            options.input_path +
                ":1:1: column name '<U+FEFF>id' starts with a byte-order mark (U+FEFF); a mark "
                "may only open the file, once (save the file as UTF-8 with at most one mark)");
  EXPECT_FALSE(std::filesystem::exists(options.output_path));
}

}  // namespace
}  // namespace paritas
