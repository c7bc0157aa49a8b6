// Sensitivity runs: options and messages, the percentile definition, the
// Student t quantile and the expanded interval's levels and degrees of
// freedom, the weighted Jevons matrix, leave-one-out against a recomputation without the
// item, the jackknife of a mean, bootstrap determinism and interval coverage
// on synthetic surveys with a known truth, the coverage curve, method spread
// and the command line.
#include "paritas/uncertainty/sensitivity.h"

#include <atomic>
#include <cctype>
#include <cmath>
#include <cstdio>
#include <filesystem>
#include <limits>
#include <map>
#include <set>
#include <sstream>
#include <utility>

#include <gtest/gtest.h>

#include "paritas/aggregation/bilateral_matrix.h"
#include "paritas/base/text.h"
#include "paritas/compute/compute.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "synthetic_survey.h"
#include "uncertainty/sensitivity_parts.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::CountOf;
using testing::IsClose;
using testing::MakeTempDir;
using testing::ReadTextFile;
using testing::RunCli;
using testing::WriteTextFile;

synthetic::SyntheticOptions SmallOptions(uint64_t seed) {
  synthetic::SyntheticOptions options;
  options.num_regions = 10;
  options.num_headings = 4;
  options.items_per_heading = 6;
  options.coverage = 0.8;
  options.quotes_per_cell = 2;
  options.noise_sd = 0.08;
  options.num_groups = 2;
  options.seed = seed;
  return options;
}

// Writes the survey, returns the folder holding config.yaml.
std::string WriteSynthetic(const synthetic::SyntheticSurvey& truth, const std::string& name) {
  const std::string folder = MakeTempDir(name);
  std::string error;
  EXPECT_TRUE(synthetic::WriteSurvey(truth, folder, &error)) << error;
  return folder;
}

Survey LoadFolder(const std::string& folder) {
  RunConfig config;
  std::string error;
  EXPECT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  Survey survey;
  LoadSummary summary;
  EXPECT_TRUE(LoadSurvey(config, LoadOptions(), &survey, &summary)) << summary.message;
  return survey;
}

Survey LoadSynthetic(const synthetic::SyntheticOptions& options, const std::string& name) {
  return LoadFolder(WriteSynthetic(synthetic::Generate(options), name));
}

SensitivityOptions OnlyParts(bool bootstrap, bool leave_one_out, bool coverage, bool methods) {
  SensitivityOptions options;
  options.run_bootstrap = bootstrap;
  options.run_leave_one_out = leave_one_out;
  options.run_coverage = coverage;
  options.run_methods = methods;
  return options;
}

TEST(SensitivityOptions, DefaultsAreValid) {
  std::string error;
  EXPECT_TRUE(SensitivityOptions().IsValid(&error)) << error;
}

TEST(SensitivityOptions, BadValuesGetClearMessages) {
  auto message = [](auto change) {
    SensitivityOptions options;
    change(&options);
    std::string error;
    EXPECT_FALSE(options.IsValid(&error));
    return error;
  };
  EXPECT_EQ(message([](SensitivityOptions* o) { o->replicates = 0; }),
            "replicates must be a whole number from 2 to 100000, found 0");
  EXPECT_EQ(message([](SensitivityOptions* o) { o->level = 1.0; }),
            "level must be a share from 0.01 to 0.999, e.g. 0.95, found 1");
  EXPECT_EQ(message([](SensitivityOptions* o) { o->coverage_levels = {0.5, 1.5}; }),
            "coverage levels must be shares of items in (0, 1], i.e. percentages above 0 and up to 100, "
            "found 150.0000 %");
  EXPECT_EQ(message([](SensitivityOptions* o) { o->coverage_levels = {0.5, 0.5}; }),
            "coverage level 50.0000 % is given twice");
  EXPECT_EQ(message([](SensitivityOptions* o) { o->coverage_repetitions = 1; }),
            "repetitions must be a whole number from 2 to 10000, found 1");
  EXPECT_EQ(message([](SensitivityOptions* o) { o->num_threads = -1; }),
            "threads must be 0 (all cores) or more, found -1");
  EXPECT_EQ(message([](SensitivityOptions* o) {
              o->run_bootstrap = o->run_leave_one_out = o->run_coverage = o->run_methods = false;
            }),
            "no part to run; parts must name at least one of: bootstrap, leave-one-out, coverage, methods");
}

// At 1 - 2^-53 the upper level (1 + level) / 2 rounded to 1 and both ends
// of every interval became the largest replicate; 99.9 % is the limit.
TEST(SensitivityOptions, LevelAbove99Point9PercentIsRejected) {
  for (const auto& [level, found] : {std::pair{0.9999999999999999, "0.9999999999999999"},
                                     {0.9995, "0.9995"}, {0.9990000000000001, "0.9990000000000001"},
                                     {0.0, "0"}, {0.009, "0.009"}, {1e-320, "1e-320"}}) {
    SensitivityOptions options;
    options.level = level;
    std::string error;
    EXPECT_FALSE(options.IsValid(&error)) << found;
    EXPECT_EQ(error, std::string("level must be a share from 0.01 to 0.999, e.g. 0.95, found ") +
                         found);
  }
  // 99.9 % is read as exactly 0.999 (99.9 / 100 lands one unit in the
  // last place above it); there the expanded interval's levels are still
  // numbers.
  SensitivityOptions widest;
  widest.level = PercentToShare(99.9);
  EXPECT_EQ(widest.level, 0.999);
  EXPECT_EQ(PercentToShare(95.0), 0.95);
  EXPECT_EQ(PercentToShare(1.5), 0.015);
  // Labels print the level as given, where a whole-number format showed
  // 99.9 % as "100 %".
  EXPECT_EQ(FormatShareAsPercent(0.999), "99.9");
  EXPECT_EQ(FormatShareAsPercent(0.95), "95");
  EXPECT_EQ(FormatShareAsPercent(0.015), "1.5");
  std::string error;
  EXPECT_TRUE(widest.IsValid(&error)) << error;
  for (double df : {1.0, 2.0, 30.0, std::nan("")}) {
    const double p = ExpandedLowerLevel(widest.level, df, std::sqrt(2.0));
    EXPECT_TRUE(p >= 0.0 && p <= 0.0005) << df << ": " << p;
  }
}

TEST(SensitivityOptions, UnknownPartIsNamedWithASuggestion) {
  SensitivityOptions options;
  std::string error;
  EXPECT_FALSE(SetSensitivityParts({"bootstrp"}, &options, &error));
  EXPECT_EQ(error, "part 'bootstrp' is not one of: bootstrap, leave-one-out, coverage, methods; did you mean "
                   "'bootstrap'?");
  EXPECT_TRUE(SetSensitivityParts({"Coverage", "methods"}, &options, &error));
  EXPECT_FALSE(options.run_bootstrap);
  EXPECT_TRUE(options.run_coverage);
  EXPECT_TRUE(options.run_methods);
}

TEST(PercentileType7, MatchesNumpyPercentile) {
  // Values from numpy.percentile (linear, its default), run with Debian's
  // numpy 1.24: [1,2,3,4] at 25 -> 1.75; 1..10 at 95 -> 9.55;
  // [3,1,7.5,2,10] at 2.5, 50, 97.5 -> 1.1, 3, 9.75.
  EXPECT_DOUBLE_EQ(PercentileType7({1, 2, 3, 4}, 0.25), 1.75);
  EXPECT_DOUBLE_EQ(PercentileType7({1, 2, 3, 4, 5, 6, 7, 8, 9, 10}, 0.95), 9.55);
  const std::vector<double> sorted = {1.0, 2.0, 3.0, 7.5, 10.0};
  EXPECT_DOUBLE_EQ(PercentileType7(sorted, 0.025), 1.1);
  EXPECT_DOUBLE_EQ(PercentileType7(sorted, 0.5), 3.0);
  EXPECT_DOUBLE_EQ(PercentileType7(sorted, 0.975), 9.75);
  EXPECT_DOUBLE_EQ(PercentileType7(sorted, 1.0), 10.0);
  EXPECT_DOUBLE_EQ(PercentileType7(sorted, 0.0), 1.0);
}

TEST(PairRatios, IntervalIsTheType7QuantilesOfTheLogDifference) {
  // Hand computation: replicates where both regions have a parity give
  // d = ln P_a - ln P_b = 0.1, 0.2, 0.3, 0.4, 0.5 (the third replicate, NaN for
  // a, is left out). At level 0.5 the type-7 quantiles at 0.25 and 0.75 are
  // h = 4 x 0.25 = 1 -> 0.2 and h = 3 -> 0.4, so the interval is
  // (exp 0.2, exp 0.4), wholly above 1: a is dearer.
  const double nan = std::nan("");
  const std::vector<double> log_b = {0.0, 1.0, 0.0, -1.0, 2.0, 0.5};
  const std::vector<double> log_a = {0.3, 1.1, nan, -0.5, 2.4, 0.7};
  PairRatio pair = PairRatioFromReplicates(log_a.data(), log_b.data(), 6, 0.5, 1.25);
  EXPECT_EQ(pair.num_replicates, 5);
  EXPECT_DOUBLE_EQ(pair.ratio, 1.25);
  EXPECT_NEAR(pair.lower, std::exp(0.2), 1e-15);
  EXPECT_NEAR(pair.upper, std::exp(0.4), 1e-15);
  EXPECT_EQ(pair.verdict, PairVerdict::kDearer);
  EXPECT_TRUE(pair.ExcludesOne());
  // The other way round: (1 / upper, 1 / lower), cheaper.
  pair = PairRatioFromReplicates(log_b.data(), log_a.data(), 6, 0.5, 0.8);
  EXPECT_NEAR(pair.lower, std::exp(-0.4), 1e-15);
  EXPECT_NEAR(pair.upper, std::exp(-0.2), 1e-15);
  EXPECT_EQ(pair.verdict, PairVerdict::kCheaper);
  // d = 0, -0.2, 0, 0.2, 0.1, -0.1 (six replicates) at level 0.9: type-7
  // quantiles at 0.05 (h = 0.25 -> -0.2 + 0.25 x 0.1 = -0.175) and 0.95
  // (h = 4.75 -> 0.1 + 0.75 x 0.1 = 0.175): 1 lies inside.
  const std::vector<double> shifted = {0.0, 0.8, 0.0, -0.8, 2.1, 0.4};
  pair = PairRatioFromReplicates(shifted.data(), log_b.data(), 6, 0.9, 1.0);
  EXPECT_NEAR(pair.lower, std::exp(-0.175), 1e-15);
  EXPECT_NEAR(pair.upper, std::exp(0.175), 1e-15);
  EXPECT_EQ(pair.verdict, PairVerdict::kIndistinguishable);
  EXPECT_FALSE(pair.ExcludesOne());
  // One replicate with both parities: no interval.
  pair = PairRatioFromReplicates(log_a.data(), log_b.data(), 1, 0.95, 1.0);
  EXPECT_EQ(pair.verdict, PairVerdict::kNone);
  EXPECT_TRUE(std::isnan(pair.lower));
}

// Student t quantiles against scipy 1.10.1 (stats.t.ppf, computed here with
// Debian's python3-scipy). scipy's ppf is good to about 1e-11 in p only: at
// df = 1 it gives 12.706204736432095 where the closed form tan(0.475 pi) is
// 12.706204736174704, and at df = 3, p = 0.995 its 5.84090929975643 has
// F(t) = 0.994999999976 by the closed form; so 1e-8 against scipy in t (1e-9
// in p), and 1e-13 against the closed forms of df = 1 (Cauchy, t = tan(pi
// (p - 1/2))), df = 2 (t = (2p - 1) / sqrt(2 p (1 - p))) and df = 3
// (F(t) = 1/2 + (t / (sqrt 3 (1 + t^2 / 3)) + atan(t / sqrt 3)) / pi),
// Student's CDF integrated by hand for those df.
TEST(StudentT, QuantilesMatchScipy) {
  const struct {
    double p, df, t;
  } cases[] = {{0.975, 1, 12.706204736432095},     {0.975, 2, 4.302652729911275},
               {0.975, 5, 2.5705818366147395},     {0.975, 12.5, 2.1691859427099556},
               {0.975, 30, 2.0422724563012373},    {0.995, 3, 5.84090929975643},
               {0.95, 7, 1.894578605061305},       {0.975, 1000, 1.9623390808264074},
               {0.975, 123456.0, 1.9599832002451865}, {0.6, 4, 0.2707222947059493},
               {0.025, 9, -2.262157162740992}};
  for (const auto& c : cases) {
    EXPECT_TRUE(IsClose(StudentTQuantile(c.p, c.df), c.t, 1e-8)) << c.p << " " << c.df;
    EXPECT_NEAR(StudentTCdf(c.t, c.df), c.p, 1e-9) << c.p << " " << c.df;
  }
  for (double p : {0.6, 0.9, 0.975, 0.995, 0.025}) {
    EXPECT_TRUE(IsClose(StudentTQuantile(p, 1), std::tan(M_PI * (p - 0.5)), 1e-13)) << p;
    EXPECT_TRUE(IsClose(StudentTQuantile(p, 2), (2 * p - 1) / std::sqrt(2 * p * (1 - p)), 1e-13))
        << p;
    const double t = StudentTQuantile(p, 1);
    EXPECT_NEAR(StudentTCdf(t, 1), 0.5 + std::atan(t) / M_PI, 1e-15) << p;
    const double t3 = StudentTQuantile(p, 3);
    EXPECT_NEAR(0.5 + (t3 / (std::sqrt(3.0) * (1 + t3 * t3 / 3)) + std::atan(t3 / std::sqrt(3.0))) /
                          M_PI,
                p, 1e-14)
        << p;
  }
  // df = +inf is the normal: scipy's stats.norm.ppf(0.975) = 1.959963984540054.
  EXPECT_TRUE(IsClose(StudentTQuantile(0.975, std::numeric_limits<double>::infinity()),
                      1.959963984540054, 1e-9));
  EXPECT_TRUE(std::isnan(StudentTQuantile(1.0, 5)));
  EXPECT_TRUE(std::isnan(StudentTQuantile(0.5, 0)));
}

// The expanded interval's lower level p = Phi(-k t_(nu, (1 + level) / 2)),
// against scipy 1.10.1 (computed here: stats.norm.cdf(-k * stats.t.ppf(q, nu))).
TEST(ExpandedInterval, LowerLevelsMatchScipyAndFallBackToThePercentileLevel) {
  EXPECT_TRUE(IsClose(ExpandedLowerLevel(0.95, 5, 1.0), 0.0050763917887903165, 1e-9));
  EXPECT_TRUE(IsClose(ExpandedLowerLevel(0.95, 12.5, 1.0), 0.015034284968462425, 1e-9));
  // Plain bootstrap of 9 items at 90 %: k = sqrt(9 / 8), nu = 8.
  EXPECT_TRUE(IsClose(ExpandedLowerLevel(0.90, 8, std::sqrt(9.0 / 8.0)), 0.02428491595757016,
                      1e-9));
  // No t expansion and k = 1: exactly the percentile level.
  EXPECT_EQ(ExpandedLowerLevel(0.95, std::nan(""), 1.0), 0.5 * (1.0 - 0.95));
  EXPECT_EQ(ExpandedLowerLevel(0.95, kIntervalDfCap, 1.0), 0.5 * (1.0 - 0.95));
  EXPECT_EQ(ExpandedLowerLevel(0.90, 0.0, 1.0), 0.5 * (1.0 - 0.90));
}

// Satterthwaite (1946) by hand: terms 0.04 (df 4) and 0.01 (df 9) give
// 0.05^2 / (0.04^2 / 4 + 0.01^2 / 9) = 0.0025 / 0.000411111... = 6.0810810...
// (= 225 / 37); a third term 0.02 of infinite df adds to the numerator only:
// 0.07^2 / 0.000411111... = 441 / 37.
TEST(ExpandedInterval, SatterthwaiteDegreesOfFreedomByHand) {
  const double inf = std::numeric_limits<double>::infinity();
  EXPECT_TRUE(IsClose(SatterthwaiteDf({0.04, 0.01}, {4, 9}), 225.0 / 37.0, 1e-13));
  EXPECT_TRUE(IsClose(SatterthwaiteDf({0.04, 0.01, 0.02}, {4, 9, inf}), 441.0 / 37.0, 1e-13));
  // Zero and NaN terms add nothing.
  EXPECT_TRUE(
      IsClose(SatterthwaiteDf({0.04, 0.0, 0.01, std::nan("")}, {4, 3, 9, 2}), 225.0 / 37.0, 1e-13));
  // One term: its own df.
  EXPECT_DOUBLE_EQ(SatterthwaiteDf({0.3}, {6}), 6.0);
  EXPECT_TRUE(std::isinf(SatterthwaiteDf({0.02}, {inf})));
  EXPECT_TRUE(std::isnan(SatterthwaiteDf({0.0}, {5})));
}

TEST(IntervalKind, NamesReadBackCaseInsensitively) {
  IntervalKind kind = IntervalKind::kPercentile;
  EXPECT_TRUE(FromString(" Expanded", &kind));
  EXPECT_EQ(kind, IntervalKind::kExpanded);
  EXPECT_TRUE(FromString("PERCENTILE", &kind));
  EXPECT_EQ(ToString(kind), "percentile");
  EXPECT_EQ(ToString(IntervalKind::kExpanded), "expanded");
  EXPECT_FALSE(FromString("wide", &kind));
  EXPECT_EQ(SensitivityOptions().interval, IntervalKind::kExpanded);
}

// A pair takes the smaller nu (none counting as infinite) and the larger k;
// at level 0.5 with nu = 4 the levels are p = Phi(-t_(4, 0.75)) and 1 - p
// (computed here with scipy 1.10.1: norm.cdf(-t.ppf(0.75, 4)) =
// 0.2294385638765593), so on the sorted d = 0.1 ... 0.5 the type-7 lower end
// is at h = 4 p < 1: 0.1 + 0.1 x 4 p, and the upper at h = 4 - 4 p:
// 0.4 + 0.1 x (1 - 4 p) = 0.5 - 0.1 x 4 p.
TEST(PairRatios, ExpansionTakesTheSmallerDegreesOfFreedomAndTheLargerScale) {
  const double nan = std::nan("");
  double df = 0.0, scale = 0.0;
  PairExpansion(6.0, 1.0, 4.0, 1.1, &df, &scale);
  EXPECT_EQ(df, 4.0);
  EXPECT_EQ(scale, 1.1);
  PairExpansion(nan, 1.0, 9.5, 1.0, &df, &scale);
  EXPECT_EQ(df, 9.5);
  PairExpansion(nan, 1.0, nan, 1.0, &df, &scale);
  EXPECT_TRUE(std::isnan(df));
  const std::vector<double> log_b = {0.0, 0.0, 0.0, 0.0, 0.0};
  const std::vector<double> log_a = {0.3, 0.1, 0.5, 0.2, 0.4};
  const double p = ExpandedLowerLevel(0.5, 4.0, 1.0);
  EXPECT_NEAR(p, 0.2294385638765593, 1e-9);
  const PairRatio pair = PairRatioFromReplicates(log_a.data(), log_b.data(), 5, 0.5, 1.0, 4.0);
  EXPECT_NEAR(pair.lower, std::exp(0.1 + 0.1 * 4 * p), 1e-15);
  EXPECT_NEAR(pair.upper, std::exp(0.5 - 0.1 * 4 * p), 1e-15);
  EXPECT_EQ(pair.interval_df, 4.0);
}

TEST(PairRatios, VerdictNamesReadBackCaseInsensitively) {
  for (PairVerdict v : {PairVerdict::kNone, PairVerdict::kDearer, PairVerdict::kCheaper,
                        PairVerdict::kIndistinguishable}) {
    PairVerdict read = PairVerdict::kNone;
    std::string upper = ToString(v);
    for (char& ch : upper) ch = static_cast<char>(std::toupper(static_cast<unsigned char>(ch)));
    ASSERT_TRUE(FromString(upper, &read)) << upper;
    EXPECT_EQ(read, v);
  }
  PairVerdict read = PairVerdict::kNone;
  EXPECT_FALSE(FromString("dearest", &read));
}

TEST(AllPairsJevonsWeighted, WholeWeightsEqualRepeatedColumnsAndZeroDropsOne) {
  // A weight of k is the item priced k times: compare with the unweighted
  // matrix on arrays where the column is repeated (or removed).
  Eigen::MatrixXd log_price(3, 3), present(3, 3);
  log_price << 0.1, 0.5, 2.0, 0.3, 0.2, 2.4, 0.0, 0.9, 1.7;
  present << 1, 1, 1, 1, 0, 1, 1, 1, 0;
  Eigen::VectorXd weight(3);
  weight << 2, 1, 0;
  Eigen::MatrixXd repeated_price(3, 3), repeated_present(3, 3);
  repeated_price << log_price.col(0), log_price.col(0), log_price.col(1);
  repeated_present << present.col(0), present.col(0), present.col(1);
  const Eigen::MatrixXd weighted = AllPairsJevonsWeighted(log_price, present, weight);
  const Eigen::MatrixXd expected = AllPairsJevons(repeated_price, repeated_present, nullptr);
  for (int a = 0; a < 3; ++a) {
    for (int b = 0; b < 3; ++b) PARITAS_EXPECT_CLOSE(weighted(a, b), expected(a, b), 1e-14);
  }
  const Eigen::MatrixXd unit = AllPairsJevonsWeighted(log_price, present, Eigen::VectorXd::Ones(3));
  const Eigen::MatrixXd plain = AllPairsJevons(log_price, present, nullptr);
  for (int a = 0; a < 3; ++a) {
    for (int b = 0; b < 3; ++b) PARITAS_EXPECT_CLOSE(unit(a, b), plain(a, b), 1e-14);
  }
}

class LeaveOneOut : public ::testing::TestWithParam<std::string> {};

TEST_P(LeaveOneOut, DroppingAnItemEqualsRecomputingWithoutIt) {
  // The weight-0 route must give what a survey without the item's rows gives.
  const synthetic::SyntheticSurvey truth = synthetic::Generate(SmallOptions(3));
  const std::string folder = WriteSynthetic(truth, "loo-full");
  const Survey survey = LoadFolder(folder);
  const std::string dropped = truth.items[8];  // heading 1, not its anchor
  std::istringstream prices(ReadTextFile(folder + "/prices.csv"));
  std::string line, kept;
  while (std::getline(prices, line)) {
    if (line.find("," + dropped + ",") == std::string::npos) kept += line + "\n";
  }
  WriteTextFile(folder + "/prices.csv", kept);
  const Survey reduced = LoadFolder(folder);

  for (const char* aggregation : {"geks-fisher", "geks-tornqvist"}) {
    ComputeOptions options;
    options.elementary.method = GetParam();
    options.aggregation = aggregation;
    options.reference.kind = ReferenceKind::kWeightedMean;
    ParityResult expected;
    ComputeSummary summary;
    ASSERT_TRUE(ComputeParities(reduced, options, &expected, &summary)) << summary.message;
    std::vector<double> weight(survey.num_items(), 1.0);
    weight[survey.items.Find(dropped)] = 0.0;
    Eigen::MatrixXd log_parity;
    std::string error;
    ASSERT_TRUE(ReplicateParities(survey, options, weight, &log_parity, nullptr, &error)) << error;
    ASSERT_EQ(log_parity.rows(), static_cast<Eigen::Index>(expected.nodes.size()));
    for (size_t n = 0; n < expected.nodes.size(); ++n) {
      for (int r = 0; r < survey.num_regions(); ++r) {
        PARITAS_EXPECT_CLOSE(100.0 * std::exp(log_parity(n, r)), expected.nodes[n].parity(r), 1e-10);
      }
    }
  }
}

INSTANTIATE_TEST_SUITE_P(Methods, LeaveOneOut,
                         ::testing::Values("cpd", "jevons-geks",
                                           "robust-cpd"),
                         [](const ::testing::TestParamInfo<std::string>& param_info) {
                           std::string name = param_info.param;
                           name.erase(std::remove(name.begin(), name.end(), '-'), name.end());
                           return name;
                         });

TEST(LeaveOneOut, LargestChangeIsTheLargestOverItemsDroppedOneByOne) {
  const Survey survey = LoadSynthetic(SmallOptions(5), "loo-largest");
  const ComputeOptions compute;
  SensitivityResult result;
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(survey, compute, OnlyParts(false, true, false, false), &result, &summary))
      << summary.message;
  std::vector<double> ones(survey.num_items(), 1.0);
  Eigen::MatrixXd base, without;
  std::string error;
  ASSERT_TRUE(ReplicateParities(survey, compute, ones, &base, nullptr, &error));
  Eigen::VectorXd largest = Eigen::VectorXd::Zero(survey.num_regions());
  for (int i = 0; i < survey.num_items(); ++i) {
    ones[i] = 0.0;
    ASSERT_TRUE(ReplicateParities(survey, compute, ones, &without, nullptr, &error));
    ones[i] = 1.0;
    for (int r = 0; r < survey.num_regions(); ++r) {
      const double change = without(0, r) - base(0, r);
      if (std::abs(change) > std::abs(largest(r))) largest(r) = change;
    }
  }
  for (int r = 0; r < survey.num_regions(); ++r) {
    PARITAS_EXPECT_CLOSE(result.loo_item_log_change(0, r), largest(r), 1e-9);
    EXPECT_GE(result.loo_item(0, r), 0);
  }
  EXPECT_EQ(summary.num_items_dropped, survey.num_items());
  EXPECT_EQ(summary.num_headings_dropped, survey.num_headings());
}

// The survey with only the quotes of (region, item) for which `keep` holds.
template <typename Keep>
synthetic::SyntheticSurvey KeepQuotes(const synthetic::SyntheticSurvey& truth, Keep keep) {
  synthetic::SyntheticSurvey kept = truth;
  kept.quote_region.clear(), kept.quote_item.clear(), kept.quote_price.clear();
  kept.quote_representative.clear();
  for (size_t q = 0; q < truth.quote_region.size(); ++q) {
    if (!keep(truth.quote_region[q], truth.quote_item[q])) continue;
    kept.quote_region.push_back(truth.quote_region[q]);
    kept.quote_item.push_back(truth.quote_item[q]);
    kept.quote_price.push_back(truth.quote_price[q]);
    kept.quote_representative.push_back(truth.quote_representative[q]);
  }
  return kept;
}

// The leave-one-out part alone, and the full sample's parities by
// ReplicateParities (every item weighing 1).
void RunLeaveOneOutAndFullSample(const Survey& survey, const ComputeOptions& compute, SensitivityResult* result,
                                 Eigen::MatrixXd* base) {
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(survey, compute, OnlyParts(false, true, false, false), result, &summary))
      << summary.message;
  const std::vector<double> weight(survey.num_items(), 1.0);
  std::string error;
  ASSERT_TRUE(ReplicateParities(survey, compute, weight, base, nullptr, &error)) << error;
}

// Leave-one-out is defined as the run without the item (ReplicateParities
// with its weight 0, the route DroppingAnItemEqualsRecomputingWithoutIt ties
// to compute): the same missing_parities rule applies when a region loses
// its only item of a heading. The stratified delete-one jackknife variance
// is sum over headings of (m - 1)/m sum_i (d_i - mean d)^2 (Efron and
// Tibshirani 1993, eq. 11.5, within each heading), computed here from the
// runs without each item; a heading counts for a node that holds it or that
// one of its items moved, and the error is NaN where no such heading has
// two changes.
void ExpectLeaveOneOutEqualsRunsWithoutEachItem(const Survey& survey, const ComputeOptions& compute,
                                                int* compared, int* parities_lost) {
  SensitivityResult result;
  Eigen::MatrixXd base, without;
  RunLeaveOneOutAndFullSample(survey, compute, &result, &base);
  std::vector<double> weight(survey.num_items(), 1.0);
  std::string error;
  const Eigen::Index num_nodes = base.rows(), num_regions = base.cols();
  std::vector<int> item_num_cells(survey.num_items(), 0);
  for (int32_t i : survey.cells.item) ++item_num_cells[i];
  const double nan = std::numeric_limits<double>::quiet_NaN();
  Eigen::MatrixXd largest = Eigen::MatrixXd::Constant(num_nodes, num_regions, nan);
  Eigen::MatrixXd variance = Eigen::MatrixXd::Constant(num_nodes, num_regions, nan);
  const auto& nodes = survey.classification.nodes();
  for (int h = 0; h < survey.num_headings(); ++h) {
    Eigen::MatrixXd sum = Eigen::MatrixXd::Zero(num_nodes, num_regions), sum_sq = sum;
    Eigen::MatrixXi count = Eigen::MatrixXi::Zero(num_nodes, num_regions);
    std::vector<uint8_t> counts_for(num_nodes, 0);
    for (Eigen::Index n = 0; n < num_nodes; ++n) {
      counts_for[n] = std::count(nodes[n].headings.begin(), nodes[n].headings.end(), h) > 0;
    }
    for (int i = survey.heading_range[h].item_begin; i < survey.heading_range[h].item_end; ++i) {
      if (item_num_cells[i] == 0) continue;
      weight[i] = 0.0;
      ASSERT_TRUE(ReplicateParities(survey, compute, weight, &without, nullptr, &error)) << error;
      weight[i] = 1.0;
      for (Eigen::Index n = 0; n < num_nodes; ++n) {
        for (Eigen::Index r = 0; r < num_regions; ++r) {
          if (!std::isfinite(base(n, r))) continue;
          const double d = without(n, r) - base(n, r);
          if (!std::isfinite(d)) {
            ++*parities_lost;
            continue;
          }
          if (std::isnan(largest(n, r)) || std::abs(d) > std::abs(largest(n, r))) largest(n, r) = d;
          sum(n, r) += d;
          sum_sq(n, r) += d * d;
          ++count(n, r);
          counts_for[n] = counts_for[n] || d != 0.0;
        }
      }
    }
    for (Eigen::Index n = 0; n < num_nodes; ++n) {
      for (Eigen::Index r = 0; r < num_regions; ++r) {
        const int m = count(n, r);
        if (m < 2 || !counts_for[n]) continue;
        if (std::isnan(variance(n, r))) variance(n, r) = 0.0;
        variance(n, r) += (m - 1.0) / m * std::max(0.0, sum_sq(n, r) - sum(n, r) * sum(n, r) / m);
      }
    }
  }
  for (Eigen::Index n = 0; n < num_nodes; ++n) {
    for (Eigen::Index r = 0; r < num_regions; ++r) {
      if (!std::isfinite(base(n, r))) continue;
      const std::string where = survey.classification.nodes()[n].code + " region " + std::to_string(r);
      PARITAS_EXPECT_CLOSE(result.loo_item_log_change(n, r), largest(n, r), 1e-9) << where;
      PARITAS_EXPECT_CLOSE(result.jackknife_log_se(n, r), std::sqrt(variance(n, r)), 1e-9) << where;
      ++*compared;
    }
  }
}

// Dropping a heading is defined as the run without it: its items weigh 0
// and its own rule is `leave` (a dropped heading is not filled), so the
// headings whose fills rest on it (like:, or a parent aggregate holding it)
// are filled again without it. Compares the largest change over the
// dropped headings, aggregates of two or more headings only.
void ExpectHeadingDropsEqualRunsWithoutEachHeading(const Survey& survey, const ComputeOptions& compute,
                                                   int* compared) {
  SensitivityResult result;
  Eigen::MatrixXd base, without;
  RunLeaveOneOutAndFullSample(survey, compute, &result, &base);
  std::vector<double> weight(survey.num_items(), 1.0);
  std::string error;
  const auto& nodes = survey.classification.nodes();
  const Eigen::Index num_nodes = base.rows(), num_regions = base.cols();
  const double nan = std::numeric_limits<double>::quiet_NaN();
  Eigen::MatrixXd largest = Eigen::MatrixXd::Constant(num_nodes, num_regions, nan);
  for (int h = 0; h < survey.num_headings(); ++h) {
    const int leaf = survey.classification.FindNode(survey.heading_codes[h]);
    bool in_aggregate = false;
    for (Eigen::Index n = 0; n < num_nodes; ++n) {
      const auto& held = nodes[n].headings;
      in_aggregate = in_aggregate || (held.size() >= 2 && std::count(held.begin(), held.end(), h) > 0);
    }
    if (!in_aggregate || !base.row(leaf).array().isFinite().any()) continue;
    ComputeOptions dropped = compute;
    auto& rules = dropped.missing_parities.headings;
    std::erase_if(rules, [&](const auto& rule) { return rule.first == survey.heading_codes[h]; });
    rules.emplace_back(survey.heading_codes[h], "leave");
    for (int i = survey.heading_range[h].item_begin; i < survey.heading_range[h].item_end; ++i) weight[i] = 0.0;
    ASSERT_TRUE(ReplicateParities(survey, dropped, weight, &without, nullptr, &error)) << error;
    for (int i = survey.heading_range[h].item_begin; i < survey.heading_range[h].item_end; ++i) weight[i] = 1.0;
    for (Eigen::Index n = 0; n < num_nodes; ++n) {
      if (nodes[n].headings.size() < 2) continue;
      for (Eigen::Index r = 0; r < num_regions; ++r) {
        const double d = without(n, r) - base(n, r);
        if (!std::isfinite(base(n, r)) || !std::isfinite(d)) continue;
        if (std::isnan(largest(n, r)) || std::abs(d) > std::abs(largest(n, r))) largest(n, r) = d;
      }
    }
  }
  for (Eigen::Index n = 0; n < num_nodes; ++n) {
    if (nodes[n].headings.size() < 2) continue;
    for (Eigen::Index r = 0; r < num_regions; ++r) {
      if (!std::isfinite(largest(n, r))) continue;
      const std::string where = nodes[n].code + " region " + std::to_string(r);
      PARITAS_EXPECT_CLOSE(result.loo_heading_log_change(n, r), largest(n, r), 1e-9) << where;
      ++*compared;
    }
  }
}

// Under each rule, with parities the full sample fills.
class LeaveOneOutRules : public ::testing::TestWithParam<std::string> {};

TEST_P(LeaveOneOutRules, ChangesAndJackknifeEqualRunsWithoutEachItemOrHeading) {
  synthetic::SyntheticOptions options = SmallOptions(11);
  options.num_regions = 12;
  options.items_per_heading = 5;
  options.coverage = 0.35;  // many regions price one or two items of a heading
  synthetic::SyntheticSurvey truth = synthetic::Generate(options);
  // Region 1 prices nothing in heading 0 and region 2 nothing in heading 2
  // (headings 0 and 1 form one group, 2 and 3 the other), so that the full
  // sample has parities a rule fills, resting on other headings' items.
  const synthetic::SyntheticSurvey holed = KeepQuotes(truth, [&](int r, int i) {
    const int h = truth.item_heading[i];
    return !((r == 1 && h == 0) || (r == 2 && h == 2));
  });
  const Survey survey = LoadFolder(WriteSynthetic(holed, "loo-rules"));
  // Under like:, heading 0 rests on the heading of the other group where
  // region 1 prices more items (a region pricing only the anchor keeps its
  // parity whatever item goes, and so would its fill).
  auto items_of_region_1 = [&](int h) {
    std::set<int> items;
    for (size_t q = 0; q < holed.quote_region.size(); ++q) {
      if (holed.quote_region[q] == 1 && truth.item_heading[holed.quote_item[q]] == h) {
        items.insert(holed.quote_item[q]);
      }
    }
    return static_cast<int>(items.size());
  };
  const int like_source = items_of_region_1(2) >= items_of_region_1(3) ? 2 : 3;
  ASSERT_GE(items_of_region_1(like_source), 2);
  ComputeOptions compute;
  if (GetParam() == "like") {
    // Each filled heading rests on a heading of the other group.
    compute.missing_parities.headings = {{truth.headings[0], "like:" + truth.headings[like_source]},
                                         {truth.headings[2], "like:" + truth.headings[1]}};
  } else {
    compute.missing_parities.default_rule = GetParam();
  }
  int compared = 0, parities_lost = 0, headings_compared = 0;
  ExpectLeaveOneOutEqualsRunsWithoutEachItem(survey, compute, &compared, &parities_lost);
  ExpectHeadingDropsEqualRunsWithoutEachHeading(survey, compute, &headings_compared);
  EXPECT_GT(headings_compared, 0);
  std::vector<double> weight(survey.num_items(), 1.0);
  Eigen::MatrixXd base, without;
  std::string error;
  ASSERT_TRUE(ReplicateParities(survey, compute, weight, &base, nullptr, &error)) << error;
  EXPECT_GT(compared, 0);
  // The survey must put the rule to work: with `leave` some heading parity
  // is lost when an item goes, with `parent` the rule fills it instead.
  if (GetParam() == "leave") {
    EXPECT_GT(parities_lost, 0);
  } else if (GetParam() == "parent") {
    EXPECT_EQ(parities_lost, 0);
  }
  if (GetParam() != "leave") {
    // The fill of region 1 in heading 0 moves when an item of the heading
    // it rests on (1 under parent, like_source under like) is dropped.
    const int leaf = survey.classification.FindNode(truth.headings[0]);
    const int source = GetParam() == "parent" ? 1 : like_source;
    double moved = 0.0;
    for (int i = survey.heading_range[source].item_begin; i < survey.heading_range[source].item_end; ++i) {
      weight[i] = 0.0;
      ASSERT_TRUE(ReplicateParities(survey, compute, weight, &without, nullptr, &error)) << error;
      weight[i] = 1.0;
      moved = std::max(moved, std::abs(without(leaf, 1) - base(leaf, 1)));
    }
    EXPECT_GT(moved, 1e-6);
  }
}

INSTANTIATE_TEST_SUITE_P(Rules, LeaveOneOutRules, ::testing::Values("leave", "parent", "like"));

TEST(LeaveOneOut, ARegionTheParentRuleCouldNotFillGetsAFillWhenAnItemSplitsTheAggregate) {
  // One group of three headings A, B, C with two items each. Region 3
  // spends on A but prices none of it (rule parent). The aggregate of B and
  // C, A's proxy, splits into {0, 1, 2, 6} and {3, 4, 5} (B's items price
  // regions 3-5, C's first 0-2 and 6, its second 0 and 1) and keeps the
  // larger, so region 3 gets no fill. Without C's first item the larger
  // group is {3, 4, 5} and region 3 is filled: leave-one-out must redo A's
  // fill as the run without the item does.
  synthetic::SyntheticOptions options = SmallOptions(3);
  options.num_regions = 7;
  options.num_headings = 3;
  options.num_groups = 1;
  options.items_per_heading = 2;
  options.coverage = 1.0;
  const synthetic::SyntheticSurvey truth = synthetic::Generate(options);
  const std::vector<std::set<int>> item_regions = {{0, 1, 2, 4, 5, 6}, {0, 1, 2, 4, 5, 6}, {3, 4, 5},
                                                   {3, 4, 5},          {0, 1, 2, 6},       {0, 1}};
  const synthetic::SyntheticSurvey cut =
      KeepQuotes(truth, [&](int r, int i) { return item_regions[i].count(r) > 0; });
  const Survey survey = LoadFolder(WriteSynthetic(cut, "loo-proxy-switch"));
  ComputeOptions compute;
  compute.missing_parities.headings = {{truth.headings[0], "parent"}};
  std::vector<double> weight(survey.num_items(), 1.0);
  Eigen::MatrixXd base, without;
  std::string error;
  ASSERT_TRUE(ReplicateParities(survey, compute, weight, &base, nullptr, &error)) << error;
  weight[survey.items.Find(truth.items[4])] = 0.0;
  ASSERT_TRUE(ReplicateParities(survey, compute, weight, &without, nullptr, &error)) << error;
  const int leaf_a = survey.classification.FindNode(truth.headings[0]);
  ASSERT_FALSE(std::isfinite(base(leaf_a, 3)));  // the premise: no fill in the full sample
  ASSERT_TRUE(std::isfinite(without(leaf_a, 3)));  // and one without the item
  int compared = 0, parities_lost = 0, headings_compared = 0;
  ExpectLeaveOneOutEqualsRunsWithoutEachItem(survey, compute, &compared, &parities_lost);
  ExpectHeadingDropsEqualRunsWithoutEachHeading(survey, compute, &headings_compared);
  EXPECT_GT(headings_compared, 0);
  EXPECT_GT(compared, 0);
}

TEST(LeaveOneOut, JackknifeOfACompleteHeadingIsTheStandardErrorOfAMean) {
  // On a complete table CPD gives a_r = mean_i (y_ri - mean_s y_si), a mean
  // over items; the delete-one jackknife of a mean equals s / sqrt(n)
  // exactly (Efron and Tibshirani 1993, section 11.2).
  synthetic::SyntheticOptions options = SmallOptions(7);
  options.coverage = 1.0;
  const Survey survey = LoadSynthetic(options, "jackknife");
  SensitivityResult result;
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), OnlyParts(false, true, false, false), &result, &summary));
  const int node = survey.classification.FindNode(survey.heading_codes[2]);
  const HeadingRange& range = survey.heading_range[2];
  const int n = range.num_items();
  Eigen::MatrixXd y(survey.num_regions(), n);
  for (int64_t k = range.cell_begin; k < range.cell_end; ++k) {
    y(survey.cells.region[k], survey.cells.item[k] - range.item_begin) = survey.cells.log_price[k];
  }
  const Eigen::RowVectorXd item_mean = y.colwise().mean();
  for (int r = 0; r < survey.num_regions(); ++r) {
    const Eigen::RowVectorXd d = y.row(r) - item_mean;
    const double sd = std::sqrt((d.array() - d.mean()).square().sum() / (n - 1));
    PARITAS_EXPECT_CLOSE(result.jackknife_log_se(node, r), sd / std::sqrt(n), 1e-9);
  }
}

TEST(Bootstrap, SameSeedGivesIdenticalOutputWhateverTheThreads) {
  const Survey survey = LoadSynthetic(SmallOptions(11), "boot-seed");
  SensitivityOptions options = OnlyParts(true, false, false, false);
  options.replicates = 40;
  options.write_replicates = true;
  SensitivityResult a, b, c;
  SensitivitySummary summary;
  options.num_threads = 1;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), options, &a, &summary));
  options.num_threads = 2;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), options, &b, &summary));
  options.seed = 2;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), options, &c, &summary));
  EXPECT_EQ(BootstrapCsv(survey, a), BootstrapCsv(survey, b));
  EXPECT_NE(BootstrapCsv(survey, a), BootstrapCsv(survey, c));
  const std::string binary = ReplicatesBinary(a);
  EXPECT_EQ(binary, ReplicatesBinary(b));
  EXPECT_EQ(binary.size(), 24u + 8u * a.parity.rows() * survey.num_regions() * 40u);
  EXPECT_EQ(binary.substr(0, 8), "PRTSREP1");
  const std::string csv = BootstrapCsv(survey, a);
  EXPECT_EQ(csv.substr(0, csv.find('\n')),
            "node,region,parity,median,lower,upper,log_se,rank_low,rank_high,num_replicates,"
            "interval_df,interval_scale");
  for (int r = 0; r < survey.num_regions(); ++r) {
    EXPECT_LE(a.boot_lower(0, r), a.boot_median(0, r));
    EXPECT_LE(a.boot_median(0, r), a.boot_upper(0, r));
    EXPECT_LE(a.boot_rank_low(0, r), a.rank(0, r));
    EXPECT_GE(a.boot_rank_high(0, r), a.rank(0, r));
    EXPECT_EQ(a.boot_num_replicates(0, r), 40);
  }
}

TEST(Bootstrap, IntervalsContainTheTrueHeadingParityInAbout95PercentOfRegions) {
  // Truth: the synthetic heading level ln P_r(h) normalised to mean 0 over
  // regions, as the estimates are. Item effects are fixed in the model, so
  // the estimate's error is the quote noise averaged over items, which
  // resampling items reproduces. 40 regions x 8 headings = 320 checks; the
  // percentile interval of a mean of 30 items undercovers by a little
  // (about sqrt(29/30) in width), so 88-99 % is accepted.
  synthetic::SyntheticOptions options;
  options.num_regions = 40;
  options.num_headings = 8;
  options.items_per_heading = 30;
  options.coverage = 1.0;
  options.quotes_per_cell = 1;
  options.noise_sd = 0.1;
  options.num_groups = 2;
  options.seed = 17;
  const synthetic::SyntheticSurvey truth = synthetic::Generate(options);
  const Survey survey = LoadFolder(WriteSynthetic(truth, "boot-truth"));
  SensitivityOptions sensitivity = OnlyParts(true, false, false, false);
  sensitivity.replicates = 300;
  SensitivityResult result;
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), sensitivity, &result, &summary));
  int inside = 0, total = 0;
  for (int h = 0; h < options.num_headings; ++h) {
    const int node = survey.classification.FindNode(truth.headings[h]);
    const int sh = static_cast<int>(std::find(survey.heading_codes.begin(), survey.heading_codes.end(),
                                              truth.headings[h]) - survey.heading_codes.begin());
    ASSERT_LT(sh, survey.num_headings());
    double mean = 0.0;
    for (int r = 0; r < options.num_regions; ++r) mean += truth.true_log_level[r * options.num_headings + h];
    mean /= options.num_regions;
    for (int r = 0; r < options.num_regions; ++r) {
      const int sr = survey.regions.Find(truth.regions[r]);
      const double parity = 100.0 * std::exp(truth.true_log_level[r * options.num_headings + h] - mean);
      inside += result.boot_lower(node, sr) <= parity && parity <= result.boot_upper(node, sr);
      ++total;
    }
  }
  const double share = static_cast<double>(inside) / total;
  EXPECT_GE(share, 0.88) << inside << " of " << total;
  EXPECT_LE(share, 0.99) << inside << " of " << total;
}

// On a complete heading CPD's ln parity is a mean over its n items, so the
// ideal bootstrap variance is sum_i (d_i - mean d)^2 / (n m) with m draws:
// s^2 / n (the jackknife's, exactly) for the rescaled bootstrap's m = n - 1,
// and (n - 1)/n x s^2 / n for the plain one's m = n (Rao and Wu 1988).
// With 8 items the plain/jackknife variance ratio is 7/8 = 0.875.
// 48 region x heading cells and 2,000 replicates keep the Monte Carlo error
// of the mean ratio near 1 % (computed here: sqrt(2 / 2000) per cell).
TEST(Bootstrap, RescaledMatchesTheJackknifeAndPlainIsLowByNMinusOneOverN) {
  synthetic::SyntheticOptions options = SmallOptions(31);
  options.num_regions = 12;
  options.items_per_heading = 8;
  options.coverage = 1.0;
  options.quotes_per_cell = 1;
  const Survey survey = LoadSynthetic(options, "boot-rescaled");
  auto variance_ratio = [&survey](BootstrapKind kind) {
    SensitivityOptions sensitivity = OnlyParts(true, true, false, false);
    sensitivity.replicates = 2000;
    sensitivity.bootstrap = kind;
    SensitivityResult result;
    SensitivitySummary summary;
    EXPECT_TRUE(RunSensitivity(survey, ComputeOptions(), sensitivity, &result, &summary));
    double sum = 0.0;
    int count = 0;
    for (int h = 0; h < survey.num_headings(); ++h) {
      const int node = survey.classification.FindNode(survey.heading_codes[h]);
      for (int r = 0; r < survey.num_regions(); ++r) {
        const double ratio = result.boot_log_se(node, r) / result.jackknife_log_se(node, r);
        sum += ratio * ratio;
        ++count;
      }
    }
    return sum / count;
  };
  const double rescaled = variance_ratio(BootstrapKind::kRescaled);
  const double plain = variance_ratio(BootstrapKind::kPlain);
  std::printf("bootstrap / jackknife variance over %d headings x %d regions, 8 items: rescaled "
              "%.3f, plain %.3f (7/8 = 0.875)\n",
              survey.num_headings(), survey.num_regions(), rescaled, plain);
  EXPECT_NEAR(rescaled, 1.0, 0.04);
  EXPECT_NEAR(plain, 0.875, 0.04);
  EXPECT_NEAR(plain / rescaled, 0.875, 0.04);
}

// The expanded interval on a run: a heading's nu for a region is m - 1, m
// the items of the heading the region priced (counted here from the
// survey's cells), and its interval the type-7 percentiles of its
// replicates at Phi(-t_(nu, 0.975)) and 1 minus it; an aggregate's nu is
// the Satterthwaite sum written out here over its headings (w_h the
// region's expenditure share within the node, v_h the heading's bootstrap
// variance); the plain bootstrap scales by sqrt(m / (m - 1)); the
// percentile interval expands nothing.
TEST(Bootstrap, ExpandedIntervalUsesTheRegionsItemsAndSatterthwaiteDegreesOfFreedom) {
  const Survey survey = LoadSynthetic(SmallOptions(41), "boot-expanded");
  Eigen::MatrixXi priced = Eigen::MatrixXi::Zero(survey.num_regions(), survey.num_headings());
  for (size_t k = 0; k < survey.cells.size(); ++k) {
    ++priced(survey.cells.region[k], survey.item_heading[survey.cells.item[k]]);
  }
  // Every region prices two items or more of each heading (nu >= 1), and
  // some price fewer than all, so that m and n_h differ.
  ASSERT_GE(priced.minCoeff(), 2);
  int fewer = 0;
  for (int h = 0; h < survey.num_headings(); ++h) {
    fewer += (priced.col(h).array() < survey.heading_range[h].num_items()).count();
  }
  ASSERT_GT(fewer, 0);
  SensitivityOptions options = OnlyParts(true, false, false, false);
  options.replicates = 60;
  options.write_replicates = true;
  SensitivityResult result;
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), options, &result, &summary));
  const auto& nodes = survey.classification.nodes();
  const int num_b = result.boot_num_replicates_kept, num_regions = survey.num_regions();
  int aggregates_checked = 0;
  for (int n = 0; n < static_cast<int>(nodes.size()); ++n) {
    for (int r = 0; r < num_regions; ++r) {
      double nu = std::nan("");
      if (nodes[n].is_leaf) {
        nu = priced(r, nodes[n].headings.front()) - 1.0;
      } else {
        double total = 0.0, sum = 0.0, denominator = 0.0;
        for (int h : nodes[n].headings) total += survey.expenditure(r, h);
        for (int h : nodes[n].headings) {
          const double w = survey.expenditure(r, h) / total;
          const int leaf = survey.classification.FindNode(survey.heading_codes[h]);
          const double se = result.boot_log_se(leaf, r);
          const double term = w * w * se * se;
          sum += term;
          denominator += term * term / (priced(r, h) - 1.0);
        }
        nu = sum * sum / denominator;
        ++aggregates_checked;
      }
      ASSERT_TRUE(IsClose(result.boot_interval_df(n, r), nu, 1e-12)) << nodes[n].code << " " << r;
      EXPECT_EQ(result.boot_interval_scale(n, r), 1.0);
      std::vector<double> values;
      for (int b = 0; b < num_b; ++b) {
        const size_t slot = (static_cast<size_t>(n) * num_regions + r) * num_b + b;
        const double v = result.boot_log_parity[slot];
        if (std::isfinite(v)) values.push_back(v);
      }
      std::sort(values.begin(), values.end());
      const double p = 0.5 * std::erfc(StudentTQuantile(0.975, nu) / std::sqrt(2.0));
      EXPECT_DOUBLE_EQ(result.boot_lower(n, r), 100.0 * std::exp(PercentileType7(values, p)));
      EXPECT_DOUBLE_EQ(result.boot_upper(n, r), 100.0 * std::exp(PercentileType7(values, 1 - p)));
    }
  }
  EXPECT_GT(aggregates_checked, 10);
  options.write_replicates = false;
  options.bootstrap = BootstrapKind::kPlain;
  SensitivityResult plain;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), options, &plain, &summary));
  const int leaf = survey.classification.FindNode(survey.heading_codes[0]);
  const double m = priced(0, 0);
  EXPECT_DOUBLE_EQ(plain.boot_interval_scale(leaf, 0), std::sqrt(m / (m - 1)));
  EXPECT_GT(plain.boot_interval_scale(0, 0), 1.0);
  options.interval = IntervalKind::kPercentile;
  SensitivityResult percentile;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), options, &percentile, &summary));
  EXPECT_TRUE(percentile.boot_interval_df.array().isNaN().all());
  EXPECT_TRUE((percentile.boot_interval_scale.array() == 1.0).all());
  // Wider than the percentile interval of the same replicates.
  EXPECT_LT(plain.boot_lower(leaf, 0), percentile.boot_lower(leaf, 0));
  EXPECT_GT(plain.boot_upper(leaf, 0), percentile.boot_upper(leaf, 0));
}

// nu and k of the expansion from the items a region priced (written out
// here): m - 1 for m >= 2 items, 1 for a single item (as for two: its
// standard error rests on no spread of its own), the heading's n - 1 for a
// parity a rule filled (m = 0); under the plain bootstrap k = sqrt(c) with
// c = (nu + 1) / nu; an aggregate takes the Satterthwaite nu of its
// headings with those nu_h and c_h.
TEST(Bootstrap, ExpansionOfOneItemIsTheWidestAndOfAFilledParityTheHeadings) {
  const Survey survey = LoadSynthetic(SmallOptions(5), "expansion-m");
  const auto& nodes = survey.classification.nodes();
  const int num_nodes = static_cast<int>(nodes.size());
  const int num_regions = survey.num_regions(), num_headings = survey.num_headings();
  const std::vector<int> heading_num_items(num_headings, 6);
  Eigen::MatrixXi priced = Eigen::MatrixXi::Constant(num_regions, num_headings, 6);
  priced(0, 0) = 1;
  priced(0, 1) = 0;
  priced(0, 2) = 3;
  Eigen::MatrixXd log_se = Eigen::MatrixXd::Constant(num_nodes, num_regions, 0.02);
  std::vector<int> leaf(num_headings);
  for (int h = 0; h < num_headings; ++h) leaf[h] = survey.classification.FindNode(survey.heading_codes[h]);
  log_se(leaf[1], 0) = 0.05;
  Eigen::MatrixXd df, scale;
  internal::ExpansionOfCells(survey.classification, survey.expenditure, heading_num_items, priced, {},
                             BootstrapKind::kPlain, log_se, &df, &scale);
  const double expected_nu[] = {1.0, 5.0, 2.0, 5.0};
  for (int h = 0; h < num_headings; ++h) {
    EXPECT_EQ(df(leaf[h], 0), expected_nu[h]) << h;
    EXPECT_DOUBLE_EQ(scale(leaf[h], 0), std::sqrt((expected_nu[h] + 1) / expected_nu[h])) << h;
  }
  const int group = nodes[leaf[0]].parent;
  ASSERT_EQ(nodes[leaf[1]].parent, group);
  ASSERT_EQ(nodes[group].headings.size(), 2u);
  const double total = survey.expenditure(0, 0) + survey.expenditure(0, 1);
  double sum = 0.0, raw = 0.0, denominator = 0.0;
  for (int h = 0; h < 2; ++h) {
    const double w = survey.expenditure(0, h) / total, v = log_se(leaf[h], 0) * log_se(leaf[h], 0);
    const double c = (expected_nu[h] + 1) / expected_nu[h];
    sum += w * w * c * v;
    raw += w * w * v;
    denominator += (w * w * c * v) * (w * w * c * v) / expected_nu[h];
  }
  PARITAS_EXPECT_CLOSE(df(group, 0), sum * sum / denominator, 1e-12);
  PARITAS_EXPECT_CLOSE(scale(group, 0), std::sqrt(sum / raw), 1e-12);
}

TEST(BootstrapKind, NamesReadBackCaseInsensitively) {
  BootstrapKind kind = BootstrapKind::kPlain;
  EXPECT_TRUE(FromString(" Rescaled", &kind));
  EXPECT_EQ(kind, BootstrapKind::kRescaled);
  EXPECT_TRUE(FromString("PLAIN", &kind));
  EXPECT_EQ(ToString(kind), "plain");
  EXPECT_FALSE(FromString("efron", &kind));
}

TEST(Bootstrap, IntervalsWidenWhenFewerItemsArePriced) {
  // The same model with 32 and with 8 items per heading: the standard error
  // of a mean over items grows about as 1 / sqrt(items), so the median
  // interval width should roughly double.
  auto median_width = [](int items, const std::string& name) {
    synthetic::SyntheticOptions options = SmallOptions(21);
    options.items_per_heading = items;
    const Survey survey = LoadSynthetic(options, name);
    SensitivityOptions sensitivity = OnlyParts(true, false, false, false);
    sensitivity.replicates = 100;
    SensitivityResult result;
    SensitivitySummary summary;
    EXPECT_TRUE(RunSensitivity(survey, ComputeOptions(), sensitivity, &result, &summary));
    std::vector<double> widths;
    for (int r = 0; r < survey.num_regions(); ++r) {
      widths.push_back(std::log(result.boot_upper(0, r) / result.boot_lower(0, r)));
    }
    std::sort(widths.begin(), widths.end());
    return PercentileType7(widths, 0.5);
  };
  const double many = median_width(32, "boot-many"), few = median_width(8, "boot-few");
  EXPECT_GT(few, 1.5 * many);
}

TEST(Bootstrap, ReplicatesThatUnlinkAHeadingAreCountedAndKeepTheLargestGroup) {
  // Three items per heading at 40 % coverage: a resample without the anchor
  // often leaves regions with no item in common.
  synthetic::SyntheticOptions options = SmallOptions(9);
  options.items_per_heading = 3;
  options.coverage = 0.4;
  const Survey survey = LoadSynthetic(options, "boot-unlinked");
  SensitivityOptions sensitivity = OnlyParts(true, false, false, false);
  sensitivity.replicates = 60;
  SensitivityResult result;
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), sensitivity, &result, &summary)) << summary.message;
  EXPECT_GT(summary.num_replicates_unlinked, 0);
  EXPECT_GT(summary.num_replicates_region_lost, 0);
  int fewer = 0;
  for (int n = 0; n < result.boot_num_replicates.rows(); ++n) {
    for (int r = 0; r < survey.num_regions(); ++r) fewer += result.boot_num_replicates(n, r) < 60;
  }
  EXPECT_GT(fewer, 0);
  EXPECT_TRUE(result.boot_median.row(0).array().isFinite().all());
}

TEST(CoverageCurve, SpreadGrowsAsCoverageFalls) {
  synthetic::SyntheticOptions options = SmallOptions(13);
  options.items_per_heading = 20;
  const Survey survey = LoadSynthetic(options, "coverage");
  SensitivityOptions sensitivity = OnlyParts(false, false, true, false);
  sensitivity.coverage_repetitions = 30;
  SensitivityResult result;
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), sensitivity, &result, &summary));
  ASSERT_EQ(result.coverage.size(), 4u);
  EXPECT_EQ(summary.num_coverage_runs, 120);
  double previous = 0.0;
  for (const CoverageLevel& level : result.coverage) {
    std::vector<double> sd;
    for (int r = 0; r < survey.num_regions(); ++r) sd.push_back(level.log_sd(0, r));
    std::sort(sd.begin(), sd.end());
    const double median = PercentileType7(sd, 0.5);
    EXPECT_GT(median, previous) << "coverage " << level.coverage;
    previous = median;
  }
}

TEST(MethodSpread, RunsEveryCombinationAndMeasuresLogMaxOverMin) {
  const Survey survey = LoadSynthetic(SmallOptions(15), "methods");
  SensitivityResult result;
  SensitivitySummary summary;
  ASSERT_TRUE(RunSensitivity(survey, ComputeOptions(), OnlyParts(false, false, false, true), &result, &summary));
  // Every registered combination: 4 elementary x 6 aggregation methods.
  ASSERT_EQ(result.methods.size(), 24u);
  EXPECT_EQ(result.methods[0].name, "cpd/geks-fisher");
  const std::string csv = MethodSpreadCsv(survey, result);
  EXPECT_EQ(csv.substr(0, csv.find('\n')),
            "node,region,cpd/geks-fisher,cpd/geks-tornqvist,cpd/weighted-cpd,cpd/spanning-tree,"
            "cpd/geary-khamis,cpd/ikle-dikhanov-balk,cprd/geks-fisher,cprd/geks-tornqvist,"
            "cprd/weighted-cpd,cprd/spanning-tree,cprd/geary-khamis,cprd/ikle-dikhanov-balk,"
            "jevons-geks/geks-fisher,"
            "jevons-geks/geks-tornqvist,jevons-geks/weighted-cpd,jevons-geks/spanning-tree,"
            "jevons-geks/geary-khamis,jevons-geks/ikle-dikhanov-balk,robust-cpd/geks-fisher,"
            "robust-cpd/geks-tornqvist,robust-cpd/weighted-cpd,robust-cpd/spanning-tree,"
            "robust-cpd/geary-khamis,robust-cpd/ikle-dikhanov-balk,spread");
  for (int r = 0; r < survey.num_regions(); ++r) {
    PARITAS_EXPECT_CLOSE(result.methods[0].parity(0, r), result.parity(0, r), 1e-12);
    double lo = 1e300, hi = 0.0;
    for (const MethodRun& run : result.methods) {
      lo = std::min(lo, run.parity(0, r));
      hi = std::max(hi, run.parity(0, r));
    }
    PARITAS_EXPECT_CLOSE(result.method_log_spread(0, r), std::log(hi / lo), 1e-12);
  }
}

TEST(SensitivityJob, WritesEveryFileAndARunRecordSection) {
  const std::string folder = WriteSynthetic(synthetic::Generate(SmallOptions(19)), "job");
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  config.output = folder + "/out";
  SensitivityOptions options;
  options.replicates = 20;
  options.coverage_repetitions = 3;
  SensitivityJobSummary summary;
  ASSERT_EQ(RunSensitivityJob(config, options, &summary), 0) << summary.message;
  for (const char* name : {"bootstrap.csv", "items_needed.csv", "leave_one_out.csv",
                           "coverage_curve.csv", "method_spread.csv"}) {
    EXPECT_TRUE(std::filesystem::exists(folder + "/out/sensitivity/" + name)) << name;
  }
  const std::string record = ReadTextFile(folder + "/out/sensitivity/run.json");
  EXPECT_NE(record.find("\"command\": \"sensitivity\""), std::string::npos);
  EXPECT_NE(record.find("\"num_replicates\": 20"), std::string::npos);
  EXPECT_NE(record.find("\"coverage_curve\""), std::string::npos);
  const std::string report = summary.FullReport(options);
  EXPECT_NE(report.find("95 % interval"), std::string::npos);
  EXPECT_NE(report.find("coverage curve"), std::string::npos);
}

// One thread runs the replicates in order and reports each, so a flag set
// after the fifth leaves exactly five replicates behind every interval.
TEST(Sensitivity, CancelStopsBeforeTheNextReplicateAndReportsCancelled) {
  const Survey survey = LoadSynthetic(SmallOptions(23), "cancel");
  SensitivityOptions options = OnlyParts(true, true, false, false);
  options.replicates = 40;
  options.num_threads = 1;
  std::atomic<bool> cancel{false};
  options.cancel = &cancel;
  options.progress = [&cancel](const std::string&, int64_t done, int64_t) {
    if (done >= 5) cancel = true;
  };
  SensitivityResult result;
  SensitivitySummary summary;
  EXPECT_FALSE(RunSensitivity(survey, ComputeOptions(), options, &result, &summary));
  EXPECT_EQ(summary.outcome, SensitivityOutcome::kCancelled);
  EXPECT_EQ(summary.message, "cancelled");
  EXPECT_EQ(result.boot_num_replicates(0, 0), 5);
  EXPECT_EQ(summary.leave_one_out_seconds, 0.0);  // the next part never started
  cancel = false;
  options.progress = nullptr;
  EXPECT_TRUE(RunSensitivity(survey, ComputeOptions(), options, &result, &summary)) << summary.message;
  EXPECT_EQ(result.boot_num_replicates(0, 0), 40);
}

TEST(SensitivityJob, WithoutWritingHandsBackTheFilesAndWritesNothing) {
  const std::string folder = WriteSynthetic(synthetic::Generate(SmallOptions(29)), "job-kept");
  RunConfig config;
  std::string error;
  ASSERT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  config.output = folder + "/out";
  SensitivityOptions options = OnlyParts(true, false, false, false);
  options.replicates = 20;
  SensitivityJobSummary summary;
  JobOutputOptions output;
  output.write_files = false;
  ASSERT_EQ(RunSensitivityJob(config, options, &summary, output), 0) << summary.message;
  EXPECT_FALSE(std::filesystem::exists(folder + "/out/sensitivity"));
  ASSERT_FALSE(summary.files.empty());
  EXPECT_EQ(summary.files.front().relative_path, "bootstrap.csv");
  EXPECT_EQ(summary.files.back().relative_path, "run.json");
  EXPECT_EQ(summary.files.front().contents, BootstrapCsv(summary.survey, summary.result));
}

TEST(SensitivityCommand, BadOptionValuesExitWithOneAndAClearMessage) {
  const std::string folder = WriteSynthetic(synthetic::Generate(SmallOptions(23)), "cli");
  const std::string config = folder + "/config.yaml --output " + folder + "/out";
  const std::pair<std::string, std::string> cases[] = {
      {"--replicates 0",
       "paritas: error: --replicates must be a whole number from 2 to 100000, found '0'\n"},
      {"--replicates 2.5",
       "paritas: error: --replicates must be a whole number from 2 to 100000, found '2.5'\n"},
      {"--seed -1",
       "paritas: error: --seed must be a whole number from 0 to 9007199254740992, found '-1'\n"},
      {"--seed x1",
       "paritas: error: --seed must be a whole number from 0 to 9007199254740992, found 'x1'\n"},
      {"--threads abc",
       "paritas: error: --threads must be a whole number from 0 (all cores) to 1024, found "
       "'abc'\n"},
      {"--level 100",
       "paritas: error: --level must be a percentage above 1 and at most 99.9 (e.g. 95) or a "
       "share from 0.01 to 0.999 (e.g. 0.95), found '100'\n"},
      {"--level 99.99999999999999",
       "paritas: error: --level must be a percentage above 1 and at most 99.9 (e.g. 95) or a "
       "share from 0.01 to 0.999 (e.g. 0.95), found '99.99999999999999'\n"},
      {"--level 0.9999999999999999",
       "paritas: error: --level must be a percentage above 1 and at most 99.9 (e.g. 95) or a "
       "share from 0.01 to 0.999 (e.g. 0.95), found '0.9999999999999999'\n"},
      {"--level 0.005",
       "paritas: error: --level must be a percentage above 1 and at most 99.9 (e.g. 95) or a "
       "share from 0.01 to 0.999 (e.g. 0.95), found '0.005'\n"},
      {"--level 1",
       "paritas: error: --level must be a percentage above 1 and at most 99.9 (e.g. 95) or a "
       "share from 0.01 to 0.999 (e.g. 0.95), found '1'\n"},
      {"--coverage 90,abc",
       "paritas: error: --coverage must list percentages of items kept, each above 0 and at most "
       "100 (e.g. "
       "90,75,50,25), found 'abc'\n"},
      {"--coverage 50,50", "paritas: error: coverage level 50.0000 % is given twice\n"},
      {"--repetitions 1",
       "paritas: error: --repetitions must be a whole number from 2 to 10000, found '1'\n"},
      {"--parts boot",
       "paritas: error: --parts: part 'boot' is not one of: bootstrap, leave-one-out, coverage, "
       "methods\n"},
      {"--elementary cdp",
       "paritas: error: --elementary 'cdp' is not one of: cpd, cprd, jevons-geks, robust-cpd; did you "
       "mean 'cpd'?\n"},
      {"--parts bootstrap,leave_one_out",
       "paritas: error: --parts: part 'leave_one_out' is not one of: bootstrap, leave-one-out, "
       "coverage, methods; did you mean 'leave-one-out'?\n"},
      {"--bootstrap wild",
       "paritas: error: --bootstrap must be one of: rescaled, plain; found 'wild'\n"},
      {"--interval wide",
       "paritas: error: --interval must be one of: expanded, percentile; found 'wide'\n"},
      {"--target-se 0",
       "paritas: error: --target-se must be a standard error of ln parity of at least 0.000001 "
       "and below 1 (e.g. 0.01), found '0'\n"},
      {"--target-se 1%",
       "paritas: error: --target-se must be a standard error of ln parity of at least 0.000001 "
       "and below 1 (e.g. 0.01), found '1%'\n"},
      {"--target-se 1e-8",
       "paritas: error: --target-se must be a standard error of ln parity of at least 0.000001 "
       "and below 1 (e.g. 0.01), found '1e-8'\n"},
      {"--parts leave-one-out --write-replicates",
       "paritas: error: --write-replicates needs the bootstrap part (--parts without bootstrap)\n"},
      {"--reference Weighted_Mean",
       "paritas: error: --reference 'Weighted_Mean' is not one of: mean, weighted-mean, country, or a "
       "region code; did you mean 'weighted-mean'?\n"},
  };
  for (const auto& [arguments, message] : cases) {
    std::string out, err;
    EXPECT_EQ(RunCli("sensitivity " + config + " " + arguments, &out, &err), 1) << arguments;
    EXPECT_EQ(err, message) << arguments;
  }
}

// 99.9 and 0.999 are one level: the percentage is read with its decimal point
// moved, not divided by 100 (99.9 / 100 is the next double above 0.999).
TEST(SensitivityCommand, APercentageAndItsShareWriteTheSameFiles) {
  const std::string folder = WriteSynthetic(synthetic::Generate(SmallOptions(31)), "cli-level");
  std::map<std::string, std::string> written;
  for (const std::string level : {"99.9", "0.999"}) {
    const std::string out_folder = folder + "/out-" + level;
    std::string out, err;
    ASSERT_EQ(RunCli("sensitivity " + folder + "/config.yaml --output " + out_folder +
                         " --parts bootstrap --replicates 20 --seed 4 --level " + level,
                     &out, &err),
              0)
        << err;
    EXPECT_NE(out.find("99.9 % interval"), std::string::npos) << out;
    written[level] = ReadTextFile(out_folder + "/sensitivity/pair_ratios.csv") +
                     ReadTextFile(out_folder + "/sensitivity/bootstrap.csv");
    const std::string record = ReadTextFile(out_folder + "/sensitivity/run.json");
    const size_t at = record.find("\"level\": 0.999");
    ASSERT_NE(at, std::string::npos) << record;
    EXPECT_FALSE(std::isdigit(static_cast<unsigned char>(record[at + 14]))) << level;
  }
  EXPECT_EQ(written["99.9"], written["0.999"]);
}

// Strict mode: the same run with a warning exits 3 after writing
// everything, and its run record says so.
TEST(SensitivityCommand, StrictModeExitsWithThreeOnAWarning) {
  const std::string folder = WriteSynthetic(synthetic::Generate(SmallOptions(29)), "cli-strict");
  std::string out, err;
  EXPECT_EQ(RunCli("sensitivity " + folder + "/config.yaml --strict --output " + folder +
                       "/out --replicates 20 --repetitions 3 --level 90 --coverage 80,40 --seed 4",
                   &out, &err),
            3)
      << err;
  const std::string record = ReadTextFile(folder + "/out/sensitivity/run.json");
  EXPECT_NE(record.find("\"exit_code\": 3"), std::string::npos) << record;
  EXPECT_TRUE(err.ends_with("paritas: error: strict: every output was written, but the run "
                            "raised 1 warning (sensitivity 1); see warnings.csv before "
                            "publishing\n"))
      << err;
}

TEST(SensitivityCommand, RunsAndPrintsTheRootTable) {
  const std::string folder = WriteSynthetic(synthetic::Generate(SmallOptions(29)), "cli-ok");
  std::string out, err;
  ASSERT_EQ(RunCli("sensitivity " + folder + "/config.yaml --output " + folder +
                       "/out --replicates 20 --repetitions 3 --level 90 --coverage 80,40 --seed 4",
                   &out, &err),
            0)
      << err;
  EXPECT_NE(out.find("90 % interval"), std::string::npos) << out;
  EXPECT_NE(out.find("items per heading for a standard error of ln parity of 0.0100"),
            std::string::npos)
      << out;
  const std::string report = ReadTextFile(folder + "/out/sensitivity/report.html");
  // Four tables, items_needed.csv and the pair intervals, warnings.csv, the
  // run record and its own report with the intervals, all in sensitivity/;
  // the compute report is never redrawn.
  EXPECT_NE(out.find("wrote 9 files"), std::string::npos) << out;
  // 10 regions: every pair of the root and of its two aggregates, 45 each.
  EXPECT_NE(out.find("\n  all: "), std::string::npos) << out;
  EXPECT_NE(out.find(" of 45 pairs\n"), std::string::npos) << out;
  EXPECT_EQ(CountOf(ReadTextFile(folder + "/out/sensitivity/pair_ratios.csv"), "\n"), 1u + 3 * 45);
  EXPECT_NE(report.find("id=\"pairs-all\""), std::string::npos);
  // The legend names the interval's kind (expanded by default).
  EXPECT_NE(report.find("90 % expanded percentile interval over item resamples"),
            std::string::npos);
  // Many pairs at one level: the report says no correction is made.
  EXPECT_NE(report.find("with no correction for the number of comparisons"), std::string::npos);
  EXPECT_NE(ReadTextFile(folder + "/out/sensitivity/run.json")
                .find("\"node\": \"all\",\n        \"all_pairs\": true,\n        \"num_pairs\": 45,"),
            std::string::npos);
  EXPECT_NE(report.find("id=\"sensitivity\""), std::string::npos);
  EXPECT_NE(report.find("id=\"coverage-curve\""), std::string::npos);
  // No progress bar when stderr is not a terminal: only the warnings.
  EXPECT_EQ(err.rfind("\n1 warning (every one in warnings.csv):\n  sensitivity (1):\n", 0), 0u)
      << err;
  EXPECT_EQ(err.find('\r'), std::string::npos);
  const std::string curve = ReadTextFile(folder + "/out/sensitivity/coverage_curve.csv");
  EXPECT_NE(curve.find(",80.00,3,"), std::string::npos);
}

}  // namespace
}  // namespace paritas
