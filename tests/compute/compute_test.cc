// Tests of the whole computation (survey -> heading and aggregate parities):
// a published data set, published theorems as properties, and recovery of a
// known truth from synthetic surveys.
#include "paritas/compute/compute.h"

#include <array>
#include <cmath>
#include <cstring>
#include <fstream>
#include <map>
#include <sstream>

#include "paritas/survey/config.h"
#include "paritas/base/csv.h"
#include "paritas/output/output_writers.h"
#include "paritas/survey/survey_loader.h"
#include "synthetic_survey.h"
#include "test_util.h"

namespace paritas {
namespace {

using testing::IsClose;
using testing::MakeTempDir;
using testing::TestDataPath;
using testing::WriteTextFile;

// Reads a small CSV into rows of fields (header included).
std::vector<std::vector<std::string>> ReadRows(const std::string& text) {
  std::vector<std::vector<std::string>> rows;
  CsvReader reader(text);
  CsvRecord record;
  while (reader.Next(&record)) rows.emplace_back(record.fields.begin(), record.fields.end());
  return rows;
}

// Loads a survey from a config text written into `folder`.
Survey LoadFrom(const std::string& folder, const std::string& config_text) {
  WriteTextFile(folder + "/config.yaml", config_text);
  RunConfig config;
  std::string error;
  EXPECT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  Survey survey;
  LoadSummary summary;
  EXPECT_TRUE(LoadSurvey(config, LoadOptions(), &survey, &summary)) << summary.message;
  return survey;
}

// The six-commodity, five-situation data set of the CPI Manual (2004, ch. 19,
// tables 19.1-19.2) read as five regions s1..s5, one item per heading,
// expenditure = price x quantity.
Survey SixCommoditySurvey(const std::string& name, const std::vector<std::string>& regions = {}) {
  const std::string folder = MakeTempDir(name);
  const auto rows = ReadRows(testing::ReadTextFile(TestDataPath("published/six_commodity_prices_quantities.csv")));
  std::string prices = "region,item,price,heading\n", spending = "region,heading,expenditure\n";
  for (size_t k = 1; k < rows.size(); ++k) {
    const std::string region = "s" + rows[k][0];
    if (!regions.empty() && std::find(regions.begin(), regions.end(), region) == regions.end()) continue;
    const double price = std::stod(rows[k][2]), quantity = std::stod(rows[k][3]);
    prices += region + "," + rows[k][1] + "_item," + rows[k][2] + "," + rows[k][1] + "\n";
    std::ostringstream value;
    value.precision(17);
    value << price * quantity;
    spending += region + "," + rows[k][1] + "," + value.str() + "\n";
  }
  WriteTextFile(folder + "/prices.csv", prices);
  WriteTextFile(folder + "/expenditure.csv", spending);
  return LoadFrom(folder,
                  "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                  "classification:\n  all: [c1, c2, c3, c4, c5, c6]\n");
}

ParityResult Compute(const Survey& survey, ComputeOptions options = ComputeOptions()) {
  ParityResult result;
  ComputeSummary summary;
  EXPECT_TRUE(ComputeParities(survey, options, &result, &summary)) << summary.message;
  return result;
}

double Ratio(const NodeResult& node, int a, int b) { return node.parity(b) / node.parity(a); }

TEST(ComputeParities, ReproducesTheCpiManualBilateralIndicesOfTheSixCommodityData) {
  // Source: ILO/IMF/OECD/UNECE/Eurostat/World Bank, Consumer Price Index
  // Manual (2004), ch. 19, tables 19.1-19.2; values against situation 1.
  const Survey survey = SixCommoditySurvey("six_bilateral");
  const ParityResult result = Compute(survey);
  const BilateralMatrices& b = result.bilaterals.front();
  const auto published = ReadRows(testing::ReadTextFile(TestDataPath("published/six_commodity_indices.csv")));
  ASSERT_EQ(published.size(), 6u);
  for (int s = 1; s < 5; ++s) {
    EXPECT_TRUE(IsClose(b.laspeyres(0, s), std::stod(published[s + 1][1]), 1e-6)) << s;
    EXPECT_TRUE(IsClose(b.paasche(0, s), std::stod(published[s + 1][2]), 1e-6)) << s;
    EXPECT_TRUE(IsClose(b.fisher(0, s), std::stod(published[s + 1][3]), 1e-6)) << s;
    EXPECT_TRUE(IsClose(b.tornqvist(0, s), std::stod(published[s + 1][4]), 1e-6)) << s;
  }
}

TEST(ComputeParities, GeksOverTwoRegionsEqualsTheirFisherIndex) {
  // GEKS definition (Gini 1931; Eltetö and Köves 1964; Szulc 1964): with two
  // regions the transitive parity ratio is the bilateral Fisher index; CPI
  // Manual (2004) ch. 19 gives Fisher(1, 2) = 1.4011 (printed, 4 decimals).
  const Survey survey = SixCommoditySurvey("six_two", {"s1", "s2"});
  const ParityResult result = Compute(survey);
  EXPECT_TRUE(IsClose(Ratio(result.nodes.front(), 0, 1), 1.401050, 1e-6));
}

TEST(ComputeParities, GeksTornqvistOverTwoRegionsEqualsTheirTornqvistIndex) {
  const Survey survey = SixCommoditySurvey("six_two_t", {"s1", "s3"});
  ComputeOptions options;
  options.aggregation = "geks-tornqvist";
  const ParityResult result = Compute(survey, options);
  // Törnqvist of situation 3 against 1, from six_commodity_indices.csv.
  EXPECT_TRUE(IsClose(Ratio(result.nodes.front(), 0, 1), 1.289013, 1e-6));
}

TEST(ComputeParities, AggregateIsTheGeksMeanOfFisherIndicesOverAllBases) {
  // Classic GEKS formula with every pair present: P_b / P_a =
  // prod_c (F_ac F_cb)^(1/n) (Diewert 1999).
  const Survey survey = SixCommoditySurvey("six_geks");
  const ParityResult result = Compute(survey);
  const Eigen::MatrixXd& f = result.bilaterals.front().fisher;
  for (int a = 0; a < 5; ++a) {
    for (int b = 0; b < 5; ++b) {
      double log_geks = 0.0;
      for (int c = 0; c < 5; ++c) log_geks += (std::log(f(a, c)) + std::log(f(c, b))) / 5.0;
      EXPECT_TRUE(IsClose(Ratio(result.nodes.front(), a, b), std::exp(log_geks), 1e-12));
    }
  }
}

synthetic::SyntheticSurvey MakeSynthetic(double coverage, double noise_sd, uint64_t seed,
                                         int regions = 12, int headings = 6, int items = 8) {
  synthetic::SyntheticOptions options;
  options.num_regions = regions;
  options.num_headings = headings;
  options.items_per_heading = items;
  options.coverage = coverage;
  options.noise_sd = noise_sd;
  options.num_groups = 2;
  options.quotes_per_cell = 2;
  options.seed = seed;
  return synthetic::Generate(options);
}

Survey LoadSynthetic(const synthetic::SyntheticSurvey& truth, const std::string& name) {
  const std::string folder = MakeTempDir(name);
  std::string error;
  EXPECT_TRUE(synthetic::WriteSurvey(truth, folder, &error)) << error;
  RunConfig config;
  EXPECT_TRUE(LoadRunConfig(folder + "/config.yaml", &config, &error)) << error;
  Survey survey;
  LoadSummary summary;
  EXPECT_TRUE(LoadSurvey(config, LoadOptions(), &survey, &summary)) << summary.message;
  return survey;
}

TEST(ComputeParities, ChangingTheReferenceChangesNoRatioBetweenRegions) {
  // Base invariance of GEKS and CPD (Diewert 1999): normalisation is a
  // common factor per node.
  const Survey survey = LoadSynthetic(MakeSynthetic(0.7, 0.05, 3), "reference");
  ComputeOptions mean, weighted, region;
  weighted.reference.kind = ReferenceKind::kWeightedMean;
  region.reference = Reference::FromString(std::string(survey.regions.Code(4)));
  const ParityResult a = Compute(survey, mean), b = Compute(survey, weighted), c = Compute(survey, region);
  for (size_t n = 0; n < a.nodes.size(); ++n) {
    for (int r = 1; r < survey.num_regions(); ++r) {
      EXPECT_TRUE(IsClose(Ratio(a.nodes[n], 0, r), Ratio(b.nodes[n], 0, r), 1e-12));
      EXPECT_TRUE(IsClose(Ratio(a.nodes[n], 0, r), Ratio(c.nodes[n], 0, r), 1e-12));
    }
    EXPECT_TRUE(IsClose(c.nodes[n].parity(4), 100.0, 1e-12));
  }
  // Geometric mean of the parities is 100 under the default reference.
  const NodeResult& root = a.nodes.front();
  EXPECT_TRUE(IsClose(root.parity.array().log().mean(), std::log(100.0), 1e-12));
}

// Proportionality in one region's prices (Diewert 1999, "Axiomatic and
// economic approaches to international comparisons", the tests of
// multilateral indices; from memory): a region's prices in another unit
// move its own parities by the factor and no ratio between other regions.
// Checked at the edge of the range read (src/base/magnitude.h), one region
// at 1e26 times its prices and one at 1e-26, a ratio of 1e52: with one at
// 1e90 and one at 1e-90 Fisher indices were inf and 0, and a spanning tree
// lost a region's parity.
TEST(ComputeParities, RegionsPricedInOtherUnitsAtTheEdgeOfTheRangeMoveNoOtherRatio) {
  const synthetic::SyntheticSurvey truth = MakeSynthetic(0.8, 0.05, 9);
  synthetic::SyntheticSurvey scaled = truth;
  for (size_t q = 0; q < scaled.quote_price.size(); ++q) {
    if (scaled.quote_region[q] == 1) scaled.quote_price[q] *= 1e26;
    if (scaled.quote_region[q] == 2) scaled.quote_price[q] *= 1e-26;
  }
  const Survey plain = LoadSynthetic(truth, "units_plain");
  const Survey shifted = LoadSynthetic(scaled, "units_shifted");
  for (const char* method : {"geks-fisher", "geks-tornqvist", "weighted-cpd", "spanning-tree"}) {
    SCOPED_TRACE(method);
    ComputeOptions options;
    options.aggregation = method;
    const ParityResult a = Compute(plain, options), b = Compute(shifted, options);
    for (size_t n = 0; n < a.nodes.size(); ++n) {
      for (int r = 4; r < plain.num_regions(); ++r) {
        EXPECT_TRUE(IsClose(Ratio(a.nodes[n], 3, r), Ratio(b.nodes[n], 3, r), 1e-12)) << n << " " << r;
      }
      EXPECT_TRUE(IsClose(Ratio(b.nodes[n], 3, 1) / Ratio(a.nodes[n], 3, 1), 1e26, 1e-12)) << n;
      EXPECT_TRUE(IsClose(Ratio(b.nodes[n], 3, 2) / Ratio(a.nodes[n], 3, 2), 1e-26, 1e-12)) << n;
      EXPECT_TRUE(b.nodes[n].real_expenditure.array().isFinite().all()) << n;
    }
  }
}

TEST(ComputeParities, WeightedMeanReferenceMakesTheExpenditureWeightedGeometricMean100) {
  const Survey survey = LoadSynthetic(MakeSynthetic(0.7, 0.05, 5), "weighted");
  ComputeOptions options;
  options.reference.kind = ReferenceKind::kWeightedMean;
  const ParityResult result = Compute(survey, options);
  const NodeResult& root = result.nodes.front();
  const double weighted_log =
      (root.expenditure.array() * root.parity.array().log()).sum() / root.expenditure.sum();
  EXPECT_TRUE(IsClose(weighted_log, std::log(100.0), 1e-12));
}

// Sum over regions of expenditure and of expenditure / (parity / 100) at a
// node, over the regions with both.
std::pair<double, double> NominalAndRealTotals(const NodeResult& node) {
  double nominal = 0.0, real = 0.0;
  for (int r = 0; r < node.parity.size(); ++r) {
    if (!std::isfinite(node.parity(r)) || !std::isfinite(node.expenditure(r)) ||
        node.expenditure(r) <= 0) {
      continue;
    }
    nominal += node.expenditure(r);
    real += node.expenditure(r) / (node.parity(r) / 100.0);
  }
  return {nominal, real};
}

TEST(ComputeParities, CountryReferenceMakesTotalRealExpenditureEqualTotalNominalAtEveryNode) {
  // The defining property of the country reference (README, "reference"):
  // sum_r e_r / PPP_r = sum_r e_r, at every node, headings included; the
  // regions miss cells (coverage 0.7), so nodes have different regions.
  const Survey survey = LoadSynthetic(MakeSynthetic(0.7, 0.05, 5), "country");
  ComputeOptions options;
  options.reference.kind = ReferenceKind::kCountry;
  const ParityResult result = Compute(survey, options);
  for (const NodeResult& node : result.nodes) {
    const auto [nominal, real] = NominalAndRealTotals(node);
    ASSERT_GT(nominal, 0.0);
    EXPECT_NEAR(real / nominal, 1.0, 1e-12) << "node " << node.node;
    EXPECT_EQ(node.reference_used, "country");
  }
}

TEST(ComputeParities, WeightedMeanReferenceLeavesRealAndNominalTotalsApart) {
  // The reason for the country reference: the expenditure-weighted geometric
  // mean of the parities is 100, so sum real / sum nominal is the weighted
  // arithmetic mean of 100 / parity, at least its weighted geometric mean 1
  // (the inequality of arithmetic and geometric means), with equality only
  // when all parities are equal.
  const Survey survey = LoadSynthetic(MakeSynthetic(0.7, 0.05, 5), "weighted-apart");
  ComputeOptions weighted, country;
  weighted.reference.kind = ReferenceKind::kWeightedMean;
  country.reference.kind = ReferenceKind::kCountry;
  const ParityResult w = Compute(survey, weighted), c = Compute(survey, country);
  const auto [nominal, real] = NominalAndRealTotals(w.nodes.front());
  EXPECT_GT(real / nominal, 1.0 + 1e-6);
  // Same ratios between regions: only the common factor differs.
  for (int r = 1; r < survey.num_regions(); ++r) {
    EXPECT_TRUE(IsClose(Ratio(w.nodes.front(), 0, r), Ratio(c.nodes.front(), 0, r), 1e-12));
  }
}

// Three regions, two headings of one item each, and a national expenditure
// file (no region column): food 60, rent 40.
Survey NationalWeightsSurvey() {
  const std::string folder = MakeTempDir("national");
  WriteTextFile(folder + "/prices.csv",
                "region,item,price,heading\n"
                "r1,bread,1,food\nr2,bread,2,food\nr3,bread,4,food\n"
                "r1,flat,3,rent\nr2,flat,3,rent\nr3,flat,3,rent\n");
  WriteTextFile(folder + "/expenditure.csv", "heading,expenditure\nfood,60\nrent,40\n");
  // With regions.csv, so a national row (no region) is not checked against it.
  WriteTextFile(folder + "/regions.csv", "region\nr1\nr2\nr3\n");
  return LoadFrom(folder,
                  "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
                  "  regions: regions.csv\n"
                  "classification:\n  all: [food, rent]\n");
}

TEST(ComputeParities, NationalWeightsCompareEveryRegionOnTheNationalBasket) {
  // Hand computation of the Lowe index (CPI Manual 2004, ch. 15) with the
  // national basket: food parities 0.5, 1, 2 (geometric mean 1), rent 1, 1,
  // 1; quantities 60 and 40 at those mean prices; the basket costs 60 x 0.5
  // + 40 = 70 in r1, 100 in r2 and 60 x 2 + 40 = 160 in r3. With one basket
  // Laspeyres = Paasche, so GEKS-Fisher, the spanning tree and Geary-Khamis
  // (quantities equal in every region) all give these ratios.
  const Survey survey = NationalWeightsSurvey();
  ASSERT_TRUE(survey.national_weights);
  for (const std::string method :
       {"geks-fisher", "spanning-tree", "geary-khamis", "ikle-dikhanov-balk"}) {
    ComputeOptions options;
    options.aggregation = method;
    const ParityResult result = Compute(survey, options);
    const NodeResult& root = result.nodes.front();
    EXPECT_NEAR(Ratio(root, 0, 1), 100.0 / 70.0, 1e-12) << method;
    EXPECT_NEAR(Ratio(root, 0, 2), 160.0 / 70.0, 1e-12) << method;
    // Regional spending is unknown: no nominal or real expenditure.
    EXPECT_TRUE(std::isnan(root.expenditure(0))) << method;
    EXPECT_TRUE(std::isnan(root.real_expenditure(0))) << method;
  }
}

TEST(ComputeParities, NationalWeightsRefuseAReferenceWeightedBySpending) {
  const Survey survey = NationalWeightsSurvey();
  ComputeOptions options;
  options.reference.kind = ReferenceKind::kCountry;
  ParityResult result;
  ComputeSummary summary;
  EXPECT_FALSE(ComputeParities(survey, options, &result, &summary));
  EXPECT_EQ(summary.message,
            "reference 'country' weighs regions by their expenditure, but the expenditure file "
            "gives national weights (no region column); use mean or a region code");
}

TEST(ComputeParities, CpdOnACompleteTableEqualsGeksJevons) {
  // Summers (1973): unweighted CPD on a complete table gives ratios of
  // geometric mean prices, which is also GEKS over Jevons bilaterals.
  const Survey survey = LoadSynthetic(MakeSynthetic(1.0, 0.05, 11), "complete");
  ComputeOptions jevons;
  jevons.elementary.method = "jevons-geks";
  const ParityResult cpd = Compute(survey), geks = Compute(survey, jevons);
  for (const NodeResult& node : cpd.nodes) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      EXPECT_TRUE(IsClose(node.parity(r), geks.nodes[node.node].parity(r), 1e-10));
    }
  }
}

TEST(ComputeParities, CpdAndGeksJevonsDifferOnAnIncompleteTable) {
  // Summers (1973): with missing prices the two no longer coincide.
  const Survey survey = LoadSynthetic(MakeSynthetic(0.6, 0.05, 12), "incomplete");
  ComputeOptions jevons;
  jevons.elementary.method = "jevons-geks";
  const ParityResult cpd = Compute(survey), geks = Compute(survey, jevons);
  double largest = 0.0;
  for (int r = 0; r < survey.num_regions(); ++r) {
    largest = std::max(largest, std::abs(std::log(cpd.nodes[1].parity(r) / geks.nodes[1].parity(r))));
  }
  EXPECT_GT(largest, 1e-4);
}

TEST(ComputeParities, HeadingParitiesRecoverTheTrueRegionalPriceLevels) {
  const synthetic::SyntheticSurvey truth = MakeSynthetic(0.7, 0.01, 21, 20, 6, 12);
  const Survey survey = LoadSynthetic(truth, "recovery");
  const ParityResult result = Compute(survey);
  const int num_headings = static_cast<int>(truth.headings.size());
  for (int h = 0; h < num_headings; ++h) {
    const int heading = survey.classification.FindHeading(truth.headings[h]);
    ASSERT_GE(heading, 0);
    const int node = survey.classification.headings()[heading];
    // The truth normalised like the parities: geometric mean 100.
    double mean = 0.0;
    for (size_t r = 0; r < truth.regions.size(); ++r) mean += truth.true_log_level[r * num_headings + h];
    mean /= truth.regions.size();
    for (size_t r = 0; r < truth.regions.size(); ++r) {
      const int region = survey.regions.Find(truth.regions[r]);
      const double expected = 100.0 * std::exp(truth.true_log_level[r * num_headings + h] - mean);
      // Noise sd 0.01 per quote and about 8 items per region: errors of a
      // few tenths of a percent; 1.5 % leaves room without hiding bias.
      EXPECT_NEAR(result.nodes[node].parity(region) / expected, 1.0, 0.015)
          << truth.headings[h] << " " << truth.regions[r];
    }
  }
}

TEST(ComputeParities, RealExpenditureIsNominalOverParityAndPerCapitaIndexAveragesToTheCountry) {
  const Survey survey = LoadSynthetic(MakeSynthetic(0.7, 0.05, 31), "real");
  const ParityResult result = Compute(survey);
  const NodeResult& root = result.nodes.front();
  double total_real = 0.0, total_population = 0.0;
  for (int r = 0; r < survey.num_regions(); ++r) {
    EXPECT_TRUE(IsClose(root.real_expenditure(r), root.expenditure(r) / (root.parity(r) / 100.0), 1e-12));
    total_real += root.real_expenditure(r);
    total_population += survey.region_population[r];
  }
  // Population-weighted mean of the per-capita index is 100 by construction.
  double weighted = 0.0;
  for (int r = 0; r < survey.num_regions(); ++r) {
    weighted += root.real_per_capita_index(r) * survey.region_population[r] / total_population;
  }
  EXPECT_TRUE(IsClose(weighted, 100.0, 1e-10));
  EXPECT_GT(total_real, 0.0);
}

TEST(ComputeParities, RankOneIsTheDearestRegion) {
  const Survey survey = LoadSynthetic(MakeSynthetic(0.7, 0.05, 41), "rank");
  const ParityResult result = Compute(survey);
  const NodeResult& root = result.nodes.front();
  int dearest = 0;
  for (int r = 1; r < survey.num_regions(); ++r) {
    if (root.parity(r) > root.parity(dearest)) dearest = r;
  }
  EXPECT_EQ(root.rank(dearest), 1);
}

TEST(ComputeParities, UnlinkedHeadingFailsAndNamesTheGroups) {
  const std::string folder = MakeTempDir("unlinked");
  WriteTextFile(folder + "/prices.csv",
                "region,item,price,heading\n"
                "north,a,1,bread\nsouth,a,2,bread\n"
                "east,b,3,bread\nwest,b,4,bread\n");
  WriteTextFile(folder + "/expenditure.csv",
                "region,heading,expenditure\nnorth,bread,1\nsouth,bread,1\neast,bread,1\nwest,bread,1\n");
  const Survey survey = LoadFrom(folder, "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n");
  ParityResult result;
  ComputeSummary summary;
  EXPECT_FALSE(ComputeParities(survey, ComputeOptions(), &result, &summary));
  EXPECT_EQ(summary.outcome, ComputeOutcome::kComputationFailed);
  EXPECT_EQ(summary.message.substr(0, summary.message.find('\n')),
            "heading 'bread' is not linked: its regions fall into 2 groups that share no item: "
            "{east, west} and {north, south}");
}

// A linked heading whose fit failed was reported as "not linked: its
// regions fall into 1 groups": the message now says what failed.
// Three regions pricing items a and b of 'bread'; the quote weights of the
// b quotes (north, south, east) as given, those of a 1.
Survey BreadWithWeights(const std::string& folder, const std::array<std::string, 3>& b_weights) {
  WriteTextFile(folder + "/prices.csv",
                "region,item,price,heading,weight\n"
                "north,a,1.73,bread,1\nnorth,b,1.17,bread," + b_weights[0] + "\nsouth,a,2.56,bread,1\n"
                "south,b,1.74,bread," + b_weights[1] + "\neast,a,1.94,bread,1\neast,b,2.41,bread," +
                    b_weights[2] + "\n");
  WriteTextFile(folder + "/expenditure.csv",
                "region,heading,expenditure\nnorth,bread,1\nsouth,bread,1\neast,bread,1\n");
  return LoadFrom(folder, "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n");
}

TEST(ComputeParities, LinkedHeadingWhoseFitFailsSaysWhy) {
  const Survey survey = BreadWithWeights(MakeTempDir("singular"), {"1e17", "1e20", "1e17"});
  ComputeOptions options;
  options.elementary.quote_weighted_cells = true;
  ParityResult result;
  ComputeSummary summary;
  EXPECT_FALSE(ComputeParities(survey, options, &result, &summary));
  EXPECT_EQ(summary.outcome, ComputeOutcome::kComputationFailed);
  EXPECT_EQ(summary.message,
            "heading 'bread' has no parities: the CPD normal equations are numerically singular; "
            "check for weights spanning many orders of magnitude; its cells' quote weights span a "
            "factor of 1e+20 (from 1.00 to 1e+20; cpd_cell_weights: quote-weights)");
}

// Below the failure the fit loses digits silently: a quote weight keyed
// with ten extra zeros is named, a spread of 1e7 is not.
TEST(ComputeParities, WarnsOfQuoteWeightsManyPowersOfTenApart) {
  const std::string folder = MakeTempDir("wide_weights");
  auto warnings = [&](const std::string& heavy) {
    const Survey survey = BreadWithWeights(folder, {heavy, "1", "1"});
    ComputeOptions options;
    options.elementary.quote_weighted_cells = true;
    ParityResult result;
    ComputeSummary summary;
    EXPECT_TRUE(ComputeParities(survey, options, &result, &summary)) << summary.message;
    options.elementary.method = "jevons-geks";  // weighs no cell: nothing to say
    ComputeSummary unweighted;
    EXPECT_TRUE(ComputeParities(survey, options, &result, &unweighted)) << unweighted.message;
    EXPECT_EQ(unweighted.warnings, std::vector<std::string>());
    return summary.warnings;
  };
  EXPECT_EQ(warnings("1e10"),
            std::vector<std::string>{
                "heading 'bread': its cells' quote weights span a factor of 1e+10 (from 1.00 to "
                "1e+10; cpd_cell_weights: quote-weights); beyond 1e8 the CPD loses digits and its "
                "parities may be off; check the weight column"});
  EXPECT_EQ(warnings("1e7"), std::vector<std::string>());
}

TEST(ComputeParities, AggregateWithoutPricedHeadingsFailsNamingItsHeadings) {
  // Before, the message read "... fall into 0 groups with no heading in common: ".
  const std::string folder = MakeTempDir("unpriced_aggregate");
  WriteTextFile(folder + "/prices.csv",
                "region,item,price,heading\nnorth,a,1,bread\nsouth,a,2,bread\n");
  WriteTextFile(
      folder + "/expenditure.csv",
      "region,heading,expenditure\nnorth,bread,1\nsouth,bread,1\nnorth,fuel,1\nnorth,fares,2\n");
  const Survey survey =
      LoadFrom(folder,
               "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n"
               "classification:\n  all:\n    food: [bread]\n    transport: [fuel, fares]\n");
  ParityResult result;
  ComputeSummary summary;
  EXPECT_FALSE(ComputeParities(survey, ComputeOptions(), &result, &summary));
  EXPECT_EQ(summary.outcome, ComputeOutcome::kComputationFailed);
  EXPECT_EQ(summary.message,
            "aggregate 'transport' has no parities: none of its 2 headings (fuel, fares) has price "
            "quotes; price one of them, or take the aggregate out of the classification");
}

TEST(ComputeParities, UnknownReferenceRegionIsRejectedWithASuggestion) {
  const Survey survey = SixCommoditySurvey("six_reference");
  ComputeOptions options;
  options.reference = Reference::FromString("s7");
  ParityResult result;
  ComputeSummary summary;
  EXPECT_FALSE(ComputeParities(survey, options, &result, &summary));
  EXPECT_EQ(summary.outcome, ComputeOutcome::kInvalidOptions);
  EXPECT_EQ(summary.message, "reference region 's7' is not in the survey; did you mean 's1'?");
}

TEST(ComputeParities, RegionWithoutPricesInAHeadingHasNoParityThereButOneOverall) {
  const std::string folder = MakeTempDir("missing_region");
  WriteTextFile(folder + "/prices.csv",
                "region,item,price,heading\n"
                "north,a,1,bread\nsouth,a,2,bread\n"
                "north,b,3,rent\nsouth,b,4,rent\neast,b,5,rent\n");
  WriteTextFile(folder + "/expenditure.csv",
                "region,heading,expenditure\nnorth,bread,1\nsouth,bread,1\neast,bread,1\n"
                "north,rent,2\nsouth,rent,2\neast,rent,2\n");
  const Survey survey = LoadFrom(folder, "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\n");
  const ParityResult result = Compute(survey);
  const int east = survey.regions.Find("east");
  const int bread = survey.classification.FindNode("bread");
  EXPECT_TRUE(std::isnan(result.nodes[bread].parity(east)));
  EXPECT_TRUE(std::isfinite(result.nodes.front().parity(east)));
  EXPECT_EQ(result.nodes.front().num_headings(east), 1);
}

TEST(ParityMatrixCsv, EveryMatrixIsTransitive) {
  // Transitivity: m(a, c) = m(a, b) m(b, c) / 100 for every triple.
  const Survey survey = LoadSynthetic(MakeSynthetic(0.7, 0.05, 51), "transitive");
  const ParityResult result = Compute(survey);
  for (const NodeResult& node : result.nodes) {
    const auto rows = ReadRows(ParityMatrixCsv(survey, node));
    const size_t n = rows.size() - 1;
    ASSERT_EQ(n, static_cast<size_t>(survey.num_regions()));
    for (size_t a = 1; a <= n; ++a) {
      for (size_t b = 1; b <= n; ++b) {
        for (size_t c = 1; c <= n; c += 3) {
          const double direct = std::stod(rows[a][c]);
          const double via = std::stod(rows[a][b]) * std::stod(rows[b][c]) / 100.0;
          EXPECT_NEAR(direct, via, 1e-5 * std::max(1.0, direct));
        }
      }
    }
  }
}

// Eigen blocks a long product's sums by the cache sizes it reads from the
// CPU; ComputeParities fixes them, so a CPU whose caches differ (here
// pretended by setting Eigen's sizes) gives the same bits. 1,000 regions x
// 50 items is the shape where an L1 of 16 KiB instead of 32 changed most
// entries of the CPD's Schur complement.
TEST(ComputeParities, GivesTheSameBitsWhateverCacheSizesEigenReads) {
  const Survey survey = LoadSynthetic(MakeSynthetic(0.7, 0.05, 21, 1000, 2, 50), "cache_sizes");
  const ParityResult first = Compute(survey);
  Eigen::setCpuCacheSizes(16 << 10, 256 << 10, 4 << 20);
  const ParityResult other = Compute(survey);
  EXPECT_EQ(Eigen::l1CacheSize(), 32 << 10);  // fixed again by the computation
  ASSERT_EQ(first.headings.size(), other.headings.size());
  int64_t num_compared = 0;
  for (size_t h = 0; h < first.headings.size(); ++h) {
    for (int r = 0; r < survey.num_regions(); ++r) {
      const double a = first.headings[h].log_parity[r], b = other.headings[h].log_parity[r];
      EXPECT_TRUE(std::memcmp(&a, &b, sizeof a) == 0) << "heading " << h << ", region " << r;
      EXPECT_TRUE(std::memcmp(&first.headings[h].log_se[r], &other.headings[h].log_se[r], sizeof a) == 0);
      ++num_compared;
    }
  }
  EXPECT_EQ(num_compared, 2000);
}

}  // namespace
}  // namespace paritas
