// Tests of missing heading parities (compute/imputation.h) and of external
// heading parities: each rule against a hand computation written out here,
// the parent rule against the parent recomputed without the heading, the
// external file passed through up to normalisation, and its bad rows.
#include "paritas/compute/imputation.h"

#include <cmath>
#include <string>
#include <vector>

#include "paritas/aggregation/aggregation_method.h"
#include "paritas/compute/compute.h"
#include "paritas/compute/plausibility.h"
#include "paritas/output/output_writers.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/uncertainty/sensitivity.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::MakeTempDir;
using testing::WriteTextFile;

const double kNaN = std::nan("");

// Four regions, one item per heading, so a priced heading parity is the
// item's price relative. Region D has no rent price but spends on rent.
// Columns: region, bread, milk, rent, energy, water.
struct Row {
  const char* region;
  double price[5];
  double spend[5];
};
const Row kRows[] = {
    {"A", {1.00, 0.80, 500, 100, 20}, {100, 80, 400, 150, 50}},
    {"B", {1.10, 0.90, 600, 110, 21}, {110, 70, 450, 140, 60}},
    {"C", {0.95, 0.85, 450, 95, 23}, {90, 85, 380, 160, 45}},
    {"D", {1.05, 0.82, kNaN, 105, 22}, {95, 75, 300, 155, 55}},
};
const char* const kHeadings[] = {"bread", "milk", "rent", "energy", "water"};

// Writes prices.csv and expenditure.csv into `folder`, leaving out the
// headings in `skip` (their prices only when `keep_spending`).
void WriteSurvey(const std::string& folder, const std::vector<std::string>& skip = {},
                 bool keep_spending = false) {
  std::string prices = "region,item,price,heading\n", spending = "region,heading,expenditure\n";
  for (const Row& row : kRows) {
    for (int h = 0; h < 5; ++h) {
      const bool skipped = std::find(skip.begin(), skip.end(), kHeadings[h]) != skip.end();
      if (skipped && !keep_spending) continue;
      if (std::isfinite(row.price[h]) && !skipped) {
        prices += std::string(row.region) + "," + kHeadings[h] + "_item," +
                  std::to_string(row.price[h]) + "," + kHeadings[h] + "\n";
      }
      spending += std::string(row.region) + "," + kHeadings[h] + "," +
                  std::to_string(row.spend[h]) + "\n";
    }
  }
  WriteTextFile(folder + "/prices.csv", prices);
  WriteTextFile(folder + "/expenditure.csv", spending);
}

const char* const kTree =
    "classification:\n  all:\n    food: [bread, milk]\n    housing: [rent, energy, water]\n";

bool Load(const std::string& folder, const std::string& extra, RunConfig* config, Survey* survey,
          LoadSummary* load) {
  WriteTextFile(folder + "/config.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n" + extra);
  std::string error;
  EXPECT_TRUE(LoadRunConfig(folder + "/config.yaml", config, &error)) << error;
  return LoadSurvey(*config, LoadOptions(), survey, load);
}

struct Computed {
  RunConfig config;
  Survey survey;
  ParityResult result;
  ComputeSummary summary;
};

// Loads and computes; expects both to succeed.
void LoadAndCompute(const std::string& folder, const std::string& extra, Computed* run) {
  LoadSummary load;
  ASSERT_TRUE(Load(folder, extra, &run->config, &run->survey, &load)) << load.message;
  ASSERT_TRUE(ComputeParities(run->survey, ComputeOptions::FromConfig(run->config), &run->result,
                              &run->summary))
      << run->summary.message;
}

const NodeResult& Node(const Computed& run, const std::string& code) {
  return run.result.nodes[run.survey.classification.FindNode(code)];
}
int Region(const Computed& run, const std::string& code) { return run.survey.regions.Find(code); }

double Rent(int r) { return kRows[r].price[2]; }

TEST(Imputation, LeaveRuleKeepsTheParityMissingAndSaysSo) {
  const std::string folder = MakeTempDir("imputation_leave");
  WriteSurvey(folder);
  Computed run;
  LoadAndCompute(folder, kTree, &run);
  EXPECT_TRUE(std::isnan(Node(run, "rent").parity(Region(run, "D"))));
  EXPECT_EQ(run.summary.num_parities_missing, 1);
  EXPECT_EQ(run.summary.num_parities_imputed, 0);
  const PlausibilityResult checks = CheckPlausibility(run.survey, run.result, run.config);
  std::vector<std::string> texts;
  for (const RunWarning& w : checks.warnings) {
    if (w.kind == "missing-parity") texts.push_back(w.text);
  }
  // D spends 300 on rent of 95 + 75 + 300 + 155 + 55 = 680 in all: 44.1 %.
  ASSERT_EQ(texts.size(), 1u);
  EXPECT_EQ(texts[0],
            "heading 'rent', region 'D': 44.1 % of its 'all' spending but no parity (rule leave): "
            "the heading drops out of the region's comparisons pair by pair");
}

TEST(Imputation, HeadingWithoutPricesAnywhereIsNamedOnceNotPerRegion) {
  const std::string folder = MakeTempDir("imputation_unpriced");
  WriteSurvey(folder, {"rent"}, /*keep_spending=*/true);
  Computed run;
  LoadAndCompute(folder, kTree, &run);
  EXPECT_EQ(run.summary.num_parities_missing, 4);
  const PlausibilityResult checks = CheckPlausibility(run.survey, run.result, run.config);
  for (const RunWarning& w : checks.warnings) EXPECT_NE(w.kind, "missing-parity") << w.text;
  EXPECT_EQ(run.summary.warnings,
            std::vector<std::string>{
                "heading 'rent' has no price quotes: left out of every aggregate"});
}

TEST(Imputation, LikeRuleLinksTheRelatedHeadingOverThePricedRegions) {
  const std::string folder = MakeTempDir("imputation_like");
  WriteSurvey(folder);
  Computed run;
  LoadAndCompute(folder, std::string(kTree) + "missing_parities:\n  headings: {rent: 'like:energy'}\n",
                 &run);
  // Hand computation: ln rent_D = ln energy_D + mean over A, B, C of
  // (ln rent_s - ln energy_s), prices being the parities (one item each).
  double offset = 0.0;
  for (int s = 0; s < 3; ++s) offset += std::log(Rent(s) / kRows[s].price[3]) / 3.0;
  const double rent_d = std::exp(std::log(105.0) + offset);
  const NodeResult& rent = Node(run, "rent");
  EXPECT_NEAR(rent.parity(Region(run, "D")) / rent.parity(Region(run, "A")), rent_d / 500.0,
              1e-12);
  EXPECT_EQ(run.result.heading_source(Region(run, "D"), 2),
            static_cast<int>(ParitySource::kImputed));
  EXPECT_EQ(run.summary.num_parities_imputed, 1);
  EXPECT_TRUE(std::isnan(rent.log_se(Region(run, "D"))));
}

TEST(Imputation, ParentRuleEqualsParentWithoutHeading) {
  // The independent run: the same survey without the rent heading at all.
  const std::string without = MakeTempDir("imputation_parent_without");
  WriteSurvey(without, {"rent"});
  Computed reference;
  LoadAndCompute(without,
                 "classification:\n  all:\n    food: [bread, milk]\n    housing: [energy, water]\n",
                 &reference);
  const NodeResult& housing = Node(reference, "housing");
  double offset = 0.0;
  for (int s = 0; s < 3; ++s) offset += std::log(Rent(s) / housing.parity(s)) / 3.0;
  const double rent_d = std::exp(std::log(housing.parity(3)) + offset);

  const std::string folder = MakeTempDir("imputation_parent");
  WriteSurvey(folder);
  Computed run;
  LoadAndCompute(folder, std::string(kTree) + "missing_parities:\n  default: parent\n", &run);
  const NodeResult& rent = Node(run, "rent");
  EXPECT_NEAR(rent.parity(3) / rent.parity(0), rent_d / Rent(0), 1e-12);
}

TEST(Imputation, ParentRuleGoesUpWhenTheParentHoldsOnlyTheHeading) {
  const std::string without = MakeTempDir("imputation_up_without");
  WriteSurvey(without, {"rent"});
  Computed reference;
  LoadAndCompute(without, "classification:\n  all: [bread, milk, energy, water]\n", &reference);
  const NodeResult& all = Node(reference, "all");
  double offset = 0.0;
  for (int s = 0; s < 3; ++s) offset += std::log(Rent(s) / all.parity(s)) / 3.0;
  const double rent_d = std::exp(std::log(all.parity(3)) + offset);

  const std::string folder = MakeTempDir("imputation_up");
  WriteSurvey(folder);
  Computed run;
  LoadAndCompute(folder,
                 "classification:\n  all:\n    food: [bread, milk]\n    shelter: [rent]\n"
                 "    utilities: [energy, water]\nmissing_parities: {default: parent}\n",
                 &run);
  const NodeResult& rent = Node(run, "rent");
  EXPECT_NEAR(rent.parity(3) / rent.parity(0), rent_d / Rent(0), 1e-12);
}

TEST(Imputation, FunctionFillsByRuleFromTheInputParitiesOnly) {
  // Two headings a, b over three regions; b misses region 2, and a misses
  // region 1 where b is priced. like:b for a, like:a for b: each proxy is
  // read from the input, never from the other's imputed entry.
  ImputationInput input;
  input.log_parity.resize(3, 2);
  input.log_parity << 0.0, 0.2,  //
      kNaN, 0.4,                 //
      0.3, kNaN;
  input.source.resize(3, 2);
  input.source << 1, 1, 0, 1, 1, 0;
  input.expenditure = Eigen::MatrixXd::Constant(3, 2, 10.0);
  input.rules = {{ImputationRule::kLike, "b"}, {ImputationRule::kLike, "a"}};
  const Classification tree = Classification::Flat({"a", "b"});
  ImputationResult result;
  std::string error;
  ASSERT_TRUE(ImputeMissingHeadingParities(input, tree, *FindAggregationMethod("geks-fisher"),
                                           &result, &error))
      << error;
  // a(1) = b(1) + (a(0) - b(0)) = 0.4 - 0.2 (region 2 has no b: not linking).
  EXPECT_NEAR(result.log_parity(1, 0), 0.2, 1e-15);
  // b(2) = a(2) + (b(0) - a(0)) = 0.3 + 0.2 (region 1 has no a of its own).
  EXPECT_NEAR(result.log_parity(2, 1), 0.5, 1e-15);
  EXPECT_EQ(result.num_imputed, 2);
}

TEST(Imputation, ExternalRuleLinksTheFileOverTheRegionsInBoth) {
  ImputationInput input;
  input.log_parity.resize(3, 1);
  input.log_parity << 0.2, 0.4, kNaN;
  input.source.resize(3, 1);
  input.source << 1, 1, 0;
  input.expenditure = Eigen::MatrixXd::Constant(3, 1, 5.0);
  input.external_log_parity.resize(3, 1);
  input.external_log_parity << 1.0, 1.2, 1.5;
  input.rules = {{ImputationRule::kExternal, ""}};
  ImputationResult result;
  std::string error;
  ASSERT_TRUE(ImputeMissingHeadingParities(input, Classification::Flat({"h"}),
                                           *FindAggregationMethod("geks-fisher"), &result, &error));
  // Offset = mean(0.2 - 1.0, 0.4 - 1.2) = -0.8; 1.5 - 0.8 = 0.7.
  EXPECT_NEAR(result.log_parity(2, 0), 0.7, 1e-15);
  EXPECT_EQ(result.source(2, 0), static_cast<int>(ParitySource::kExternal));
}

TEST(Imputation, LikeRuleNamingNoHeadingIsRefused) {
  ImputationInput input;
  input.log_parity = Eigen::MatrixXd::Zero(2, 2);
  input.source = Eigen::MatrixXi::Ones(2, 2);
  input.expenditure = Eigen::MatrixXd::Ones(2, 2);
  input.rules = {{ImputationRule::kLike, "electricty"}, {}};
  ImputationResult result;
  std::string error;
  EXPECT_FALSE(ImputeMissingHeadingParities(input, Classification::Flat({"gas", "electricity"}),
                                            *FindAggregationMethod("geks-fisher"), &result,
                                            &error));
  EXPECT_EQ(error,
            "missing_parities: heading 'gas': rule 'like:electricty' names no heading of the "
            "classification; did you mean 'electricity'?");
}

TEST(Imputation, RuleTextsParseAndBadOnesAreNamed) {
  HeadingRule rule;
  std::string error;
  ASSERT_TRUE(HeadingRule::Parse("Like:electricity", &rule, &error));
  EXPECT_EQ(rule.ToString(), "like:electricity");
  ASSERT_TRUE(HeadingRule::Parse("PARENT", &rule, &error));
  EXPECT_EQ(rule.rule, ImputationRule::kParent);
  EXPECT_FALSE(HeadingRule::Parse("nearest", &rule, &error));
  EXPECT_EQ(error, "'nearest' is not one of: leave, parent, external, like:<heading>");
  EXPECT_FALSE(HeadingRule::Parse("like", &rule, &error));
  EXPECT_EQ(error, "'like' is not one of: leave, parent, external, like:<heading>");
  EXPECT_FALSE(HeadingRule::Parse("like:", &rule, &error));
  EXPECT_EQ(error, "'like:' names no heading after 'like:'");
}

TEST(Imputation, ConfigNamesABadRuleWithItsPlace) {
  RunConfig config;
  std::string error;
  EXPECT_FALSE(ParseRunConfig("survey:\n  prices: p.csv\n  expenditure: e.csv\n"
                              "missing_parities:\n  headings: {rent: nearest}\n",
                              "/cfg/run.yaml", &config, &error));
  EXPECT_EQ(error,
            "/cfg/run.yaml:5:20: missing_parities.headings.rent: 'nearest' is not one of: leave, "
            "parent, external, like:<heading>");
  EXPECT_FALSE(ParseRunConfig("survey:\n  prices: p.csv\n  expenditure: e.csv\n"
                              "missing_parities:\n  default: like\n",
                              "/cfg/run.yaml", &config, &error));
  EXPECT_EQ(error,
            "/cfg/run.yaml:5:12: missing_parities.default: 'like' is not one of: leave, parent, "
            "external, like:<heading>");
  ASSERT_TRUE(ParseRunConfig("survey:\n  prices: p.csv\n  expenditure: e.csv\n"
                             "missing_parities:\n  default: Parent\n  headings: {gas: 'like:power'}\n",
                             "/cfg/run.yaml", &config, &error))
      << error;
  EXPECT_EQ(config.missing_parities.default_rule, "Parent");
  ASSERT_EQ(config.missing_parities.headings.size(), 1u);
  EXPECT_EQ(config.missing_parities.headings[0].second, "like:power");
}

TEST(Imputation, UnknownHeadingInTheRulesIsRefused) {
  const std::string folder = MakeTempDir("imputation_unknown");
  WriteSurvey(folder);
  RunConfig config;
  Survey survey;
  LoadSummary load;
  ASSERT_TRUE(Load(folder, std::string(kTree) + "missing_parities:\n  headings: {rents: parent}\n",
                   &config, &survey, &load));
  ParityResult result;
  ComputeSummary summary;
  EXPECT_FALSE(ComputeParities(survey, ComputeOptions::FromConfig(config), &result, &summary));
  EXPECT_EQ(summary.outcome, ComputeOutcome::kInvalidOptions);
  EXPECT_EQ(summary.message,
            "missing_parities.headings: 'rents' is not a basic heading of the classification; did "
            "you mean 'rent'?");
}

TEST(ExternalParities, PassThroughUnchangedUpToNormalisation) {
  const std::string folder = MakeTempDir("external_pass");
  WriteSurvey(folder);
  WriteTextFile(folder + "/rents.csv",
                "heading,region,parity,log_se\nrent,A,1.0,0.05\nrent,B,1.25,0.04\nrent,C,0.9,\n"
                "rent,D,1.1,0.06\n");
  Computed run;
  LoadAndCompute(folder, "  external_parities: rents.csv\n" + std::string(kTree), &run);
  const NodeResult& rent = Node(run, "rent");
  const double file[] = {1.0, 1.25, 0.9, 1.1};
  for (int r = 1; r < 4; ++r) EXPECT_NEAR(rent.parity(r) / rent.parity(0), file[r] / file[0], 1e-14);
  EXPECT_DOUBLE_EQ(rent.log_se(1), 0.04);
  EXPECT_TRUE(std::isnan(rent.log_se(2)));  // not given
  for (int r = 0; r < 4; ++r) {
    EXPECT_EQ(run.result.heading_source(r, 2), static_cast<int>(ParitySource::kExternal));
  }
  ASSERT_FALSE(run.summary.warnings.empty());
  EXPECT_EQ(run.summary.warnings[0],
            "heading 'rent': parities taken from " + folder +
                "/rents.csv; its 3 price quotes in 3 regions are ignored (give the heading rule "
                "'external' to keep the quotes and fill only the regions without a parity from "
                "the file)");
}

TEST(ExternalParities, ExternalRuleKeepsQuotesAndFillsTheMissingRegion) {
  const std::string folder = MakeTempDir("external_rule");
  WriteSurvey(folder);
  WriteTextFile(folder + "/rents.csv", "heading,region,parity\nrent,C,0.9\nrent,D,1.1\n");
  Computed run;
  LoadAndCompute(folder,
                 "  external_parities: rents.csv\n" + std::string(kTree) +
                     "missing_parities:\n  headings: {rent: external}\n",
                 &run);
  const NodeResult& rent = Node(run, "rent");
  // Linked over C alone: rent_D / rent_C = 1.1 / 0.9; A, B, C keep their quotes.
  EXPECT_NEAR(rent.parity(3) / rent.parity(2), 1.1 / 0.9, 1e-12);
  EXPECT_NEAR(rent.parity(1) / rent.parity(0), 600.0 / 500.0, 1e-12);
  EXPECT_EQ(run.result.heading_source(3, 2), static_cast<int>(ParitySource::kExternal));
  EXPECT_EQ(run.result.heading_source(0, 2), static_cast<int>(ParitySource::kPriced));
}

TEST(ExternalParities, BootstrapDrawsTheFileParitiesWithTheirStandardErrors) {
  const std::string folder = MakeTempDir("external_bootstrap");
  WriteSurvey(folder);
  WriteTextFile(folder + "/rents.csv",
                "heading,region,parity,log_se\nrent,A,1.0,0.05\nrent,B,1.25,0.05\n"
                "rent,C,0.9,0.05\nrent,D,1.1,0.05\n");
  Computed run;
  LoadAndCompute(folder, "  external_parities: rents.csv\n" + std::string(kTree), &run);
  SensitivityOptions options;
  options.run_leave_one_out = options.run_coverage = options.run_methods = false;
  options.replicates = 400;
  SensitivityResult one, two;
  SensitivitySummary summary;
  options.num_threads = 1;
  ASSERT_TRUE(RunSensitivity(run.survey, ComputeOptions::FromConfig(run.config), options, &one,
                             &summary))
      << summary.message;
  options.num_threads = 2;
  ASSERT_TRUE(RunSensitivity(run.survey, ComputeOptions::FromConfig(run.config), options, &two,
                             &summary));
  EXPECT_EQ(BootstrapCsv(run.survey, one), BootstrapCsv(run.survey, two));
  // Four independent draws with sd 0.05, normalised to their mean: the
  // sd of x_r - mean(x) is 0.05 sqrt(1 - 1/4) = 0.0433 (computed here);
  // 400 replicates estimate it to about 3.5 % (sd / sqrt(2 B)).
  const int rent = run.survey.classification.FindNode("rent");
  for (int r = 0; r < 4; ++r) {
    EXPECT_NEAR(one.boot_log_se(rent, r), 0.05 * std::sqrt(0.75), 0.15 * 0.0433) << r;
  }
}

// Rule `external` fills D's rent from the file linked over C (rent_D =
// rent_C x 1.1 / 0.9); each heading has one item, so the quotes add no
// variance and all of it comes from drawing the file's ln parities of C and
// D (sd 0.1 each): ln rent_D - ln rent_C varies with sd 0.1 sqrt 2, and after
// normalising to the mean of the four regions D's ln parity moves by 3/4 of
// that and A's by 1/4 (computed here: 0.1061 and 0.0354). Without the draw
// both would be 0.
TEST(ExternalParities, BootstrapDrawsTheParitiesThatRuleExternalFills) {
  const std::string folder = MakeTempDir("external_rule_bootstrap");
  WriteSurvey(folder);
  WriteTextFile(folder + "/rents.csv",
                "heading,region,parity,log_se\nrent,C,0.9,0.1\nrent,D,1.1,0.1\n");
  Computed run;
  LoadAndCompute(folder,
                 "  external_parities: rents.csv\n" + std::string(kTree) +
                     "missing_parities:\n  headings: {rent: external}\n",
                 &run);
  SensitivityOptions options;
  options.run_leave_one_out = options.run_coverage = options.run_methods = false;
  options.replicates = 400;
  SensitivityResult result;
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(run.survey, ComputeOptions::FromConfig(run.config), options, &result,
                             &summary))
      << summary.message;
  const int rent = run.survey.classification.FindNode("rent");
  const double sd = 0.1 * std::sqrt(2.0);
  // 400 replicates estimate a standard deviation to about 3.5 % (sd / sqrt(2 B)).
  EXPECT_NEAR(result.boot_log_se(rent, Region(run, "D")), 0.75 * sd, 0.15 * 0.75 * sd);
  EXPECT_NEAR(result.boot_log_se(rent, Region(run, "A")), 0.25 * sd, 0.15 * 0.25 * sd);
}

TEST(Imputation, BootstrapReplicateThatLosesAHeadingAppliesTheRule) {
  // Rent gets a second item priced in A, B, C only; D prices the first. A
  // replicate that draws the second item twice leaves D without rent
  // (probability 1/4 each): the parent rule fills it and counts it.
  const std::string folder = MakeTempDir("imputation_bootstrap");
  WriteSurvey(folder);
  WriteTextFile(folder + "/prices.csv", testing::ReadTextFile(folder + "/prices.csv") +
                                            "A,rent2_item,480,rent\nB,rent2_item,590,rent\n"
                                            "C,rent2_item,470,rent\nD,rent_item,520,rent\n");
  SensitivityOptions options;
  options.run_leave_one_out = options.run_coverage = options.run_methods = false;
  options.replicates = 40;
  for (const char* rule : {"leave", "parent"}) {
    Computed run;
    LoadAndCompute(folder, std::string(kTree) + "missing_parities: {default: " + rule + "}\n",
                   &run);
    SensitivityResult result;
    SensitivitySummary summary;
    ASSERT_TRUE(RunSensitivity(run.survey, ComputeOptions::FromConfig(run.config), options,
                               &result, &summary))
        << summary.message;
    SCOPED_TRACE(rule);
    if (std::string(rule) == "leave") {
      EXPECT_GT(summary.num_replicates_region_lost, 0);
      EXPECT_EQ(summary.num_replicates_imputed, 0);
    } else {
      EXPECT_EQ(summary.num_replicates_region_lost, 0);
      EXPECT_GT(summary.num_replicates_imputed, 0);
    }
  }
}

TEST(ExternalParities, BadRowsAreRejectedWithTheirPlace) {
  const std::string folder = MakeTempDir("external_bad");
  WriteSurvey(folder);
  WriteTextFile(folder + "/rents.csv",
                "heading,region,parity,log_se\nrent,A,-1,\nrent,Z,1.0,\nrents,B,1.0,\n"
                "rent,C,abc,\nrent,D,1.1,-0.2\nrent,B,1.2,\nrent,B,1.3,\nrent,C,1e101,\n"
                "rent,C,1e-101,\nrent,D,1.1,2.26\n");
  RunConfig config;
  Survey survey;
  LoadSummary load;
  EXPECT_FALSE(Load(folder, "  external_parities: rents.csv\n" + std::string(kTree), &config,
                    &survey, &load));
  const std::string file = folder + "/rents.csv";
  std::vector<std::string> reasons;
  for (const RejectedRow& row : load.rejected_rows) reasons.push_back(row.reason);
  EXPECT_EQ(reasons, (std::vector<std::string>{
                         file + ":2:3: parity '-1' is not positive",
                         file + ":3:2: region 'Z' has no price or expenditure row",
                         file + ":4:1: heading 'rents' is not in the classification",
                         file + ":5:3: parity 'abc' is not a number",
                         file + ":6:4: log_se '-0.2' is negative",
                         file + ":8:1: duplicate row for heading 'rent' and region 'B' (first at "
                                "line 7)",
                         // Beyond what sums and ratios of them hold (src/base/magnitude.h).
                         file + ":9:3: parity '1e101' is beyond 1e30, where ratios between "
                                "regions and their products overflow or lose digits; a heading's "
                                "parities may be on any scale, so rescale them",
                         file + ":10:3: parity '1e-101' is positive but nearer 0 than 1e-30, "
                                "where ratios between regions and their products overflow or lose "
                                "digits; a heading's parities may be on any scale, so rescale them",
                         // A log_se of 1000 made the bootstrap's draws overflow; 2.26 is
                         // most likely 2.26 %.
                         file + ":11:4: log_se '2.26' is above 1 (a standard error of ln parity; "
                                "0.05 is about 5 %): is it a percentage?",
                     }));
}

TEST(Imputation, PartialBasketWarningSaysHowMuchRestsOnImputedParities) {
  const std::string folder = MakeTempDir("imputation_partial");
  WriteSurvey(folder);
  Computed run;
  LoadAndCompute(folder, std::string(kTree) + "missing_parities: {default: parent}\n", &run);
  const PlausibilityResult checks = CheckPlausibility(run.survey, run.result, run.config);
  std::vector<std::string> texts;
  for (const RunWarning& w : checks.warnings) {
    if (w.kind == "partial-basket") texts.push_back(w.text);
  }
  // D spends 680 in all, 510 on housing, 300 of it on rent (imputed):
  // 380/680 = 55.9 % and 210/510 = 41.2 % rest on its own parities.
  ASSERT_EQ(texts.size(), 2u);
  EXPECT_EQ(texts[0],
            "aggregate 'all', region 'D': only 55.9 % of its spending rests on headings it has "
            "parities for (checks.min_basket_share 90.0 %); 44.1 % rests on imputed parities: rent "
            "44.1 %");
  EXPECT_EQ(texts[1],
            "aggregate 'housing', region 'D': only 41.2 % of its spending rests on headings it has "
            "parities for (checks.min_basket_share 90.0 %); 58.8 % rests on imputed parities: rent "
            "58.8 %");
  EXPECT_DOUBLE_EQ(checks.basket_share(run.survey.classification.FindNode("rent"), 3), 0.0);
}

TEST(Imputation, PartialBasketWarningNamesAGroupAsAGroup) {
  const std::string folder = MakeTempDir("imputation_partial_group");
  WriteSurvey(folder);
  Computed run;
  LoadAndCompute(folder,
                 std::string(kTree) +
                     "groups:\n  dwelling: {of: [rent, water]}\nmissing_parities: {default: parent}\n",
                 &run);
  const PlausibilityResult checks = CheckPlausibility(run.survey, run.result, run.config);
  std::vector<std::string> texts;
  for (const RunWarning& w : checks.warnings) {
    if (w.kind == "partial-basket" && w.text.find("dwelling") != std::string::npos)
      texts.push_back(w.text);
  }
  ASSERT_EQ(texts.size(), 1u);
  EXPECT_EQ(texts[0].substr(0, 34), "group 'dwelling', region 'D': only") << texts[0];
}

TEST(ExternalParities, RaiseNoThinEvidenceWarningForParitiesWithoutQuotes) {
  // Rent parities from the file rest on no quotes of this survey, nor does
  // D's rent imputed by rule parent; the thin-evidence check is about quotes,
  // so neither may raise it (both did, once per region, before the check knew
  // the parity's source).
  const std::string folder = MakeTempDir("external_thin");
  WriteSurvey(folder);
  WriteTextFile(folder + "/rents.csv",
                "heading,region,parity\nrent,A,1.0\nrent,B,1.25\nrent,C,0.9\nrent,D,1.1\n");
  Computed run;
  LoadAndCompute(folder, "  external_parities: rents.csv\n" + std::string(kTree), &run);
  const PlausibilityResult checks = CheckPlausibility(run.survey, run.result, run.config);
  for (const RunWarning& w : checks.warnings) {
    EXPECT_FALSE(w.kind == "thin-evidence" && w.node == "rent") << w.text;
  }
  // The same survey without the file, D's rent imputed: rent from one quote
  // is thin in A, B and C, and D is not named.
  Computed priced;
  LoadAndCompute(folder, std::string(kTree) + "missing_parities: {default: parent}\n", &priced);
  ASSERT_EQ(priced.result.heading_source(3, 2), static_cast<int>(ParitySource::kImputed));
  const PlausibilityResult priced_checks =
      CheckPlausibility(priced.survey, priced.result, priced.config);
  std::vector<std::string> thin_regions;
  for (const RunWarning& w : priced_checks.warnings) {
    if (w.kind == "thin-evidence" && w.node == "rent") thin_regions.push_back(w.region);
  }
  EXPECT_EQ(thin_regions, (std::vector<std::string>{"A", "B", "C"}));
}

TEST(ExternalParities, SourceColumnsSayWhatEachAggregateRestsOn) {
  const std::string folder = MakeTempDir("imputation_columns");
  WriteSurvey(folder);
  Computed run;
  LoadAndCompute(folder, std::string(kTree) + "missing_parities: {default: parent}\n", &run);
  const std::string csv = ParitiesCsv(run.survey, run.result, nullptr);
  // D's housing: rent 300 imputed of 300 + 155 + 55 = 510 -> 300/510.
  EXPECT_NE(csv.find("rent,heading,D,"), std::string::npos);
  const size_t housing = csv.find("\nhousing,aggregate,D,");
  ASSERT_NE(housing, std::string::npos);
  const std::string line = csv.substr(housing + 1, csv.find('\n', housing + 1) - housing - 1);
  const std::string tail = line.substr(line.find(",mixed,"));
  // The label column follows the shares (empty here).
  EXPECT_EQ(tail, ",mixed,0.4117647058823529,0.5882352941176471,0,");
  EXPECT_NE(csv.find("num_headings,source,share_priced,share_imputed,share_external"),
            std::string::npos);
}

}  // namespace
}  // namespace paritas
