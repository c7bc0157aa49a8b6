// A run folder's tables are read only as the run that wrote them recorded
// them (run.json's "outputs": path and SHA-256), so that no figure is read,
// deflated or published under the provenance of a run that did not write it.
#include "use/run_tables.h"

#include <gtest/gtest.h>

#include <string>
#include <vector>

#include "base/sha256.h"
#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::WriteRunFile;
using ::paritas::testing::WriteTextFile;

constexpr char kParities[] = "node,region,parity\nall,a,100\nall,b,120\n";

// A run record listing `path` with the SHA-256 of `contents` (the digest as
// compute records it: internal::Sha256Hex, tested on the FIPS 180-4 vectors
// in sha256_test).
std::string RecordListing(const std::string& path, const std::string& contents) {
  return "{\"schema_version\": 2, \"tool\": {\"name\": \"paritas\"}, \"command\": \"compute\", "
         "\"outputs\": [{\"path\": \"" +
         path + "\", \"bytes\": " + std::to_string(contents.size()) + ", \"sha256\": \"" +
         internal::Sha256Hex(contents) + "\"}]}";
}

// The parities of `dir`/parities.csv as ReadRunTable reads them, or the
// error in `error`.
std::vector<std::string> ReadParities(const std::string& dir, std::string* error) {
  std::vector<std::string> rows;
  error->clear();
  const auto handle = [&](const internal::TableRow& row, std::string*) {
    rows.push_back(std::string(row.fields[1]) + "=" + std::string(row.fields[2]));
    return true;
  };
  if (!internal::ReadRunTable(dir, "parities.csv", ReadLimits(), {"node", "region", "parity"},
                              {true, true, true}, handle, error)) {
    rows.clear();
  }
  return rows;
}

TEST(ReadRunTable, ReadsAFileAsItsRunRecordedIt) {
  const std::string dir = MakeTempDir("run_table_same");
  WriteTextFile(dir + "/parities.csv", kParities);
  WriteTextFile(dir + "/run.json", RecordListing("parities.csv", kParities));
  std::string error;
  EXPECT_EQ(ReadParities(dir, &error), (std::vector<std::string>{"a=100", "b=120"}));
  EXPECT_EQ(error, "");
}

TEST(ReadRunTable, RefusesAFileChangedAfterItsRunBeforeReadingARow) {
  const std::string dir = MakeTempDir("run_table_changed");
  WriteTextFile(dir + "/run.json", RecordListing("parities.csv", kParities));
  // One digit changed: a figure of another run, or edited by hand.
  const std::string changed = "node,region,parity\nall,a,100\nall,b,121\n";
  WriteTextFile(dir + "/parities.csv", changed);
  std::string error;
  EXPECT_TRUE(ReadParities(dir, &error).empty());
  EXPECT_EQ(error, dir + "/parities.csv: not the file its run wrote (" + dir +
                       "/run.json records SHA-256 " + internal::Sha256Hex(kParities).substr(0, 12) +
                       "..., the file has " + internal::Sha256Hex(changed).substr(0, 12) +
                       "...): it was changed or replaced after the run, so its figures are not "
                       "that run's; run the command that wrote the folder again, or restore the "
                       "folder whole");
  // Recorded as the run's (WriteRunFile updates the record), it is read.
  WriteRunFile(dir, "parities.csv", changed);
  EXPECT_EQ(ReadParities(dir, &error), (std::vector<std::string>{"a=100", "b=121"}));
}

TEST(ReadRunTable, RefusesAFileItsRunDidNotWrite) {
  const std::string dir = MakeTempDir("run_table_other");
  WriteTextFile(dir + "/parities.csv", kParities);
  WriteTextFile(dir + "/run.json", RecordListing("outliers.csv", "node\n"));
  std::string error;
  EXPECT_TRUE(ReadParities(dir, &error).empty());
  EXPECT_EQ(error, dir + "/parities.csv: not among the files " + dir +
                       "/run.json records, so not a file of that run; a run folder holds only "
                       "what its run wrote");
}

// Parities made elsewhere (deflate takes a folder holding only parities.csv)
// and records that list no files are read as they are.
TEST(ReadRunTable, ReadsAFolderWithoutARecordOfFiles) {
  const std::string dir = MakeTempDir("run_table_by_hand");
  WriteTextFile(dir + "/parities.csv", kParities);
  std::string error;
  EXPECT_EQ(ReadParities(dir, &error).size(), 2u) << error;
  WriteTextFile(dir + "/run.json", "{\"schema_version\": 2, \"tool\": {\"name\": \"paritas\"}}");
  EXPECT_EQ(ReadParities(dir, &error).size(), 2u) << error;
  // A run.json that is not a run record cannot vouch for the file.
  WriteTextFile(dir + "/run.json", "[1, 2]");
  EXPECT_TRUE(ReadParities(dir, &error).empty());
  EXPECT_EQ(error, "cannot check " + dir + "/parities.csv against its run's record: " + dir +
                       "/run.json: not a run record of paritas");
}

}  // namespace
}  // namespace paritas
