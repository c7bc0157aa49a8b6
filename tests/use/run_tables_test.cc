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
// in sha256_test), and run.json itself without one, as compute lists it.
std::string RecordListing(const std::string& path, const std::string& contents) {
  return "{\"schema_version\": 2, \"tool\": {\"name\": \"paritas\"}, \"command\": \"compute\", "
         "\"outputs\": [{\"path\": \"" +
         path + "\", \"bytes\": " + std::to_string(contents.size()) + ", \"sha256\": \"" +
         internal::Sha256Hex(contents) + "\"}, {\"path\": \"run.json\"}]}";
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
                       "what its run wrote: run the command that wrote the folder again, or "
                       "restore the folder whole");
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

// A record of schema 1 lists the files' names without digests: nothing to
// check against, so the folder is read as it is. An entry that is neither a
// name nor a path with its digest is refused (it once ended the process).
TEST(ReadRunTable, ReadsARecordOfNamesOnlyAndRefusesAMalformedOne) {
  const std::string dir = MakeTempDir("run_table_schema");
  WriteTextFile(dir + "/parities.csv", kParities);
  WriteTextFile(dir + "/run.json",
                "{\"schema_version\": 1, \"tool\": {\"name\": \"paritas\"}, "
                "\"outputs\": [\"parities.csv\", \"run.json\"]}");
  std::string error;
  EXPECT_EQ(ReadParities(dir, &error).size(), 2u) << error;
  for (const std::string entry : {"{\"path\": null, \"sha256\": \"ab\"}",
                                  "{\"path\": \"parities.csv\", \"sha256\": 3}", "7"}) {
    WriteTextFile(dir + "/run.json",
                  "{\"tool\": {\"name\": \"paritas\"}, \"outputs\": [\"x.csv\", " + entry + "]}");
    EXPECT_TRUE(ReadParities(dir, &error).empty()) << entry;
    EXPECT_EQ(error, "cannot check " + dir + "/parities.csv against its run's record: " + dir +
                         "/run.json: its \"outputs\" entry 2 is not a file's path and SHA-256")
        << entry;
  }
}

// A caller that read run.json before the table (publish, carry: the run id
// goes into what they write) is refused when the folder now holds another
// run, even one whose files match its own record.
TEST(ReadRunTable, RefusesAFolderReplacedSinceItsRecordWasRead) {
  const std::string dir = MakeTempDir("run_table_replaced");
  WriteTextFile(dir + "/parities.csv", kParities);
  std::string record = RecordListing("parities.csv", kParities);
  record.insert(1, "\"run_id\": \"second\", ");
  WriteTextFile(dir + "/run.json", record);
  std::string error;
  const auto handle = [](const internal::TableRow&, std::string*) { return true; };
  EXPECT_TRUE(internal::ReadRunTable(dir, "parities.csv", ReadLimits(), {"parity"}, {true}, handle,
                                     &error, "second"))
      << error;
  EXPECT_FALSE(internal::ReadRunTable(dir, "parities.csv", ReadLimits(), {"parity"}, {true}, handle,
                                      &error, "first"));
  EXPECT_EQ(error, dir + "/parities.csv: the run folder was replaced while it was read (" + dir +
                       "/run.json now records run 'second', not 'first'); read it again");
}

}  // namespace
}  // namespace paritas
