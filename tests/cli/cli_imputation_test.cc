// End to end: compute with a region missing a heading's prices, an external
// parities file and a missing_parities rule writes the source columns, the
// rule in run.json and the report, and refuses a bad external file by line.
#include <nlohmann/json.hpp>
#include <string>

#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::WriteTextFile;

// Three regions; CIR has no fuel price but spends on fuel. Rents come
// from a file for all three.
std::string WriteSurvey(const std::string& name, const std::string& rents,
                        const std::string& extra) {
  const std::string dir = MakeTempDir("cli_imputation_" + name);
  WriteTextFile(dir + "/prices.csv",
                "region,item,price,heading\n"
                "AAR,rye,2.0,bakery\nBEL,rye,3.0,bakery\nCIR,rye,2.5,bakery\n"
                "AAR,diesel,1.5,fuel\nBEL,diesel,1.8,fuel\n"
                "AAR,bus,1.0,fares\nBEL,bus,1.1,fares\nCIR,bus,1.3,fares\n");
  WriteTextFile(dir + "/expenditure.csv",
                "region,heading,expenditure\n"
                "AAR,bakery,100\nBEL,bakery,120\nCIR,bakery,90\n"
                "AAR,fuel,40\nBEL,fuel,30\nCIR,fuel,50\n"
                "AAR,fares,20\nBEL,fares,25\nCIR,fares,10\n"
                "AAR,rent,300\nBEL,rent,280\nCIR,rent,200\n");
  WriteTextFile(dir + "/rents.csv", rents);
  WriteTextFile(dir + "/run.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                "  external_parities: {path: rents.csv}\n"
                "classification:\n  all:\n    food: [bakery]\n    transport: [fuel, fares]\n"
                "    housing: [rent]\noutput: out\n" +
                    extra);
  return dir;
}

TEST(ImputationCli, ComputeWritesSourceColumnsAndTheRules) {
  const std::string dir =
      WriteSurvey("columns", "heading,region,parity,log_se\nrent,AAR,1.0,0.05\nrent,BEL,1.2,0.05\n"
                             "rent,CIR,0.8,0.05\n",
                  "missing_parities:\n  headings: {fuel: 'like:fares'}\n");
  std::string out, err;
  ASSERT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 0) << err;
  const std::string parities = ReadTextFile(dir + "/out/parities.csv");
  EXPECT_NE(parities.find(",source,share_priced,share_imputed,share_external,"), std::string::npos);
  // fuel in CIR: like:fares; rent everywhere: the file; CIR's transport is
  // 50 fuel (imputed) + 10 fares (priced); its all items mixes all three.
  auto row_tail = [&](const std::string& start) {
    const size_t at = parities.find("\n" + start);
    EXPECT_NE(at, std::string::npos) << start;
    const std::string line = parities.substr(at + 1, parities.find('\n', at + 1) - at - 1);
    return line;
  };
  EXPECT_NE(row_tail("fuel,heading,CIR,").find(",imputed,0,1,0,"), std::string::npos);
  EXPECT_NE(row_tail("rent,heading,BEL,").find(",external,0,0,1,"), std::string::npos);
  EXPECT_NE(row_tail("transport,aggregate,CIR,").find(",mixed,0.16666666666666666,0.8333333333333334,0,"),
            std::string::npos);
  EXPECT_NE(row_tail("transport,aggregate,AAR,").find(",priced,1,0,0,"), std::string::npos);
  const nlohmann::json run = nlohmann::json::parse(ReadTextFile(dir + "/out/run.json"));
  EXPECT_EQ(run["configuration"]["missing_parities"]["headings"]["fuel"], "like:fares");
  EXPECT_EQ(run["configuration"]["missing_parities"]["default"], "leave");
  EXPECT_EQ(run["computation"]["num_parities_imputed"], 1);
  EXPECT_EQ(run["computation"]["num_parities_missing"], 0);
  ASSERT_EQ(run["missing_parities"].size(), 4u);  // bakery, fuel, fares, rent
  EXPECT_EQ(run["missing_parities"][1].dump(),
            R"({"heading":"fuel","regions_imputed":["CIR"],"regions_missing":[],"rule":"like:fares"})");
  EXPECT_EQ(run["missing_parities"][3]["rule"], "leave");
  const std::string report = ReadTextFile(dir + "/out/report.html");
  EXPECT_NE(report.find("<tr><td>fuel</td><td>like:fares</td><td>CIR</td><td></td></tr>"),
            std::string::npos);
}

// CIR's fuel parity comes from fares (rule like), BEL's rent from the file:
// pair says the items it compares do not give those parities, and still
// prints the transitive one where no item is matched.
TEST(ImputationCli, PairSaysWhenAHeadingParityIsNotFromItsItems) {
  const std::string dir =
      WriteSurvey("pair", "heading,region,parity\nrent,AAR,1.0\nrent,BEL,1.2\nrent,CIR,0.8\n",
                  "missing_parities:\n  headings: {fuel: 'like:fares'}\n");
  std::string out, err;
  ASSERT_EQ(RunCli("pair '" + dir + "/run.yaml' --from AAR --to CIR --node fuel", &out, &err), 0)
      << err;
  EXPECT_NE(out.find("note: the parity of 'CIR' is imputed: the items compared below do not give "
                     "the transitive parity"),
            std::string::npos)
      << out;
  ASSERT_EQ(RunCli("pair '" + dir + "/run.yaml' --from AAR --to BEL --node rent", &out, &err), 0)
      << err;
  EXPECT_NE(out.find("note: the parity of 'AAR' is external (" + dir +
                     "/rents.csv); the parity of 'BEL' is external (" + dir + "/rents.csv)"),
            std::string::npos)
      << out;
  ASSERT_EQ(RunCli("pair '" + dir + "/run.yaml' --from AAR --to BEL --node fuel", &out, &err), 0);
  EXPECT_EQ(out.find("note:"), std::string::npos) << out;
}

TEST(ImputationCli, BadExternalFileIsRefusedWithItsLine) {
  const std::string dir = WriteSurvey("bad", "heading,region,parity\nrent,AAR,1.0\nrent,BEL,0\n", "");
  std::string out, err;
  EXPECT_EQ(RunCli("compute '" + dir + "/run.yaml'", &out, &err), 1);
  EXPECT_NE(err.find(dir + "/rents.csv:3:3: parity '0' is not positive"), std::string::npos) << err;
}

}  // namespace
}  // namespace paritas
