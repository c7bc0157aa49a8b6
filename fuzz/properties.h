// Properties of the readers of untrusted text, checked by the libFuzzer
// harnesses (fuzz/*_fuzz.cc) and by the regression test over the inputs they
// found (tests/fuzz/fuzz_regressions_test.cc), so that a fixed bug stays fixed
// in the ordinary build.
//
// Each check returns "" when its property holds for the input and otherwise a
// one-paragraph description of what broke. Checks never abort on bad input;
// a crash or a sanitizer report inside one is a bug in the code checked.
#ifndef PARITAS_FUZZ_PROPERTIES_H_
#define PARITAS_FUZZ_PROPERTIES_H_

#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

namespace paritas::fuzz {

// CSV reader (paritas/base/csv.h). The records and error of one CsvReader over
// the whole buffer equal those read chunk by chunk after
// SplitAtRecordBoundaries (several chunk counts) and those read block by block
// with LastRecordEnd (several block sizes) and those CsvBlockReader hands out
// from the file (blocks of 64 bytes and more);
// writing the fields back with AppendCsvRecord and reading again gives the
// same fields; CsvHeader finds each name at its first occurrence.
std::string CheckCsvReader(std::string_view data, const std::string& work_dir);

// Number and flag parsing (paritas/base/text.h). A number that parses is
// finite, reads back as the same number from its shortest text (-0 is
// written "0") and parses the same with spaces around it; QuoteValue gives
// one line; EditDistance is symmetric and at most the longer length.
std::string CheckText(std::string_view data, const std::string& work_dir);

// Configuration (ParseRunConfig) and classification (Classification::FromYaml)
// from the same YAML text. Never throws; a failure has a non-empty message; a
// configuration that parses is valid; a classification that parses is a tree
// (one root first, parents before children, depths, children and heading
// lists consistent, codes unique and found by FindNode / FindHeading); the
// groups and labels of a configuration that parses apply to its tree, each
// group after the tree with increasing heading indices.
std::string CheckConfig(std::string_view data, const std::string& work_dir);

// Survey loader (LoadSurvey with invalid_rows: skip). The input is split at
// lines "%%" into prices, expenditure, regions, items, an inline
// classification (YAML) and a second price file; an absent or empty section
// leaves that file out (expenditure gets a one-row default). For every file rows_read = rows_used
// + rows_rejected; every rejected row is listed; invalid_rows: stop rejects
// the same rows; and prices.csv padded past the loader's 64 KiB minimum block
// with blank lines gives the same survey and summary for a 64 KiB block as
// for one block (file sizes and hashes compared when the load succeeds: a
// load stopped by a bad header has hashed only the blocks before).
std::string CheckSurveyLoader(std::string_view data, const std::string& work_dir);

// Deflate (paritas/use/deflation.h) of the input as a wage file against a
// fixed parities folder made once in `work_dir`. Value columns are those of
// wage, income and net in the header (wage when none), node column "node"
// when present, negatives allowed when "net" is. Output and rejected rows are
// identical for 1 KiB and 64 KiB blocks (bytes read compared when the run
// succeeds: a failed one stops early); rows read = written + rejected; each
// row written is the input record with the new columns appended;
// invalid_rows: stop rejects the same rows and writes nothing when it does.
std::string CheckDeflate(std::string_view data, const std::string& work_dir);

// Price index file of `paritas carry` (ReadPriceIndices in
// paritas/use/carry_forward.h) against a fixed tree (aggregate food of bread
// and milk; heading rent) and regions north, south and east. A failure has a
// message starting with the file's path; a read that succeeds gives a table of
// regions x headings whose entries are NaN exactly where no row gave them and
// positive and finite elsewhere, each from the heading's own row or an
// aggregate above it, with rows used + rows of other periods = rows read; a
// file refused for holding several periods reads with each of them; reading
// twice gives the same table.
std::string CheckPriceIndices(std::string_view data, const std::string& work_dir);

// A check as the harnesses and the regression test call it.
using Check = std::string (*)(std::string_view data, const std::string& work_dir);

struct Harness {
  const char* name;  // e.g. "csv_reader": fuzz/<name>_fuzz.cc, fuzz/corpus/<name>/
  Check check;
};

// Every harness, in the order of scripts/fuzz.
const std::vector<Harness>& Harnesses();

// Creates a fresh folder for temporary files: under $PARITAS_FUZZ_TMP when
// set, else /dev/shm when it exists (files there never touch a disk), else
// the system's temporary folder. The name holds `name` and the process id.
std::string MakeWorkDir(const std::string& name);

// Removes a folder made by MakeWorkDir with everything in it.
void RemoveWorkDir(const std::string& path);

// The body of a libFuzzer harness: runs `check` on the input in a work
// folder made on the first call (removed at exit) and, when the property
// breaks, prints what broke and aborts, which libFuzzer reports as a crash
// and saves the input. Returns 0.
int RunHarness(const char* name, Check check, const uint8_t* data, size_t size);

}  // namespace paritas::fuzz

#endif  // PARITAS_FUZZ_PROPERTIES_H_
