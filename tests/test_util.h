// Helpers shared by the tests.
#ifndef PARITAS_TESTS_TEST_UTIL_H_
#define PARITAS_TESTS_TEST_UTIL_H_

#include <string>
#include <vector>

#include <gtest/gtest.h>

namespace paritas::testing {

// Expects |actual - expected| <= rel_tol * max(1, |expected|); treats two
// NaNs, or two infinities of one sign, as equal.
::testing::AssertionResult IsClose(double actual, double expected, double rel_tol);
#define PARITAS_EXPECT_CLOSE(actual, expected, tol) \
  EXPECT_TRUE(::paritas::testing::IsClose((actual), (expected), (tol)))

// Path of a file under tests/data.
std::string TestDataPath(const std::string& relative);
// Path of a file under the source tree.
std::string SourcePath(const std::string& relative);
// A fresh empty temporary folder for one test, removed with what it holds
// when the test process ends normally (a crash keeps it), unless
// PARITAS_KEEP_TEST_FILES is set to anything but "" or "0".
std::string MakeTempDir(const std::string& name);
// Writes `contents` to `path`, creating folders.
void WriteTextFile(const std::string& path, const std::string& contents);
// Reads a whole file; empty when missing.
std::string ReadTextFile(const std::string& path);
// Writes `contents` as the file `relative` of the run folder `dir` and
// records its size and SHA-256 in the folder's run.json, as if the run had
// written it: for tests of what a reader does with figures a run could not
// have written (a file changed after the run is refused before its rows
// are read).
void WriteRunFile(const std::string& dir, const std::string& relative, const std::string& contents);

// Runs the paritas command line with `arguments` (shell words), no standard
// input; captures stdout and stderr. Returns the exit code.
int RunCli(const std::string& arguments, std::string* out, std::string* err);

// One row of tests/data/published/six_commodity_prices_quantities.csv: the
// six-commodity, five-situation data of the ILO et al. Consumer Price Index
// Manual (2004, ch. 19, tables 19.1-19.2).
struct SixCommodityRow {
  int situation = 0;      // 1..5
  std::string commodity;  // "c1".."c6"
  std::string price_text;  // the price as the file writes it
  double price = 0.0;
  double quantity = 0.0;
};
// The file's 30 rows in file order.
std::vector<SixCommodityRow> ReadSixCommodityRows();
// Writes the rows as a survey in a fresh folder named after `name`: situation
// k is region s<k>, commodity c is heading c with one item i_c priced once,
// expenditure = price x quantity (17 digits). `classification` is the YAML
// under "classification:\n" (e.g. "  all: [c1, c2, c3, c4, c5, c6]\n").
// Returns the path of its run.yaml.
std::string WriteSixCommoditySurvey(const std::string& name, const std::string& classification);

// Non-overlapping occurrences of `needle` in `text` (needle not empty).
size_t CountOf(const std::string& text, const std::string& needle);

}  // namespace paritas::testing

#endif  // PARITAS_TESTS_TEST_UTIL_H_
