// Runs each fuzz harness's property (fuzz/properties.h) over its seed corpus
// (fuzz/corpus/<harness>/) and over the inputs its fuzzer once broke
// (fuzz/regressions/<harness>/), so every ordinary build keeps them fixed.
// One test per file, named after harness, folder and file.
#include <gtest/gtest.h>

#include <algorithm>
#include <cctype>
#include <filesystem>
#include <ostream>
#include <string>
#include <vector>

#include "properties.h"
#include "test_util.h"

namespace paritas::fuzz {
namespace {

namespace fs = std::filesystem;

struct FuzzInput {
  std::string harness;
  Check check = nullptr;
  std::string path;
  std::string test_name;
};

// Files of fuzz/<kind>/<harness>/, sorted; dot files and READMEs are not inputs.
std::vector<std::string> InputFiles(const std::string& kind, const std::string& harness) {
  std::vector<std::string> paths;
  std::error_code ec;
  const fs::path dir = testing::SourcePath("fuzz/" + kind + "/" + harness);
  if (!fs::is_directory(dir, ec)) return paths;
  for (const auto& entry : fs::directory_iterator(dir, ec)) {
    const std::string name = entry.path().filename().string();
    if (!entry.is_regular_file() || name.front() == '.' || name.rfind("README", 0) == 0) continue;
    paths.push_back(entry.path().string());
  }
  std::sort(paths.begin(), paths.end());
  return paths;
}

std::vector<FuzzInput> AllInputs() {
  std::vector<FuzzInput> inputs;
  for (const Harness& harness : Harnesses()) {
    for (const char* kind : {"corpus", "regressions"}) {
      for (const std::string& path : InputFiles(kind, harness.name)) {
        // Test names allow letters, digits and '_'; the index keeps them unique.
        std::string name = std::string(harness.name) + "_" + kind + "_" +
                           std::to_string(inputs.size()) + "_" + fs::path(path).filename().string();
        for (char& c : name) {
          if (!std::isalnum(static_cast<unsigned char>(c))) c = '_';
        }
        inputs.push_back({harness.name, harness.check, path, name});
      }
    }
  }
  return inputs;
}

// Names the file when a test fails, instead of gtest's dump of the bytes.
void PrintTo(const FuzzInput& input, std::ostream* os) { *os << input.path; }

class FuzzRegression : public ::testing::TestWithParam<FuzzInput> {};

TEST_P(FuzzRegression, InputKeepsTheHarnessProperty) {
  const FuzzInput& input = GetParam();
  const std::string dir = MakeWorkDir(input.harness);
  EXPECT_EQ(input.check(testing::ReadTextFile(input.path), dir), "") << input.path;
  RemoveWorkDir(dir);
}

std::string TestName(const ::testing::TestParamInfo<FuzzInput>& param_info) {
  return param_info.param.test_name;
}

INSTANTIATE_TEST_SUITE_P(Fuzz, FuzzRegression, ::testing::ValuesIn(AllInputs()), TestName);

// A property that holds because every run fails early checks nothing: the
// deflate seed must get through to the output.
TEST(FuzzCorpus, DeflateSeedIsWrittenOut) {
  const std::string dir = MakeWorkDir("deflate");
  EXPECT_EQ(CheckDeflate(
                testing::ReadTextFile(testing::SourcePath("fuzz/corpus/deflate/wages.csv")), dir),
            "");
  EXPECT_TRUE(fs::exists(dir + "/out_small.csv"));
  RemoveWorkDir(dir);
}

TEST(FuzzCorpus, EveryHarnessHasSeeds) {
  for (const Harness& harness : Harnesses()) {
    EXPECT_FALSE(InputFiles("corpus", harness.name).empty()) << harness.name;
  }
}

}  // namespace
}  // namespace paritas::fuzz
