// End-to-end runs of check and compute on inputs as they come from the field:
// text in another encoding, European CSV, rejected regions whose rows would
// cascade, keys given twice, and surveys that check must refuse as compute
// does. Each case writes its survey (invented data) to its own folder.
#include <nlohmann/json.hpp>
#include <string>

#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::WriteTextFile;

const char kExpenditure[] =
    "region,heading,expenditure\n"
    "AAR,bakery,100\n"
    "BEL,bakery,120\n"
    "CIR,bakery,90\n";

// Writes the files and a run.yaml with `survey_yaml` under `survey:` and
// `extra` after it; returns the folder.
std::string WriteSurvey(const std::string& name, const std::string& prices,
                        const std::string& survey_yaml, const std::string& extra = "",
                        const std::string& expenditure = kExpenditure) {
  const std::string dir = MakeTempDir("cli_inputs_" + name);
  WriteTextFile(dir + "/prices.csv", prices);
  WriteTextFile(dir + "/expenditure.csv", expenditure);
  WriteTextFile(dir + "/run.yaml", "survey:\n" + survey_yaml + extra);
  return dir;
}

const char kFiles[] = "  prices: prices.csv\n  expenditure: expenditure.csv\n";

TEST(InputsCli, ComputeWritesAValidRunRecordWhenAnIgnoredColumnIsLatin1) {
  // Before, nlohmann::json threw on the header name 'r\xe9f' (Latin-1 e acute)
  // in run.json's ignored columns and the run aborted with exit code 134.
  const std::string dir = WriteSurvey("latin1_header",
                                      "region,item,price,heading,r\xe9"
                                      "f\n"
                                      "AAR,rye,2.0,bakery,a\nBEL,rye,3.0,bakery,b\n",
                                      kFiles, "output: out\n");
  std::string out, err;
  EXPECT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: " + dir + "/prices.csv:1:5: column name 'r\\xe9f' is not valid " +
                     "UTF-8 (the file may be Latin-1 or Windows-1252: save it as UTF-8)\n");
}

TEST(InputsCli, SkipLeavesOutALatin1RowAndTheRunRecordStaysValidJson) {
  const std::string dir = WriteSurvey("latin1_row",
                                      "region,item,price,heading,note\n"
                                      "AAR,rye,2.0,bakery,plain\nBEL,rye,3.0,bakery,plain\n"
                                      "AAR,bun,1.0,bakery,caf\xe9\nBEL,bun,1.5,bakery,plain\n"
                                      "CIR,rye,2.5,bakery,plain\n",
                                      kFiles, "invalid_rows: skip\noutput: out\n");
  std::string out, err;
  ASSERT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 0) << err;
  const std::string rejected = ReadTextFile(dir + "/out/rejected.csv");
  EXPECT_NE(rejected.find(dir + "/prices.csv:4:5: note 'caf\\xe9' is not valid UTF-8 (the file may "
                                "be Latin-1 or Windows-1252: save it as UTF-8)"),
            std::string::npos)
      << rejected;
  const auto record = nlohmann::json::parse(ReadTextFile(dir + "/out/run.json"));
  EXPECT_EQ(record["inputs"][0]["rows_read"], 5);
  EXPECT_EQ(record["inputs"][0]["rows_used"], 4);
  EXPECT_EQ(record["inputs"][0]["rows_rejected"], 1);
}

TEST(InputsCli, ReadsSemicolonsAndDecimalCommasWhereTheConfigurationSaysSo) {
  const std::string dir = WriteSurvey(
      "european",
      "region;item;price;heading\n"
      "AAR;rye;2,00;bakery\nBEL;rye;\"3,00\";bakery\nAAR;bun;1,25;bakery\nBEL;bun;1,5;bakery\n",
      "  prices: {path: prices.csv, delimiter: ';', decimal: ','}\n"
      "  expenditure: expenditure.csv\n",
      "output: out\n");
  std::string out, err;
  ASSERT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 0) << err;
  const auto record = nlohmann::json::parse(ReadTextFile(dir + "/out/run.json"));
  EXPECT_EQ(record["inputs"][0]["delimiter"], ";");
  EXPECT_EQ(record["inputs"][0]["decimal"], ",");
  EXPECT_EQ(record["inputs"][0]["rows_used"], 4);
}

TEST(InputsCli, NamesADecimalCommaUnderTheDefaultSettings) {
  const std::string dir = WriteSurvey("decimal_comma",
                                      "region,item,price,heading\n"
                                      "AAR,rye,2.0,bakery\nBEL,rye,\"11,77\",bakery\n",
                                      kFiles);
  std::string out, err;
  EXPECT_EQ(RunCli("check '" + dir + "/run.yaml'", &out, &err), 1);
  EXPECT_NE(
      err.find(dir + "/prices.csv:3:3: price '11,77' is not a number; a decimal comma needs " +
               "decimal: ',' for this file (survey.prices)\n"),
      std::string::npos)
      << err;
  EXPECT_NE(err.find("paritas: error: 1 invalid row; fix them, or set invalid_rows: skip to leave "
                     "them out\n"),
            std::string::npos)
      << err;
}

TEST(InputsCli, CheckSaysOnceThatARejectedRegionTakesItsRowsWithIt) {
  const std::string dir =
      WriteSurvey("cascade",
                  "region,item,price,heading\n"
                  "AAR,rye,2.0,bakery\nBEL,rye,3.0,bakery\nCIR,rye,2.5,bakery\n"
                  "AAR,bun,1.0,bakery\nBEL,bun,1.5,bakery\nCIR,bun,1.2,bakery\n",
                  kFiles + std::string("  regions: regions.csv\n"), "invalid_rows: skip\n");
  WriteTextFile(dir + "/regions.csv",
                "region,name,population\nAAR,Aar,1000\nBEL,Bel,2000\nCIR,Cir,\"1,200,000\"\n");
  std::string out, err;
  EXPECT_EQ(RunCli("check '" + dir + "/run.yaml'", &out, &err), 0) << err;
  EXPECT_NE(out.find(dir + "/prices.csv: 6 rows read, 4 used, 2 rejected (2 of them of rejected "
                           "regions or items)\n"),
            std::string::npos)
      << out;
  const std::string expected =
      "rejected rows: 4\n" + dir +
      "/regions.csv:4:3: population '1,200,000' is not a number; thousands separators are not "
      "allowed (write 1200000)\n"
      "region 'CIR' was rejected at " +
      dir +
      "/regions.csv:4 (population '1,200,000' is not a number; thousands separators are not "
      "allowed (write 1200000)), so its 2 price rows and 1 expenditure row are left out\n";
  EXPECT_NE(out.find(expected), std::string::npos) << out;
}

TEST(InputsCli, RefusesAConfigurationKeyGivenTwiceNamingBothLines) {
  const std::string dir =
      WriteSurvey("duplicate_key", "region,item,price,heading\nAAR,rye,2,bakery\n", kFiles,
                  "elementary: cpd\nreport: false\nelementary: jevons-geks\n");
  std::string out, err;
  EXPECT_EQ(RunCli("check '" + dir + "/run.yaml'", &out, &err), 1);
  EXPECT_EQ(err, "paritas: error: " + dir +
                     "/run.yaml:6:1: key 'elementary' is given twice (first at line 4); remove one "
                     "of them\n");
}

TEST(InputsCli, CheckRefusesAnAggregateWithoutPricesAsComputeDoes) {
  // 'fuel' has expenditure but no quote: its aggregate 'transport' has nothing to aggregate.
  const std::string dir = WriteSurvey(
      "unpriced_aggregate", "region,item,price,heading\nAAR,rye,2.0,bakery\nBEL,rye,3.0,bakery\n",
      kFiles, "classification:\n  all:\n    food: [bakery]\n    transport: [fuel]\noutput: out\n",
      "region,heading,expenditure\nAAR,bakery,100\nBEL,bakery,120\nAAR,fuel,40\nBEL,fuel,30\n");
  const std::string message =
      "aggregate 'transport' has no parities: its only heading (fuel) has no price quotes; price "
      "it, or take the aggregate out of the classification";
  std::string out, err;
  EXPECT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 2);
  EXPECT_EQ(err, "paritas: error: " + message + "\n");
  EXPECT_EQ(RunCli("check '" + dir + "/run.yaml'", &out, &err), 1);
  EXPECT_NE(out.find("not usable: " + message + "\n"), std::string::npos) << out;
}

}  // namespace
}  // namespace paritas
