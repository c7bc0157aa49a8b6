// Scalar index formulas against the CPI Manual's published six-commodity
// example, hand-computed cases, and theorems that hold for any data.
#include "paritas/aggregation/index_formulas.h"

#include <cmath>
#include <cstdint>
#include <fstream>
#include <limits>
#include <map>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::TestDataPath;

// Prices and quantities of one situation of the published example.
struct Situation {
  std::vector<double> price;
  std::vector<double> quantity;
};

// Reads tests/data/published/six_commodity_prices_quantities.csv (ILO et al.,
// Consumer Price Index Manual 2004, ch. 19, tables 19.1-19.2), one
// situation per region, commodities in file order.
std::vector<Situation> ReadSixCommodityData() {
  std::map<int, Situation> by_situation;
  for (const testing::SixCommodityRow& row : testing::ReadSixCommodityRows()) {
    Situation& s = by_situation[row.situation];
    s.price.push_back(row.price);
    s.quantity.push_back(row.quantity);
  }
  std::vector<Situation> result;
  for (auto& [unused, s] : by_situation) result.push_back(s);
  return result;
}

// Published indices of each situation against situation 1, by column name.
std::map<std::string, std::vector<double>> ReadSixCommodityIndices() {
  std::ifstream in(TestDataPath("published/six_commodity_indices.csv"));
  std::string line;
  std::getline(in, line);
  std::vector<std::string> names;
  std::stringstream header(line);
  for (std::string name; std::getline(header, name, ',');) names.push_back(name);
  std::map<std::string, std::vector<double>> columns;
  while (std::getline(in, line)) {
    if (line.empty()) continue;
    std::stringstream fields(line);
    std::string value;
    for (std::size_t c = 0; std::getline(fields, value, ','); ++c) {
      columns[names[c]].push_back(std::stod(value));
    }
  }
  return columns;
}

// Deterministic positive test data: uniform in [low, high) from raw 53-bit
// draws, so the values do not depend on the library's distributions.
class RandomData {
 public:
  explicit RandomData(std::uint64_t seed) : engine_(seed) {}
  double Uniform(double low, double high) {
    return low + (high - low) * static_cast<double>(engine_() >> 11) * 0x1.0p-53;
  }
  std::vector<double> Vector(int size, double low, double high) {
    std::vector<double> v(size);
    for (double& x : v) x = Uniform(low, high);
    return v;
  }

 private:
  std::mt19937_64 engine_;
};

double Sum(const std::vector<double>& x) {
  double sum = 0.0;
  for (double v : x) sum += v;
  return sum;
}

TEST(IndexFormulas, WeightedIndicesReproduceCpiManualSixCommodityExample) {
  // CPI Manual 2004, ch. 19 (inputs tables 19.1-19.2): fixed-base indices of
  // each situation against situation 1, exact values to 6 decimals.
  const std::vector<Situation> data = ReadSixCommodityData();
  auto published = ReadSixCommodityIndices();
  ASSERT_EQ(data.size(), 5u);
  ASSERT_EQ(published["fisher"].size(), 5u);
  const Situation& base = data[0];
  for (std::size_t t = 0; t < data.size(); ++t) {
    SCOPED_TRACE("situation " + std::to_string(t + 1));
    const Situation& s = data[t];
    PARITAS_EXPECT_CLOSE(Laspeyres(base.price, s.price, base.quantity), published["laspeyres"][t],
                         1e-6);
    PARITAS_EXPECT_CLOSE(Paasche(base.price, s.price, s.quantity), published["paasche"][t], 1e-6);
    PARITAS_EXPECT_CLOSE(Fisher(base.price, s.price, base.quantity, s.quantity),
                         published["fisher"][t], 1e-6);
    PARITAS_EXPECT_CLOSE(Tornqvist(base.price, s.price, base.quantity, s.quantity),
                         published["tornqvist"][t], 1e-6);
  }
}

TEST(IndexFormulas, JevonsReproducesSixCommodityExample) {
  // Jevons of the CPI Manual 2004 ch. 19 prices against situation 1, exact
  // values listed in tests/data/published/README.md.
  const std::vector<Situation> data = ReadSixCommodityData();
  const double expected[] = {1.0, 1.241920, 0.956335, 0.725581, 0.632456};
  for (std::size_t t = 0; t < data.size(); ++t) {
    PARITAS_EXPECT_CLOSE(Jevons(data[0].price, data[t].price), expected[t], 1e-6);
  }
}

TEST(IndexFormulas, EveryFormulaGivesTwoWhenAllPricesDouble) {
  // Proportionality (CPI Manual 2004 ch. 16): p_b = 2 p_a gives 2 whatever
  // the quantities.
  const std::vector<double> price_a = {1.5, 4.0};
  const std::vector<double> price_b = {3.0, 8.0};
  const std::vector<double> quantity_a = {2.0, 1.0};
  const std::vector<double> quantity_b = {0.5, 7.0};
  PARITAS_EXPECT_CLOSE(Jevons(price_a, price_b), 2.0, 1e-15);
  PARITAS_EXPECT_CLOSE(Dutot(price_a, price_b), 2.0, 1e-15);
  PARITAS_EXPECT_CLOSE(Carli(price_a, price_b), 2.0, 1e-15);
  PARITAS_EXPECT_CLOSE(Laspeyres(price_a, price_b, quantity_a), 2.0, 1e-15);
  PARITAS_EXPECT_CLOSE(Paasche(price_a, price_b, quantity_b), 2.0, 1e-15);
  PARITAS_EXPECT_CLOSE(Fisher(price_a, price_b, quantity_a, quantity_b), 2.0, 1e-15);
  PARITAS_EXPECT_CLOSE(Tornqvist(price_a, price_b, quantity_a, quantity_b), 2.0, 1e-15);
  PARITAS_EXPECT_CLOSE(Walsh(price_a, price_b, quantity_a, quantity_b), 2.0, 1e-15);
}

TEST(IndexFormulas, TwoItemCaseMatchesHandComputation) {
  // Item 1 doubles, item 2 is unchanged; q_a = (1, 3), q_b = (3, 1).
  const std::vector<double> price_a = {1.0, 1.0};
  const std::vector<double> price_b = {2.0, 1.0};
  const std::vector<double> quantity_a = {1.0, 3.0};
  const std::vector<double> quantity_b = {3.0, 1.0};
  PARITAS_EXPECT_CLOSE(Jevons(price_a, price_b), std::sqrt(2.0), 1e-15);
  PARITAS_EXPECT_CLOSE(Dutot(price_a, price_b), 1.5, 1e-15);
  PARITAS_EXPECT_CLOSE(Carli(price_a, price_b), 1.5, 1e-15);
  PARITAS_EXPECT_CLOSE(Laspeyres(price_a, price_b, quantity_a), 5.0 / 4.0, 1e-15);
  PARITAS_EXPECT_CLOSE(Paasche(price_a, price_b, quantity_b), 7.0 / 4.0, 1e-15);
  PARITAS_EXPECT_CLOSE(Fisher(price_a, price_b, quantity_a, quantity_b), std::sqrt(35.0 / 16.0),
                       1e-15);
  // Shares of item 1: 1/4 in a, 6/7 in b; only item 1 has a non-zero log.
  PARITAS_EXPECT_CLOSE(Tornqvist(price_a, price_b, quantity_a, quantity_b),
                       std::exp(0.5 * (0.25 + 6.0 / 7.0) * std::log(2.0)), 1e-15);
  // Geometric mean basket is (sqrt 3, sqrt 3): (2 + 1) / (1 + 1).
  PARITAS_EXPECT_CLOSE(Walsh(price_a, price_b, quantity_a, quantity_b), 1.5, 1e-15);
}

TEST(IndexFormulas, EmptyInputGivesNaN) {
  const std::vector<double> none;
  EXPECT_TRUE(std::isnan(Jevons(none, none)));
  EXPECT_TRUE(std::isnan(Dutot(none, none)));
  EXPECT_TRUE(std::isnan(Carli(none, none)));
  EXPECT_TRUE(std::isnan(Laspeyres(none, none, none)));
  EXPECT_TRUE(std::isnan(Paasche(none, none, none)));
  EXPECT_TRUE(std::isnan(Fisher(none, none, none, none)));
  EXPECT_TRUE(std::isnan(Tornqvist(none, none, none, none)));
  EXPECT_TRUE(std::isnan(Walsh(none, none, none, none)));
}

TEST(IndexFormulas, SymmetricFormulasPassTheReversalTest) {
  // Time reversal test (CPI Manual 2004 ch. 16, regions for periods):
  // Fisher, Törnqvist, Walsh and Jevons satisfy I(a,b) I(b,a) = 1.
  RandomData random(20240611);
  for (int trial = 0; trial < 20; ++trial) {
    const int n = 1 + trial % 7;
    const auto pa = random.Vector(n, 0.2, 30.0);
    const auto pb = random.Vector(n, 0.2, 30.0);
    const auto qa = random.Vector(n, 0.0, 5.0);
    const auto qb = random.Vector(n, 0.0, 5.0);
    PARITAS_EXPECT_CLOSE(Fisher(pa, pb, qa, qb) * Fisher(pb, pa, qb, qa), 1.0, 1e-14);
    PARITAS_EXPECT_CLOSE(Tornqvist(pa, pb, qa, qb) * Tornqvist(pb, pa, qb, qa), 1.0, 1e-14);
    PARITAS_EXPECT_CLOSE(Walsh(pa, pb, qa, qb) * Walsh(pb, pa, qb, qa), 1.0, 1e-14);
    PARITAS_EXPECT_CLOSE(Jevons(pa, pb) * Jevons(pb, pa), 1.0, 1e-14);
    PARITAS_EXPECT_CLOSE(Dutot(pa, pb) * Dutot(pb, pa), 1.0, 1e-14);
  }
}

TEST(IndexFormulas, CarliFailsReversalUpwardsAndExceedsJevons) {
  // Arithmetic-geometric mean inequality, behind the Carli's known upward
  // bias (CPI Manual 2004, elementary indices chapter; from memory): Carli >=
  // Jevons, and Carli(a,b) Carli(b,a) > 1 unless all relatives are equal.
  const std::vector<double> pa = {1.0, 2.0, 4.0};
  const std::vector<double> pb = {3.0, 1.0, 4.0};
  EXPECT_GT(Carli(pa, pb), Jevons(pa, pb));
  EXPECT_GT(Carli(pa, pb) * Carli(pb, pa), 1.0 + 1e-3);
}

TEST(IndexFormulas, PaascheIsReciprocalOfReversedLaspeyres) {
  // Duality (CPI Manual 2004 ch. 15): P(a,b) = 1 / L(b,a) by definition.
  RandomData random(7);
  for (int trial = 0; trial < 20; ++trial) {
    const int n = 1 + trial % 6;
    const auto pa = random.Vector(n, 0.5, 9.0);
    const auto pb = random.Vector(n, 0.5, 9.0);
    const auto qb = random.Vector(n, 0.1, 4.0);
    PARITAS_EXPECT_CLOSE(Paasche(pa, pb, qb), 1.0 / Laspeyres(pb, pa, qb), 1e-14);
  }
}

TEST(IndexFormulas, FisherPriceTimesFisherQuantityEqualsExpenditureRatio) {
  // Product test (CPI Manual 2004 ch. 15): the Fisher quantity index is the
  // same formula with prices and quantities swapped.
  RandomData random(99);
  for (int trial = 0; trial < 20; ++trial) {
    const int n = 1 + trial % 8;
    const auto pa = random.Vector(n, 0.5, 9.0);
    const auto pb = random.Vector(n, 0.5, 9.0);
    const auto qa = random.Vector(n, 0.1, 4.0);
    const auto qb = random.Vector(n, 0.1, 4.0);
    double value_a = 0.0, value_b = 0.0;
    for (int i = 0; i < n; ++i) {
      value_a += pa[i] * qa[i];
      value_b += pb[i] * qb[i];
    }
    PARITAS_EXPECT_CLOSE(Fisher(pa, pb, qa, qb) * Fisher(qa, qb, pa, pb), value_b / value_a,
                         1e-14);
  }
}

TEST(IndexFormulas, TornqvistLogContributionsSumToLogIndex) {
  const std::vector<Situation> data = ReadSixCommodityData();
  for (const Situation& s : data) {
    std::vector<double> c(s.price.size());
    TornqvistLogContributions(data[0].price, s.price, data[0].quantity, s.quantity, c);
    PARITAS_EXPECT_CLOSE(Sum(c),
                         std::log(Tornqvist(data[0].price, s.price, data[0].quantity, s.quantity)),
                         1e-14);
  }
  RandomData random(31);
  for (int n = 1; n <= 12; ++n) {
    const auto pa = random.Vector(n, 0.1, 50.0);
    const auto pb = random.Vector(n, 0.1, 50.0);
    const auto qa = random.Vector(n, 0.0, 3.0);
    const auto qb = random.Vector(n, 0.0, 3.0);
    std::vector<double> c(n);
    TornqvistLogContributions(pa, pb, qa, qb, c);
    PARITAS_EXPECT_CLOSE(Sum(c), std::log(Tornqvist(pa, pb, qa, qb)), 1e-14);
  }
}

TEST(IndexFormulas, FisherContributionsSumToFisherMinusOne) {
  // Reinsdorf, Diewert and Ehemann (2002): the contributions add up to F - 1.
  const std::vector<Situation> data = ReadSixCommodityData();
  for (const Situation& s : data) {
    std::vector<double> c(s.price.size());
    FisherContributions(data[0].price, s.price, data[0].quantity, s.quantity, c);
    PARITAS_EXPECT_CLOSE(Sum(c),
                         Fisher(data[0].price, s.price, data[0].quantity, s.quantity) - 1.0,
                         1e-14);
  }
  RandomData random(32);
  for (int n = 1; n <= 12; ++n) {
    const auto pa = random.Vector(n, 0.1, 50.0);
    const auto pb = random.Vector(n, 0.1, 50.0);
    const auto qa = random.Vector(n, 0.01, 3.0);
    const auto qb = random.Vector(n, 0.01, 3.0);
    std::vector<double> c(n);
    FisherContributions(pa, pb, qa, qb, c);
    PARITAS_EXPECT_CLOSE(Sum(c), Fisher(pa, pb, qa, qb) - 1.0, 1e-13);
  }
}

TEST(IndexFormulas, FisherContributionsMatchTheShareFormOfTheWeights) {
  // The same weights written with expenditure shares,
  // w_i = (s_ai + F s_bi / r_i) / (1 + F sum_j s_bj / r_j), computed here
  // independently of the basket form the library uses.
  RandomData random(33);
  for (int n = 1; n <= 9; ++n) {
    const auto pa = random.Vector(n, 0.1, 20.0);
    const auto pb = random.Vector(n, 0.1, 20.0);
    const auto qa = random.Vector(n, 0.01, 3.0);
    const auto qb = random.Vector(n, 0.01, 3.0);
    const double fisher = Fisher(pa, pb, qa, qb);
    double value_a = 0.0, value_b = 0.0;
    for (int i = 0; i < n; ++i) {
      value_a += pa[i] * qa[i];
      value_b += pb[i] * qb[i];
    }
    double normaliser = 1.0;
    for (int i = 0; i < n; ++i) normaliser += fisher * (pb[i] * qb[i] / value_b) * pa[i] / pb[i];
    std::vector<double> c(n);
    FisherContributions(pa, pb, qa, qb, c);
    for (int i = 0; i < n; ++i) {
      const double relative = pb[i] / pa[i];
      const double weight =
          (pa[i] * qa[i] / value_a + fisher * (pb[i] * qb[i] / value_b) / relative) / normaliser;
      PARITAS_EXPECT_CLOSE(c[i], weight * (relative - 1.0), 1e-13);
    }
  }
}

TEST(IndexFormulas, FisherContributionOfAnUnchangedPriceIsZero) {
  const std::vector<double> pa = {1.0, 2.0, 5.0};
  const std::vector<double> pb = {1.5, 2.0, 4.0};
  const std::vector<double> qa = {2.0, 1.0, 1.0};
  const std::vector<double> qb = {1.0, 1.0, 2.0};
  std::vector<double> c(3);
  FisherContributions(pa, pb, qa, qb, c);
  EXPECT_EQ(c[1], 0.0);
  EXPECT_GT(c[0], 0.0);
  EXPECT_LT(c[2], 0.0);
}

}  // namespace
}  // namespace paritas
