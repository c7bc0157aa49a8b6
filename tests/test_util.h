// Helpers shared by the tests.
#ifndef PARITAS_TESTS_TEST_UTIL_H_
#define PARITAS_TESTS_TEST_UTIL_H_

#include <string>

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
// A fresh empty temporary folder for one test.
std::string MakeTempDir(const std::string& name);
// Writes `contents` to `path`, creating folders.
void WriteTextFile(const std::string& path, const std::string& contents);
// Reads a whole file; empty when missing.
std::string ReadTextFile(const std::string& path);

// Runs the paritas command line with `arguments` (shell words), no standard
// input; captures stdout and stderr. Returns the exit code.
int RunCli(const std::string& arguments, std::string* out, std::string* err);

// Non-overlapping occurrences of `needle` in `text` (needle not empty).
size_t CountOf(const std::string& text, const std::string& needle);

}  // namespace paritas::testing

#endif  // PARITAS_TESTS_TEST_UTIL_H_
