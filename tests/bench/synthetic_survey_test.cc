// Tests of the synthetic survey generator: its random streams against the
// reference generators' outputs, determinism, coverage, linkage within
// headings, fidelity to the model, and files that read back.
#include "synthetic_survey.h"

#include <gtest/gtest.h>

#include <cmath>
#include <cstdlib>
#include <numeric>
#include <set>
#include <sstream>
#include <string>
#include <vector>

#include "test_util.h"

namespace paritas::synthetic {
namespace {

using ::paritas::testing::MakeTempDir;
using ::paritas::testing::ReadTextFile;

std::vector<std::string> SplitLines(const std::string& text) {
  std::vector<std::string> lines;
  std::istringstream in(text);
  for (std::string line; std::getline(in, line);) lines.push_back(line);
  return lines;
}

std::vector<std::string> SplitFields(const std::string& line) {
  std::vector<std::string> fields;
  std::istringstream in(line);
  for (std::string field; std::getline(in, field, ',');) fields.push_back(field);
  return fields;
}

// Share of region x item cells holding at least one quote.
double ObservedCoverage(const SyntheticSurvey& survey) {
  std::set<std::pair<int, int>> cells;
  for (size_t q = 0; q < survey.quote_price.size(); ++q) {
    cells.emplace(survey.quote_region[q], survey.quote_item[q]);
  }
  return static_cast<double>(cells.size()) /
         (static_cast<double>(survey.regions.size()) * survey.items.size());
}

// Number of groups of regions connected through shared items in heading h
// (union-find over the quotes).
int NumLinkedComponents(const SyntheticSurvey& survey, int h) {
  std::vector<int> parent(survey.regions.size());
  std::iota(parent.begin(), parent.end(), 0);
  auto find = [&parent](int r) {
    while (parent[r] != r) r = parent[r] = parent[parent[r]];
    return r;
  };
  std::vector<int> first_region(survey.items.size(), -1);
  std::vector<bool> present(survey.regions.size(), false);
  for (size_t q = 0; q < survey.quote_price.size(); ++q) {
    const int i = survey.quote_item[q];
    if (survey.item_heading[i] != h) continue;
    const int r = survey.quote_region[q];
    present[r] = true;
    if (first_region[i] < 0) first_region[i] = r;
    parent[find(r)] = find(first_region[i]);
  }
  std::set<int> roots;
  for (size_t r = 0; r < parent.size(); ++r) {
    // A region without quotes in the heading is a component of its own.
    roots.insert(present[r] ? find(static_cast<int>(r)) : -1 - static_cast<int>(r));
  }
  return static_cast<int>(roots.size());
}

TEST(RandomStream, SplitMix64MatchesTheReferenceOutputsForSeedZero) {
  // First outputs of Vigna's splitmix64.c from state 0 (value from memory;
  // they agree with an independent Python implementation of the algorithm).
  uint64_t state = 0;
  EXPECT_EQ(RandomStream::SplitMix64(&state), 0xe220a8397b1dcdafULL);
  EXPECT_EQ(RandomStream::SplitMix64(&state), 0x6e789e6aa1b965f4ULL);
  EXPECT_EQ(RandomStream::SplitMix64(&state), 0x06c45d188009454fULL);
}

TEST(RandomStream, XoshiroMatchesTheReferenceOutputsForStateOneToFour) {
  // xoshiro256** 1.0 reference code from state {1, 2, 3, 4} (value from
  // memory; the first two follow by hand: rotl(2 * 5, 7) * 9 = 11520, then 0).
  RandomStream stream = RandomStream::FromState({1, 2, 3, 4});
  EXPECT_EQ(stream.NextBits(), 11520u);
  EXPECT_EQ(stream.NextBits(), 0u);
  EXPECT_EQ(stream.NextBits(), 1509978240u);
  EXPECT_EQ(stream.NextBits(), 1215971899390074240u);
}

TEST(RandomStream, NormalDrawsHaveStandardMomentsAndTailShare) {
  // 200,000 draws: mean within 4 standard errors of 0 (SE = 1/sqrt(n)),
  // variance within 4 SE of 1 (SE = sqrt(2/n)); P(|Z| < 1.96) = 0.95 from the
  // standard normal table (textbook value).
  RandomStream stream(42);
  const int n = 200000;
  double sum = 0.0, sum_squares = 0.0;
  int num_inside = 0;
  for (int k = 0; k < n; ++k) {
    const double z = stream.NextNormal();
    sum += z;
    sum_squares += z * z;
    num_inside += std::abs(z) < 1.96;
  }
  const double mean = sum / n;
  EXPECT_NEAR(mean, 0.0, 4.0 / std::sqrt(n));
  EXPECT_NEAR(sum_squares / n - mean * mean, 1.0, 4.0 * std::sqrt(2.0 / n));
  EXPECT_NEAR(static_cast<double>(num_inside) / n, 0.95, 4.0 * std::sqrt(0.95 * 0.05 / n));
}

TEST(RandomStream, UniformDrawsStayInTheHalfOpenUnitInterval) {
  RandomStream stream(7, 3);
  double sum = 0.0;
  for (int k = 0; k < 100000; ++k) {
    const double u = stream.NextUniform();
    ASSERT_GE(u, 0.0);
    ASSERT_LT(u, 1.0);
    sum += u;
  }
  EXPECT_NEAR(sum / 100000, 0.5, 4.0 * std::sqrt(1.0 / 12.0 / 100000));
}

TEST(RandomStream, DifferentStreamsOfOneSeedDiffer) {
  RandomStream a(1, 1), b(1, 2), c(2, 1);
  const uint64_t x = a.NextBits(), y = b.NextBits(), z = c.NextBits();
  EXPECT_NE(x, y);
  EXPECT_NE(x, z);
  EXPECT_NE(y, z);
}

TEST(SyntheticOptions, DefaultsAreValid) {
  std::string error;
  EXPECT_TRUE(SyntheticOptions().IsValid(&error)) << error;
}

TEST(SyntheticOptions, OutOfRangeFieldsAreRejectedWithTheirValue) {
  auto message = [](auto change) {
    SyntheticOptions options;
    change(&options);
    std::string error;
    EXPECT_FALSE(options.IsValid(&error));
    return error;
  };
  EXPECT_EQ(message([](SyntheticOptions* o) { o->num_regions = 1; }), "num_regions = 1 is below 2");
  EXPECT_EQ(message([](SyntheticOptions* o) { o->coverage = 1.5; }),
            "coverage = 1.5 is outside (0, 1]");
  EXPECT_EQ(message([](SyntheticOptions* o) { o->coverage = 0.0; }),
            "coverage = 0 is outside (0, 1]");
  EXPECT_EQ(message([](SyntheticOptions* o) { o->noise_sd = -0.1; }),
            "noise_sd = -0.1 is not a finite value >= 0");
  EXPECT_EQ(message([](SyntheticOptions* o) { o->num_groups = 21; }),
            "num_groups = 21 is outside [1, num_headings = 20]");
  EXPECT_EQ(message([](SyntheticOptions* o) { o->representative_share = std::nan(""); }),
            "representative_share = nan is outside [0, 1]");
  EXPECT_EQ(message([](SyntheticOptions* o) {
              o->num_regions = 100000;
              o->num_headings = 1000;
              o->items_per_heading = 100;
            }),
            "num_regions x num_headings x items_per_heading x quotes_per_cell = 20000000000 "
            "exceeds 2147483647");
}

TEST(Generate, SameSeedGivesIdenticalSurveys) {
  SyntheticOptions options;
  options.representative_share = 0.3;
  const SyntheticSurvey a = Generate(options);
  const SyntheticSurvey b = Generate(options);
  EXPECT_EQ(a.regions, b.regions);
  EXPECT_EQ(a.items, b.items);
  EXPECT_EQ(a.true_log_level, b.true_log_level);
  EXPECT_EQ(a.true_item_log_level, b.true_item_log_level);
  EXPECT_EQ(a.expenditure, b.expenditure);
  EXPECT_EQ(a.population, b.population);
  EXPECT_EQ(a.quote_region, b.quote_region);
  EXPECT_EQ(a.quote_item, b.quote_item);
  EXPECT_EQ(a.quote_price, b.quote_price);
  EXPECT_EQ(a.quote_representative, b.quote_representative);
}

TEST(Generate, DifferentSeedsGiveDifferentPrices) {
  SyntheticOptions options;
  const SyntheticSurvey a = Generate(options);
  options.seed = 2;
  const SyntheticSurvey b = Generate(options);
  EXPECT_NE(a.true_log_level, b.true_log_level);
  EXPECT_NE(a.quote_price, b.quote_price);
}

TEST(Generate, ChangingCoverageOrNoiseLeavesTheTruthUnchanged) {
  // Each random quantity has its own stream, so benchmarks over coverage or
  // noise compare surveys built on one truth.
  SyntheticOptions options;
  const SyntheticSurvey a = Generate(options);
  options.coverage = 0.4;
  options.noise_sd = 0.2;
  const SyntheticSurvey b = Generate(options);
  EXPECT_EQ(a.true_log_level, b.true_log_level);
  EXPECT_EQ(a.true_item_log_level, b.true_item_log_level);
  EXPECT_EQ(a.expenditure, b.expenditure);
  EXPECT_NE(a.quote_price.size(), b.quote_price.size());
}

TEST(Generate, ShapesAndCodesFollowTheOptions) {
  SyntheticOptions options;
  options.num_regions = 12;
  options.num_headings = 7;
  options.items_per_heading = 3;
  options.num_groups = 3;
  const SyntheticSurvey survey = Generate(options);
  ASSERT_EQ(survey.regions.size(), 12u);
  ASSERT_EQ(survey.items.size(), 21u);
  EXPECT_EQ(survey.regions.front(), "r0001");
  EXPECT_EQ(survey.headings.back(), "h007");
  EXPECT_EQ(survey.groups.back(), "g03");
  EXPECT_EQ(survey.items[20], "i00021");
  EXPECT_EQ(survey.item_heading[20], 6);
  EXPECT_EQ(survey.heading_group, (std::vector<int>{0, 0, 0, 1, 1, 2, 2}));
  EXPECT_EQ(survey.true_log_level.size(), 84u);
  EXPECT_EQ(survey.expenditure.size(), 84u);
  for (double e : survey.expenditure) EXPECT_GT(e, 0.0);
  EXPECT_EQ(survey.quote_price.size() % options.quotes_per_cell, 0u);
}

TEST(Generate, QuotesAreSortedByRegionThenItem) {
  const SyntheticSurvey survey = Generate(SyntheticOptions());
  for (size_t q = 1; q < survey.quote_price.size(); ++q) {
    const auto previous = std::make_pair(survey.quote_region[q - 1], survey.quote_item[q - 1]);
    const auto current = std::make_pair(survey.quote_region[q], survey.quote_item[q]);
    ASSERT_LE(previous, current) << "at quote " << q;
  }
}

TEST(Generate, CoverageIsCloseToTheRequestedShare) {
  // 200 x 400 = 80,000 cells: the binomial SD of the share is under 0.002.
  for (double coverage : {0.3, 0.7, 1.0}) {
    SyntheticOptions options;
    options.num_regions = 200;
    options.coverage = coverage;
    EXPECT_NEAR(ObservedCoverage(Generate(options)), coverage, 0.01) << "coverage " << coverage;
  }
}

TEST(Generate, EveryRegionAndItemIsPricedEvenAtLowCoverage) {
  SyntheticOptions options;
  options.num_regions = 30;
  options.items_per_heading = 40;
  options.coverage = 0.03;  // below 1 / 40: the anchors alone, plus rescued items
  const SyntheticSurvey survey = Generate(options);
  std::vector<int> num_region_quotes(survey.regions.size(), 0);
  std::vector<int> num_item_quotes(survey.items.size(), 0);
  for (size_t q = 0; q < survey.quote_price.size(); ++q) {
    ++num_region_quotes[survey.quote_region[q]];
    ++num_item_quotes[survey.quote_item[q]];
  }
  for (size_t r = 0; r < num_region_quotes.size(); ++r) {
    EXPECT_GT(num_region_quotes[r], 0) << survey.regions[r];
  }
  for (size_t i = 0; i < num_item_quotes.size(); ++i) {
    EXPECT_GT(num_item_quotes[i], 0) << survey.items[i];
  }
}

TEST(Generate, RegionsOfEveryHeadingAreLinked) {
  // Sparse surveys would split into islands without the anchor items.
  for (double coverage : {0.05, 0.2, 0.7}) {
    SyntheticOptions options;
    options.num_regions = 40;
    options.items_per_heading = 10;
    options.coverage = coverage;
    const SyntheticSurvey survey = Generate(options);
    for (int h = 0; h < options.num_headings; ++h) {
      EXPECT_EQ(NumLinkedComponents(survey, h), 1) << "heading " << h << " coverage " << coverage;
    }
  }
}

TEST(Generate, NoiselessQuotesAreExactlyTruthTimesItemLevel) {
  SyntheticOptions options;
  options.noise_sd = 0.0;
  const SyntheticSurvey survey = Generate(options);
  const size_t num_headings = survey.headings.size();
  for (size_t q = 0; q < survey.quote_price.size(); ++q) {
    const int i = survey.quote_item[q];
    const double expected =
        survey.true_log_level[survey.quote_region[q] * num_headings + survey.item_heading[i]] +
        survey.true_item_log_level[i];
    ASSERT_NEAR(std::log(survey.quote_price[q]), expected, 1e-12) << "quote " << q;
  }
}

TEST(Generate, QuoteNoiseAndTruthHaveTheRequestedSpread) {
  // Sample SDs within about 4 standard errors (SE of an SD ~ sd / sqrt(2n)).
  SyntheticOptions options;
  options.num_regions = 400;
  options.noise_sd = 0.08;
  options.region_level_sd = 0.2;
  options.heading_deviation_sd = 0.1;
  const SyntheticSurvey survey = Generate(options);
  const size_t num_headings = survey.headings.size();
  double sum = 0.0, sum_squares = 0.0;
  const size_t n = survey.quote_price.size();
  for (size_t q = 0; q < n; ++q) {
    const int i = survey.quote_item[q];
    const double residual =
        std::log(survey.quote_price[q]) -
        survey.true_log_level[survey.quote_region[q] * num_headings + survey.item_heading[i]] -
        survey.true_item_log_level[i];
    sum += residual;
    sum_squares += residual * residual;
  }
  EXPECT_NEAR(sum / n, 0.0, 4.0 * 0.08 / std::sqrt(n));
  EXPECT_NEAR(std::sqrt(sum_squares / n), 0.08, 4.0 * 0.08 / std::sqrt(2.0 * n));

  // Total spread of the truth: var = region_level_sd^2 + heading_deviation_sd^2.
  double level_sum = 0.0, level_squares = 0.0;
  for (double level : survey.true_log_level) {
    level_sum += level;
    level_squares += level * level;
  }
  const double m = survey.true_log_level.size();
  const double level_sd = std::sqrt(level_squares / m - (level_sum / m) * (level_sum / m));
  // The region levels (400 draws) dominate the sampling error.
  EXPECT_NEAR(level_sd, std::sqrt(0.2 * 0.2 + 0.1 * 0.1), 4.0 * 0.2 / std::sqrt(2.0 * 400));
}

TEST(Generate, RepresentativeFlagsAreConstantWithinACellAndNearTheShare) {
  SyntheticOptions options;
  options.num_regions = 100;
  options.quotes_per_cell = 3;
  options.representative_share = 0.3;
  const SyntheticSurvey survey = Generate(options);
  const size_t n = survey.quote_price.size();
  size_t num_flagged_cells = 0;
  for (size_t q = 0; q < n; q += options.quotes_per_cell) {
    for (int k = 1; k < options.quotes_per_cell; ++k) {
      ASSERT_EQ(survey.quote_representative[q + k], survey.quote_representative[q]);
    }
    num_flagged_cells += survey.quote_representative[q];
  }
  const double share = static_cast<double>(num_flagged_cells) / (n / options.quotes_per_cell);
  // Slightly above 0.3 because a region x heading without a flag gets its anchor.
  EXPECT_NEAR(share, 0.3, 0.02);
  // Every region has a representative item in every heading.
  std::set<std::pair<int, int>> flagged;
  for (size_t q = 0; q < n; ++q) {
    if (survey.quote_representative[q]) {
      flagged.emplace(survey.quote_region[q], survey.item_heading[survey.quote_item[q]]);
    }
  }
  EXPECT_EQ(flagged.size(), survey.regions.size() * survey.headings.size());
}

TEST(WriteSurvey, WrittenFilesReadBackToTheSurvey) {
  SyntheticOptions options;
  options.num_regions = 9;
  options.num_headings = 5;
  options.items_per_heading = 4;
  options.num_groups = 2;
  options.representative_share = 0.25;
  const SyntheticSurvey survey = Generate(options);
  const std::string dir = MakeTempDir("synthetic_write");
  std::string error;
  ASSERT_TRUE(WriteSurvey(survey, dir, &error)) << error;

  const std::vector<std::string> prices = SplitLines(ReadTextFile(dir + "/prices.csv"));
  ASSERT_EQ(prices.size(), survey.quote_price.size() + 1);
  EXPECT_EQ(prices[0], "region,item,price,representative");
  for (size_t q = 0; q < survey.quote_price.size(); ++q) {
    const std::vector<std::string> fields = SplitFields(prices[q + 1]);
    ASSERT_EQ(fields.size(), 4u) << prices[q + 1];
    EXPECT_EQ(fields[0], survey.regions[survey.quote_region[q]]);
    EXPECT_EQ(fields[1], survey.items[survey.quote_item[q]]);
    // Six significant digits: relative rounding at most 5e-6.
    EXPECT_NEAR(std::strtod(fields[2].c_str(), nullptr) / survey.quote_price[q], 1.0, 5e-6);
    EXPECT_EQ(fields[3], survey.quote_representative[q] ? "1" : "0");
  }

  const std::vector<std::string> items = SplitLines(ReadTextFile(dir + "/items.csv"));
  ASSERT_EQ(items.size(), 21u);
  EXPECT_EQ(items[0], "item,heading");
  EXPECT_EQ(items[20], "i00020,h005");

  const std::vector<std::string> expenditure = SplitLines(ReadTextFile(dir + "/expenditure.csv"));
  ASSERT_EQ(expenditure.size(), 9u * 5u + 1u);
  EXPECT_EQ(expenditure[0], "region,heading,expenditure");
  const std::vector<std::string> last = SplitFields(expenditure.back());
  ASSERT_EQ(last.size(), 3u);
  EXPECT_EQ(last[0], "r0009");
  EXPECT_EQ(last[1], "h005");
  PARITAS_EXPECT_CLOSE(std::strtod(last[2].c_str(), nullptr) / survey.expenditure.back(), 1.0,
                       5e-9);

  const std::vector<std::string> regions = SplitLines(ReadTextFile(dir + "/regions.csv"));
  ASSERT_EQ(regions.size(), 10u);
  EXPECT_EQ(regions[0], "region,name,population");
  EXPECT_EQ(regions[1], "r0001,Synthetic region 1," +
                            std::to_string(static_cast<long long>(survey.population[0])));

  EXPECT_EQ(ReadTextFile(dir + "/classification.yaml"),
            "all:\n  g01: [h001, h002, h003]\n  g02: [h004, h005]\n");
  EXPECT_EQ(ReadTextFile(dir + "/config.yaml"),
            "survey:\n  prices: prices.csv\n  items: items.csv\n"
            "  expenditure: expenditure.csv\n  regions: regions.csv\n"
            "classification: classification.yaml\noutput: out\n");
}

TEST(WriteSurvey, PricesCarrySixSignificantDigitsWithoutTrailingZeros) {
  // Hand-built survey; expected texts are the values rounded by hand.
  SyntheticSurvey survey;
  survey.regions = {"a", "b"};
  survey.headings = {"h"};
  survey.groups = {"g"};
  survey.heading_group = {0};
  survey.items = {"x"};
  survey.item_heading = {0};
  survey.true_log_level = {0.0, 0.0};
  survey.expenditure = {1.0, 2.0};
  survey.population = {10.0, 20.0};
  const std::vector<double> prices = {7.054412, 13.9, 0.5, 1234567.0, 0.000123456789, 9.9999996};
  for (double price : prices) {
    survey.quote_region.push_back(0);
    survey.quote_item.push_back(0);
    survey.quote_price.push_back(price);
  }
  const std::string dir = MakeTempDir("synthetic_digits");
  std::string error;
  ASSERT_TRUE(WriteSurvey(survey, dir, &error)) << error;
  EXPECT_EQ(ReadTextFile(dir + "/prices.csv"),
            "region,item,price\na,x,7.05441\na,x,13.9\na,x,0.5\na,x,1234570\n"
            "a,x,0.000123457\na,x,10\n");
}

TEST(WriteSurvey, OmitsTheRepresentativeColumnWhenNoCellIsFlagged) {
  SyntheticOptions options;
  options.num_regions = 3;
  options.num_headings = 2;
  options.items_per_heading = 2;
  options.num_groups = 1;
  const SyntheticSurvey survey = Generate(options);
  const std::string dir = MakeTempDir("synthetic_no_representative");
  std::string error;
  ASSERT_TRUE(WriteSurvey(survey, dir, &error)) << error;
  const std::vector<std::string> prices = SplitLines(ReadTextFile(dir + "/prices.csv"));
  ASSERT_EQ(prices.size(), survey.quote_price.size() + 1);
  EXPECT_EQ(prices[0], "region,item,price");
  EXPECT_EQ(SplitFields(prices[1]).size(), 3u);
}

TEST(WriteSurvey, ReportsAFolderThatCannotBeCreated) {
  const std::string dir = MakeTempDir("synthetic_blocked");
  ::paritas::testing::WriteTextFile(dir + "/file", "x");
  std::string error;
  EXPECT_FALSE(WriteSurvey(Generate(SyntheticOptions()), dir + "/file/sub", &error));
  EXPECT_EQ(error.rfind(dir + "/file/sub: cannot create folder: ", 0), 0u) << error;
}

}  // namespace
}  // namespace paritas::synthetic
