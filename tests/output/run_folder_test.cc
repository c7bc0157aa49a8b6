// A run folder is replaced whole and atomically; inputs are never written
// over; node file names are one to one.
#include "paritas/output/run_folder.h"

#include <gtest/gtest.h>
#include <unistd.h>

#include <filesystem>
#include <random>
#include <set>
#include <string>

#include "paritas/jobs/jobs.h"
#include "paritas/output/output_writers.h"
#include "paritas/output/run_record.h"
#include "test_util.h"

namespace paritas {
namespace {

namespace fs = std::filesystem;
using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::WriteTextFile;

bool Write(const std::string& folder, const std::vector<OutputFile>& files, std::string* error) {
  RunFolderSummary summary;
  return WriteRunFolder(folder, files, &summary, error);
}

TEST(WriteRunFolder, ReplacesTheWholeFolderSoNoFileOfTheOldRunSurvives) {
  const std::string folder = MakeTempDir("run_replace") + "/out";
  std::string error;
  ASSERT_TRUE(Write(folder, {{"run.json", "{\"run\": 1}"}, {"matrix/food.csv", "old"}, {"rejected.csv", "x"}},
                    &error))
      << error;
  ASSERT_TRUE(Write(folder, {{"run.json", "{\"run\": 2}"}, {"parities.csv", "new"}}, &error)) << error;
  EXPECT_EQ(ReadTextFile(folder + "/run.json"), "{\"run\": 2}");
  EXPECT_EQ(ReadTextFile(folder + "/parities.csv"), "new");
  EXPECT_FALSE(fs::exists(folder + "/matrix"));
  EXPECT_FALSE(fs::exists(folder + "/rejected.csv"));
  // Nothing is left beside the folder either.
  int entries = 0;
  for (const auto& entry : fs::directory_iterator(fs::path(folder).parent_path())) {
    (void)entry;
    ++entries;
  }
  EXPECT_EQ(entries, 1);
}

TEST(WriteRunFolder, RefusesAFolderThatHoldsSomethingElse) {
  const std::string folder = MakeTempDir("run_foreign");
  WriteTextFile(folder + "/thesis.tex", "keep me");
  std::string error;
  EXPECT_FALSE(Write(folder, {{"run.json", "{}"}}, &error));
  EXPECT_EQ(error, folder +
                       ": output folder exists and holds files of something else than a paritas run (no "
                       "run.json); choose a new or empty folder");
  EXPECT_EQ(ReadTextFile(folder + "/thesis.tex"), "keep me");
}

TEST(WriteRunFolder, RefusesTwoFilesOfOneNameBeforeWritingAnything) {
  const std::string folder = MakeTempDir("run_twice") + "/out";
  std::string error;
  EXPECT_FALSE(Write(folder, {{"matrix/a.csv", "1"}, {"matrix/a.csv", "2"}}, &error));
  EXPECT_EQ(error, "two outputs of this run would share the file 'matrix/a.csv'");
  EXPECT_FALSE(fs::exists(folder));
  EXPECT_FALSE(Write(folder, {{"../escape.csv", "1"}}, &error));
  EXPECT_EQ(error, "output file name '../escape.csv' is not a plain path inside the output folder");
}

TEST(RemoveRunLeftovers, RemovesStagingOfDeadRunsAndKeepsLiveOnes) {
  const std::string parent = MakeTempDir("run_leftovers");
  const std::string folder = parent + "/out";
  // A pid far above any the kernel hands out is a run that no longer exists.
  fs::create_directories(parent + "/.out.paritas-staging-999999999-dead/matrix");
  const std::string live = parent + "/.out.paritas-staging-" + std::to_string(::getppid()) + "-live";
  fs::create_directories(live);
  EXPECT_EQ(RemoveRunLeftovers(folder), 1);
  EXPECT_FALSE(fs::exists(parent + "/.out.paritas-staging-999999999-dead"));
  EXPECT_TRUE(fs::exists(live));
}

TEST(PathGuard, RefusesAnOutputThatIsAnInputUnderAnotherSpelling) {
  const std::string folder = MakeTempDir("guard_spelling");
  WriteTextFile(folder + "/incomes.csv", "region,wage\n");
  fs::create_hard_link(folder + "/incomes.csv", folder + "/hard.csv");
  fs::create_symlink(folder + "/incomes.csv", folder + "/soft.csv");
  for (const std::string& out : {folder + "/./incomes.csv", folder + "/hard.csv", folder + "/soft.csv",
                                 folder + "/../" + fs::path(folder).filename().string() + "/incomes.csv"}) {
    PathGuard guard;
    guard.AddInput(folder + "/incomes.csv", "input");
    guard.AddOutputFile(out, "--rejected");
    std::string error;
    EXPECT_FALSE(guard.Check(&error)) << out;
    EXPECT_EQ(error, "--rejected '" + out + "' is the input '" + folder +
                         "/incomes.csv': an input is never overwritten; choose another file");
  }
}

TEST(PathGuard, RefusesTwoOutputsThatAreOneFile) {
  const std::string folder = MakeTempDir("guard_outputs");
  PathGuard guard;
  guard.AddOutputFile(folder + "/real.csv", "--output");
  guard.AddOutputFile(folder + "/./real.csv", "--rejected");
  std::string error;
  EXPECT_FALSE(guard.Check(&error));
  EXPECT_EQ(error, "--rejected '" + folder + "/./real.csv' and --output '" + folder +
                       "/real.csv' are the same file; give them different names");
}

TEST(PathGuard, RefusesAnOutputFolderHoldingAnInput) {
  const std::string folder = MakeTempDir("guard_folder");
  WriteTextFile(folder + "/data/prices.csv", "x\n");
  PathGuard guard;
  guard.AddInput(folder + "/data/prices.csv", "prices file");
  guard.AddOutputFolder(folder + "/data/", "output folder");
  std::string error;
  EXPECT_FALSE(guard.Check(&error));
  EXPECT_EQ(error, "output folder '" + folder + "/data/' holds the prices file '" + folder +
                       "/data/prices.csv'; the output folder is replaced whole, so it must not hold inputs: "
                       "choose another folder");
  PathGuard apart;
  apart.AddInput(folder + "/data/prices.csv", "prices file");
  apart.AddOutputFolder(folder + "/dat", "output folder");  // a prefix of the name, not a parent
  EXPECT_TRUE(apart.Check(&error)) << error;
}

TEST(NodeFileName, KeepsPlainCodesAndEscapesEverythingElse) {
  EXPECT_EQ(NodeFileName("food_2"), "food_2");
  EXPECT_EQ(NodeFileName("food-bev.v2"), "food-bev.v2");
  EXPECT_EQ(NodeFileName("h 1"), "h%201");
  EXPECT_EQ(NodeFileName("a/b"), "a%2Fb");
  EXPECT_EQ(NodeFileName(".."), "%2E.");
  EXPECT_EQ(NodeFileName("%"), "%25");
  EXPECT_EQ(NodeFileName(""), "%");
  // The collision that was seen: a code spelled like another's escaped name.
  EXPECT_NE(NodeFileName("h 1"), NodeFileName("h_1-b8c94446"));
  EXPECT_NE(NodeFileName("h 1"), NodeFileName("h%201"));
}

TEST(NodeFileName, GivesDistinctCodesDistinctSafeNames) {
  // Property test over adversarial codes: escapes, separators, dots, long
  // codes, bytes >= 0x80, and codes spelled like escaped names.
  const std::string alphabet = "aA0_-.%~ /\\:\x01\x7f\xc3\xa9";
  std::mt19937_64 random(20261202);
  std::set<std::string> codes;
  for (int k = 0; k < 20000; ++k) {
    const size_t length = random() % 8 == 0 ? 150 + random() % 120 : random() % 9;
    std::string code;
    for (size_t i = 0; i < length; ++i) code += alphabet[random() % alphabet.size()];
    if (random() % 4 == 0) code = NodeFileName(code);  // a code that looks like a file name
    codes.insert(code);
  }
  std::set<std::string> names;
  for (const std::string& code : codes) {
    const std::string name = NodeFileName(code);
    EXPECT_TRUE(names.insert(name).second) << "two codes share '" << name << "'";
    EXPECT_FALSE(name.empty());
    EXPECT_LE(name.size(), kMaxNodeFileNameBytes);
    EXPECT_NE(name.front(), '.');
    EXPECT_EQ(name.find('/'), std::string::npos);
    for (unsigned char c : name) EXPECT_TRUE(c >= 0x21 && c < 0x7f) << name;
  }
}

TEST(RunRecordJson, WritesTextThatIsNotUtf8AsEscapesInsteadOfThrowing) {
  // nlohmann::json throws on invalid UTF-8; a Latin-1 file name on the
  // command line once aborted compute with exit code 134.
  RunConfig config;
  config.config_path = "/data/r\xe9gions/run.yaml";
  config.survey.prices = {PriceSource{"/data/r\xe9gions/prices.csv", CsvFormat(), {}}};
  RunRecord record;
  record.command = "check";
  record.config = &config;
  record.message = "ok";
  record.warnings = {"a warning quoting caf\xe9"};
  std::string json;
  ASSERT_NO_THROW(json = RunRecordJson(record));
  EXPECT_NE(json.find("\"config_path\": \"/data/r\\\\xe9gions/run.yaml\""), std::string::npos)
      << json;
  EXPECT_NE(json.find("\"a warning quoting caf\\\\xe9\""), std::string::npos) << json;
}

// The Python module's way of running compute: the files come back in the
// summary, the same bytes the command line writes, and nothing is written.
TEST(RunCompute, WithoutWritingHandsBackTheFilesItWouldWrite) {
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(std::string(PARITAS_SOURCE_DIR) + "/config/demo.yaml", &config, &error))
      << error;
  config.report = false;
  config.output = MakeTempDir("compute_not_written") + "/out";
  ComputeJobSummary kept;
  JobOutputOptions output;
  output.write_files = false;
  ASSERT_EQ(RunCompute(config, &kept, output), kExitOk) << kept.message;
  EXPECT_FALSE(fs::exists(config.output));
  ComputeJobSummary written;
  ASSERT_EQ(RunCompute(config, &written), kExitOk) << written.message;
  ASSERT_EQ(kept.files.size(), written.files.size());
  EXPECT_EQ(kept.files.back().relative_path, "run.json");
  for (size_t i = 0; i + 1 < kept.files.size(); ++i) {  // run.json differs by its run id
    EXPECT_EQ(kept.files[i].relative_path, written.files[i].relative_path);
    EXPECT_EQ(kept.files[i].contents, ReadTextFile(config.output + "/" + kept.files[i].relative_path))
        << kept.files[i].relative_path;
  }
}

}  // namespace
}  // namespace paritas
