// End-to-end runs with several price files: the parities equal those of one
// concatenated file byte for byte, and run.json, the report, rejected.csv and
// `check` account for each file. Invented data, one folder per case.
#include <cstdio>
#include <nlohmann/json.hpp>
#include <string>
#include <utility>
#include <vector>

#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::WriteTextFile;

const char kExpenditure[] =
    "region,heading,expenditure\n"
    "AAR,bakery,100\nBEL,bakery,120\nCIR,bakery,90\n"
    "AAR,housing,300\nBEL,housing,280\nCIR,housing,200\n";
const char kMain[] =
    "region,item,price,heading\n"
    "AAR,rye,2.0,bakery\nBEL,rye,3.0,bakery\nCIR,rye,2.5,bakery\n"
    "AAR,bun,1.0,bakery\nBEL,bun,1.5,bakery\nCIR,bun,1.1,bakery\n";
// The rent rows as the main survey would write them.
const char kRentRows[] =
    "AAR,flat,500,housing\nBEL,flat,650,housing\nCIR,flat,420,housing\n"
    "AAR,house,900,housing\nBEL,house,1100,housing\nCIR,house,700,housing\n";
// The same rows as the rent register writes them: its own headers and order.
const char kRentRegister[] =
    "area_code;dwelling;rent_month;heading\n"
    "AAR;flat;500;housing\nBEL;flat;650;housing\nCIR;flat;420;housing\n"
    "AAR;house;900;housing\nBEL;house;1100;housing\nCIR;house;700;housing\n";

// Writes expenditure.csv, the files given and run.yaml; returns the folder.
std::string WriteRun(const std::string& name,
                     const std::vector<std::pair<std::string, std::string>>& files,
                     const std::string& prices_yaml, const std::string& extra = "") {
  const std::string dir = MakeTempDir("cli_sources_" + name);
  WriteTextFile(dir + "/expenditure.csv", kExpenditure);
  for (const auto& [file, text] : files) WriteTextFile(dir + "/" + file, text);
  WriteTextFile(dir + "/run.yaml", "survey:\n  prices:" + prices_yaml +
                                       "  expenditure: expenditure.csv\noutput: out\n" + extra);
  return dir;
}

// The digest sha256sum prints for `path`.
std::string Sha256Sum(const std::string& path) {
  FILE* pipe = popen(("sha256sum '" + path + "'").c_str(), "r");
  if (pipe == nullptr) return "popen failed";
  char digest[65] = {0};
  const size_t n = std::fread(digest, 1, 64, pipe);
  pclose(pipe);
  return std::string(digest, n);
}

const char kTwoSources[] =
    "\n    - main.csv\n"
    "    - path: rent.csv\n"
    "      delimiter: ';'\n"
    "      columns: {region: area_code, item: dwelling, price: rent_month}\n";

TEST(SourcesCli, TwoFilesGiveTheParitiesOfOneConcatenatedFileByteForByte) {
  const std::string one =
      WriteRun("one", {{"prices.csv", std::string(kMain) + kRentRows}}, " prices.csv\n");
  const std::string two =
      WriteRun("two", {{"main.csv", kMain}, {"rent.csv", kRentRegister}}, kTwoSources);
  std::string out, err;
  ASSERT_EQ(RunCli("compute '" + one + "/run.yaml'", &out, &err), 0) << err;
  ASSERT_EQ(RunCli("compute '" + two + "/run.yaml'", &out, &err), 0) << err;
  EXPECT_EQ(ReadTextFile(one + "/out/parities.csv"), ReadTextFile(two + "/out/parities.csv"));
  EXPECT_EQ(ReadTextFile(one + "/out/outliers.csv"), ReadTextFile(two + "/out/outliers.csv"));
}

TEST(SourcesCli, RunRecordReportAndCheckListEachFile) {
  const std::string dir =
      WriteRun("record", {{"main.csv", kMain}, {"rent.csv", kRentRegister}}, kTwoSources);
  std::string out, err;
  ASSERT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 0) << err;
  const auto record = nlohmann::json::parse(ReadTextFile(dir + "/out/run.json"));
  const auto& inputs = record["inputs"];
  ASSERT_EQ(inputs.size(), 3u);
  EXPECT_EQ(inputs[0]["role"], "prices");
  EXPECT_EQ(inputs[0]["path"], dir + "/main.csv");
  EXPECT_EQ(inputs[0]["rows_used"], 6);
  EXPECT_FALSE(inputs[0].contains("columns"));
  EXPECT_EQ(inputs[1]["role"], "prices");
  EXPECT_EQ(inputs[1]["path"], dir + "/rent.csv");
  EXPECT_EQ(inputs[1]["delimiter"], ";");
  EXPECT_EQ(inputs[1]["rows_read"], 6);
  EXPECT_EQ(inputs[1]["columns"]["price"], "rent_month");
  // SHA-256 of the rent file's bytes, computed here with sha256sum.
  EXPECT_EQ(inputs[1]["sha256"].get<std::string>(), Sha256Sum(dir + "/rent.csv"));
  EXPECT_EQ(inputs[0]["sha256"].get<std::string>(), Sha256Sum(dir + "/main.csv"));
  EXPECT_EQ(record["configuration"]["survey"]["prices"][1]["path"], dir + "/rent.csv");
  const std::string report = ReadTextFile(dir + "/out/report.html");
  EXPECT_NE(report.find("<code>" + dir + "/main.csv</code>"), std::string::npos);
  EXPECT_NE(report.find("<code>" + dir +
                        "/rent.csv</code><br><small>columns: region from "
                        "<code>area_code</code>, item from <code>dwelling</code>, price from "
                        "<code>rent_month</code></small>"),
            std::string::npos);
  ASSERT_EQ(RunCli("check '" + dir + "/run.yaml'", &out, &err), 0) << err;
  EXPECT_NE(out.find("  prices      " + dir + "/main.csv: 6 rows read, 6 used, 0 rejected\n" +
                     "  prices      " + dir + "/rent.csv: 6 rows read, 6 used, 0 rejected\n" +
                     "              columns: region from 'area_code', item from 'dwelling', "
                     "price from 'rent_month'\n"),
            std::string::npos)
      << out;
}

TEST(SourcesCli, RejectedCsvNamesTheFileOfEachRow) {
  const std::string dir =
      WriteRun("rejected",
               {{"main.csv", std::string(kMain) + "CIR,bun,-1,bakery\n"},
                {"rent.csv", std::string(kRentRegister) + "BEL;flat;;housing\n"}},
               kTwoSources, "invalid_rows: skip\n");
  std::string out, err;
  ASSERT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 0) << err;
  EXPECT_EQ(ReadTextFile(dir + "/out/rejected.csv"),
            "file,line,reason,raw\n" + dir + "/main.csv,8," + dir +
                "/main.csv:8:3: price '-1' is not a positive number,\"CIR,bun,-1,bakery\"\n" + dir +
                "/rent.csv,8," + dir + "/rent.csv:8:3: price is empty,BEL;flat;;housing\n");
}

TEST(SourcesCli, ABadRowInTheSecondFileStopsTheRunNamingItsFileAndLine) {
  const std::string dir = WriteRun(
      "stop",
      {{"main.csv", kMain}, {"rent.csv", std::string(kRentRegister) + "BEL;flat;x;housing\n"}},
      kTwoSources);
  std::string out, err;
  EXPECT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 1);
  EXPECT_NE(err.find(dir + "/rent.csv:8:3: price 'x' is not a number"), std::string::npos) << err;
}

TEST(SourcesCli, QuoteWeightsAreRecordedInRunJsonAndTheReport) {
  const std::string dir = WriteRun(
      "weights",
      {{"scan.csv",
        "region,item,price,heading,weight,quantity\n"
        "AAR,rye,1.50,bakery,120,750\nBEL,rye,3.0,bakery,80,1000\nCIR,rye,2.5,bakery,95,1000\n"
        "AAR,bun,1.0,bakery,40,1\nBEL,bun,1.5,bakery,60,1\nCIR,bun,1.1,bakery,10,1\n"},
       {"main.csv", std::string("region,item,price,heading\n") + kRentRows}},
      "\n    - scan.csv\n    - main.csv\n", "cpd_cell_weights: quote-weights\n");
  std::string out, err;
  ASSERT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 0) << err;
  const auto record = nlohmann::json::parse(ReadTextFile(dir + "/out/run.json"));
  EXPECT_EQ(record["configuration"]["cpd_cell_weights"], "quote-weights");
  EXPECT_EQ(record["methods"]["cell_price"],
            "geometric mean of the quotes weighted by their weight");
  // No items.csv, so no reference_quantity: priced per 1 unit, with a warning.
  EXPECT_NE(ReadTextFile(dir + "/out/warnings.csv")
                .find("input,,,\"prices of 2 items (rye, bun; 6 quotes) are per 1 unit of their "
                      "quantity column: no items file (survey.items) gives a reference_quantity; "
                      "parities do not depend on this unless some quotes of the item carry no "
                      "quantity\""),
            std::string::npos);
  const std::string report = ReadTextFile(dir + "/out/report.html");
  EXPECT_NE(report.find("<th scope=\"row\">Quote weights</th><td>weighted geometric means in the "
                        "cells; CPD cells weighted by their sums of quote weights</td>"),
            std::string::npos);
}

}  // namespace
}  // namespace paritas
