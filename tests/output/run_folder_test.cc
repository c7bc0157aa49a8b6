// A run folder is replaced whole and atomically; inputs are never written
// over; node file names are one to one.
#include "paritas/output/run_folder.h"

#include <gtest/gtest.h>
#include <omp.h>
#include <unistd.h>

#include <atomic>
#include <chrono>
#include <filesystem>
#include <mutex>
#include <random>
#include <set>
#include <string>
#include <thread>

#include "paritas/jobs/jobs.h"
#include "paritas/output/output_writers.h"
#include "paritas/output/run_record.h"
#include "base/sha256.h"
#include "output/format_rows.h"
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

// Entries of `folder`'s parent (the folder itself and anything beside it).
int EntriesBeside(const std::string& folder) {
  int entries = 0;
  for (const auto& entry : fs::directory_iterator(fs::path(folder).parent_path())) {
    (void)entry;
    ++entries;
  }
  return entries;
}

TEST(RunFolderWriter, WritesTheBlocksOfEachFileInOrderWithTheirDigests) {
  const std::string folder = MakeTempDir("writer_blocks") + "/out";
  std::string error;
  RunFolderWriter writer;
  ASSERT_TRUE(writer.Open(folder, /*digest=*/true, &error)) << error;
  const std::string kept = "kept by the caller\n";
  std::string big;
  ASSERT_TRUE(writer.BeginFile("parities.csv", &error)) << error;
  for (int k = 0; k < 300; ++k) {
    std::string block = "row " + std::to_string(k) + std::string(10000, 'x') + "\n";
    big += block;
    writer.Append(std::move(block));
  }
  ASSERT_TRUE(writer.BeginFile("matrix/food.csv", &error)) << error;
  writer.AppendUnowned(kept);
  ASSERT_TRUE(writer.BeginFile("empty.csv", &error)) << error;
  std::vector<OutputDigest> digests;
  ASSERT_TRUE(writer.Finish(&digests, &error)) << error;
  ASSERT_EQ(digests.size(), 3u);
  EXPECT_EQ(digests[0].path, "parities.csv");
  EXPECT_EQ(digests[0].bytes, static_cast<int64_t>(big.size()));
  EXPECT_EQ(digests[0].sha256, internal::Sha256Hex(big));
  EXPECT_EQ(digests[1].path, "matrix/food.csv");
  EXPECT_EQ(digests[1].sha256, internal::Sha256Hex(kept));
  EXPECT_EQ(digests[2].bytes, 0);
  EXPECT_EQ(digests[2].sha256, internal::Sha256Hex(""));
  EXPECT_FALSE(fs::exists(folder));  // nothing in place before Commit
  RunFolderSummary summary;
  const OutputFile record{"run.json", "{}"};
  ASSERT_TRUE(writer.Commit(&record, &summary, &error)) << error;
  EXPECT_EQ(ReadTextFile(folder + "/parities.csv"), big);
  EXPECT_EQ(ReadTextFile(folder + "/matrix/food.csv"), kept);
  EXPECT_EQ(ReadTextFile(folder + "/empty.csv"), "");
  EXPECT_EQ(ReadTextFile(folder + "/run.json"), "{}");
  EXPECT_EQ(summary.num_files, 4);
  EXPECT_EQ(summary.num_bytes, static_cast<int64_t>(big.size() + kept.size() + 2));
  EXPECT_EQ(EntriesBeside(folder), 1);
}

// A block reserved for more rows than it got holds its whole reserve until
// written, so the queue's bound counts that (a table's blocks once reserved
// 100 times what they held, and the queue let a thousand of them wait).
TEST(RunFolderWriter, BoundsTheMemoryItsBlocksReservedNotJustTheirText) {
  const std::string folder = MakeTempDir("writer_reserved") + "/out";
  std::string error;
  constexpr size_t kReserve = size_t{24} << 20;
  RunFolderWriter writer;
  ASSERT_TRUE(writer.Open(folder, /*digest=*/true, &error)) << error;
  ASSERT_TRUE(writer.BeginFile("parities.csv", &error)) << error;
  for (int k = 0; k < 12; ++k) {
    std::string block = "y";
    block.reserve(kReserve);  // address space only: the pages are never touched
    writer.Append(std::move(block));
  }
  ASSERT_TRUE(writer.Finish(nullptr, &error)) << error;
  EXPECT_GE(writer.PeakQueuedBytes(), kReserve);
  EXPECT_LE(writer.PeakQueuedBytes(), RunFolderWriter::kMaxQueuedBytes + kReserve + 64);
  RunFolderSummary summary;
  ASSERT_TRUE(writer.Commit(nullptr, &summary, &error)) << error;
  EXPECT_EQ(ReadTextFile(folder + "/parities.csv"), std::string(12, 'y'));
}

TEST(RunFolderWriter, LeavesThePreviousRunWhenDroppedBeforeCommit) {
  const std::string folder = MakeTempDir("writer_dropped") + "/out";
  std::string error;
  ASSERT_TRUE(Write(folder, {{"run.json", "old"}}, &error)) << error;
  {
    RunFolderWriter writer;
    ASSERT_TRUE(writer.Open(folder, /*digest=*/true, &error)) << error;
    ASSERT_TRUE(writer.BeginFile("parities.csv", &error)) << error;
    for (int k = 0; k < 100; ++k) writer.Append(std::string(100000, 'y'));
  }
  EXPECT_EQ(ReadTextFile(folder + "/run.json"), "old");
  EXPECT_FALSE(fs::exists(folder + "/parities.csv"));
  EXPECT_EQ(EntriesBeside(folder), 1);  // the staging folder is gone
}

TEST(RunFolderWriter, RefusesARepeatedFileAndCommitsNothing) {
  const std::string folder = MakeTempDir("writer_repeat") + "/out";
  std::string error;
  {
    RunFolderWriter writer;
    ASSERT_TRUE(writer.Open(folder, /*digest=*/false, &error)) << error;
    ASSERT_TRUE(writer.BeginFile("matrix/a.csv", &error)) << error;
    EXPECT_FALSE(writer.BeginFile("matrix/a.csv", &error));
    EXPECT_EQ(error, "two outputs of this run would share the file 'matrix/a.csv'");
    EXPECT_FALSE(writer.BeginFile("../a.csv", &error));
    EXPECT_EQ(error, "output file name '../a.csv' is not a plain path inside the output folder");
    EXPECT_FALSE(writer.Finish(nullptr, &error));
    RunFolderSummary summary;
    EXPECT_FALSE(writer.Commit(nullptr, &summary, &error));
  }
  EXPECT_FALSE(fs::exists(folder));
  EXPECT_EQ(EntriesBeside(folder), 0);
}

TEST(RunFolderWriter, NamesTheFileItCannotWrite) {
  const std::string parent = MakeTempDir("writer_blocked");
  const std::string folder = parent + "/out";
  std::string error;
  RunFolderWriter writer;
  ASSERT_TRUE(writer.Open(folder, /*digest=*/true, &error)) << error;
  // A file where the next file's folder must go.
  ASSERT_TRUE(writer.BeginFile("matrix", &error)) << error;
  writer.Append("x");
  ASSERT_TRUE(writer.BeginFile("matrix/food.csv", &error)) << error;
  writer.Append("y");
  EXPECT_FALSE(writer.Finish(nullptr, &error));
  EXPECT_EQ(error.rfind(fs::absolute(folder).lexically_normal().string() + "/matrix/food.csv: cannot write file: ", 0), 0u)
      << error;
}

TEST(FormatRowBlocks, HandsOverTheSameBlocksInRowOrderForAnyNumberOfThreads) {
  auto format = [](int64_t row, std::string* out) { *out += std::to_string(row * 7) + "\n"; };
  std::vector<std::string> one, many;
  const int threads = omp_get_max_threads();
  omp_set_num_threads(1);
  internal::FormatRowBlocks(100000, 97, 8, format, "header\n",
                            [&one](std::string block) { one.push_back(std::move(block)); });
  omp_set_num_threads(4);
  // A slow taker, so that blocks are often finished while another is taken.
  std::mutex taking;
  internal::FormatRowBlocks(100000, 97, 8, format, "header\n", [&](std::string block) {
    std::lock_guard<std::mutex> lock(taking);
    std::this_thread::sleep_for(std::chrono::microseconds(20));
    many.push_back(std::move(block));
  });
  omp_set_num_threads(threads);
  ASSERT_EQ(one.size(), 1 + (100000 + 96) / 97u);
  EXPECT_EQ(many, one);
  EXPECT_EQ(one[0], "header\n");
  EXPECT_EQ(one[1].substr(0, 9), "0\n7\n14\n21");
  EXPECT_EQ(internal::FormatRows(100000, 97, 8, format, "header\n"), internal::JoinBlocks(one));
}

// A taker slower than the formatting (a file writer with a full queue)
// holds the formatting threads back: no block is started
// kBlocksAheadPerThread x threads or more beyond the first not yet handed
// over, so the text waiting stays a few blocks. Before the bound, the other
// threads formatted the rest of the file ahead of the taker.
TEST(FormatRowBlocks, FormatsAFewBlocksAheadOfASlowTaker) {
  constexpr int kThreads = 4;
  constexpr int64_t kRowsPerBlock = 10, kNumBlocks = 400;
  std::atomic<int64_t> highest_started{-1};
  std::atomic<int> team{0};
  auto format = [&](int64_t row, std::string* out) {
    team = std::max(team.load(), omp_get_num_threads());
    if (row % kRowsPerBlock == 0) {
      int64_t seen = highest_started.load();
      const int64_t block = row / kRowsPerBlock;
      while (block > seen && !highest_started.compare_exchange_weak(seen, block)) {
      }
    }
    *out += std::to_string(row) + "\n";
  };
  int64_t taken = -1;  // the header, then blocks 0, 1, ...
  int64_t most_ahead = 0;
  std::string text;
  const int threads = omp_get_max_threads();
  omp_set_num_threads(kThreads);
  internal::FormatRowBlocks(kNumBlocks * kRowsPerBlock, kRowsPerBlock, 8, format, "", [&](std::string block) {
    std::this_thread::sleep_for(std::chrono::microseconds(200));
    if (taken >= 0) most_ahead = std::max(most_ahead, highest_started.load() - taken);
    ++taken;
    text += block;
  });
  omp_set_num_threads(threads);
  EXPECT_EQ(taken, kNumBlocks);
  EXPECT_EQ(text, internal::FormatRows(kNumBlocks * kRowsPerBlock, kRowsPerBlock, 8, format, ""));
  EXPECT_LE(most_ahead, internal::kBlocksAheadPerThread * kThreads);
  // One thread (OMP_THREAD_LIMIT=1, say) never runs ahead of itself.
  if (team < 2) GTEST_SKIP() << "the formatting ran on one thread";
  EXPECT_GE(most_ahead, 1);  // the threads did run ahead
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

// The command line's way: the tables are streamed into the run folder and
// their texts are not kept; the files and run.json's digests are the same.
TEST(RunCompute, StreamsTheSameFilesWhenTheTextsAreNotKept) {
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(std::string(PARITAS_SOURCE_DIR) + "/config/demo.yaml", &config, &error))
      << error;
  const std::string parent = MakeTempDir("compute_streamed");
  config.output = parent + "/kept";
  ComputeJobSummary kept;
  ASSERT_EQ(RunCompute(config, &kept), kExitOk) << kept.message;
  config.output = parent + "/streamed";
  ComputeJobSummary streamed;
  JobOutputOptions output;
  output.keep_texts = false;
  ASSERT_EQ(RunCompute(config, &streamed, output), kExitOk) << streamed.message;
  ASSERT_EQ(streamed.files.size(), kept.files.size());
  for (size_t i = 0; i + 1 < kept.files.size(); ++i) {
    EXPECT_EQ(streamed.files[i].relative_path, kept.files[i].relative_path);
    EXPECT_TRUE(streamed.files[i].contents.empty()) << streamed.files[i].relative_path;
    EXPECT_EQ(ReadTextFile(config.output + "/" + kept.files[i].relative_path), kept.files[i].contents)
        << kept.files[i].relative_path;
  }
  const std::string kept_json = ReadTextFile(parent + "/kept/run.json");
  const std::string streamed_json = ReadTextFile(parent + "/streamed/run.json");
  const auto outputs = [](const std::string& json) {
    const size_t begin = json.find("\"outputs\"");
    return json.substr(begin, json.find(']', begin) - begin);
  };
  EXPECT_NE(outputs(kept_json).find("\"sha256\""), std::string::npos) << kept_json;
  EXPECT_EQ(outputs(streamed_json), outputs(kept_json));
}

}  // namespace
}  // namespace paritas
