// All-pairs matrices against the published six-commodity example and,
// entry by entry, against the scalar formulas on incomplete random data.
#include "paritas/aggregation/bilateral_matrix.h"

#include <algorithm>
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

#include "paritas/aggregation/aggregation.h"
#include "paritas/aggregation/geks.h"
#include "paritas/aggregation/index_formulas.h"
#include "paritas/output/output_writers.h"
#include "test_util.h"

namespace paritas {
namespace {

using ::paritas::testing::TestDataPath;

constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();
constexpr double kInf = std::numeric_limits<double>::infinity();

// The CPI Manual 2004 ch. 19 six-commodity data (tables 19.1-19.2) as five
// regions x six headings, one item per heading.
struct SixCommodity {
  Eigen::MatrixXd price = Eigen::MatrixXd::Zero(5, 6);
  Eigen::MatrixXd quantity = Eigen::MatrixXd::Zero(5, 6);
};

SixCommodity ReadSixCommodity() {
  SixCommodity data;
  int num_rows = 0;
  for (const testing::SixCommodityRow& row : testing::ReadSixCommodityRows()) {
    const int h = std::stoi(row.commodity.substr(1)) - 1;  // "c1" .. "c6".
    data.price(row.situation - 1, h) = row.price;
    data.quantity(row.situation - 1, h) = row.quantity;
    ++num_rows;
  }
  EXPECT_EQ(num_rows, 30);
  return data;
}

// Columns of six_commodity_indices.csv: laspeyres, paasche, fisher,
// tornqvist of situations 1..5 against situation 1.
Eigen::MatrixXd ReadSixCommodityIndices() {
  Eigen::MatrixXd indices = Eigen::MatrixXd::Constant(5, 4, kNaN);
  std::ifstream in(TestDataPath("published/six_commodity_indices.csv"));
  std::string line;
  std::getline(in, line);
  EXPECT_EQ(line, "situation,laspeyres,paasche,fisher,tornqvist");
  while (std::getline(in, line)) {
    if (line.empty()) continue;
    std::stringstream fields(line);
    std::string value;
    std::getline(fields, value, ',');
    const int r = std::stoi(value) - 1;
    for (int c = 0; c < 4; ++c) {
      std::getline(fields, value, ',');
      indices(r, c) = std::stod(value);
    }
  }
  return indices;
}

// Uniform in [low, high) from raw 53-bit draws: same values on every
// standard library.
class RandomData {
 public:
  explicit RandomData(std::uint64_t seed) : engine_(seed) {}
  double Uniform(double low, double high) {
    return low + (high - low) * static_cast<double>(engine_() >> 11) * 0x1.0p-53;
  }

 private:
  std::mt19937_64 engine_;
};

TEST(AllPairsWeighted, ReproducesCpiManualSixCommodityIndices) {
  // CPI Manual 2004 ch. 19: row 0 of each matrix is the published
  // fixed-base index against situation 1.
  const SixCommodity data = ReadSixCommodity();
  const Eigen::MatrixXd published = ReadSixCommodityIndices();
  const BilateralMatrices m =
      AllPairsWeighted(data.price, data.price.cwiseProduct(data.quantity));
  for (int b = 0; b < 5; ++b) {
    SCOPED_TRACE("region " + std::to_string(b + 1));
    PARITAS_EXPECT_CLOSE(m.laspeyres(0, b), published(b, 0), 1e-6);
    PARITAS_EXPECT_CLOSE(m.paasche(0, b), published(b, 1), 1e-6);
    PARITAS_EXPECT_CLOSE(m.fisher(0, b), published(b, 2), 1e-6);
    PARITAS_EXPECT_CLOSE(m.tornqvist(0, b), published(b, 3), 1e-6);
    EXPECT_EQ(m.num_matched(0, b), 6);
  }
}

TEST(AllPairsWeighted, ChainedFisherReproducesPublishedValues) {
  // Chained Fisher of the CPI Manual 2004 ch. 19 example (exact values in
  // tests/data/published/README.md): products of adjacent bilaterals.
  const SixCommodity data = ReadSixCommodity();
  const BilateralMatrices m =
      AllPairsWeighted(data.price, data.price.cwiseProduct(data.quantity));
  const double expected[] = {1.401050, 1.318509, 1.268915, 1.222610};
  double chained = 1.0;
  for (int t = 1; t < 5; ++t) {
    chained *= m.fisher(t - 1, t);
    PARITAS_EXPECT_CLOSE(chained, expected[t - 1], 1e-6);
  }
}

TEST(AllPairsJevons, ReproducesSixCommodityJevons) {
  // Exact Jevons of the ch. 19 prices against situation 1 (README.md).
  const SixCommodity data = ReadSixCommodity();
  Eigen::MatrixXi num_matched;
  const Eigen::MatrixXd jevons = AllPairsJevons(data.price.array().log().matrix(),
                                                Eigen::MatrixXd::Ones(5, 6), &num_matched);
  const double expected[] = {1.0, 1.241920, 0.956335, 0.725581, 0.632456};
  for (int b = 0; b < 5; ++b) PARITAS_EXPECT_CLOSE(jevons(0, b), expected[b], 1e-6);
  EXPECT_TRUE((num_matched.array() == 6).all());
}

// Random regions x headings data with holes of every kind: missing (NaN)
// prices, zero and negative prices, zero and NaN expenditures, infinities.
// Regions 0 and 1 price disjoint headings so that pair has no match.
void MakeIncompleteData(int num_regions, int num_headings, std::uint64_t seed,
                        Eigen::MatrixXd* price, Eigen::MatrixXd* expenditure) {
  RandomData random(seed);
  price->resize(num_regions, num_headings);
  expenditure->resize(num_regions, num_headings);
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < num_headings; ++h) {
      (*price)(r, h) = random.Uniform(0.05, 200.0);
      (*expenditure)(r, h) = random.Uniform(0.0, 1000.0);
      const double hole = random.Uniform(0.0, 1.0);
      if (hole < 0.10) (*price)(r, h) = kNaN;
      else if (hole < 0.13) (*price)(r, h) = 0.0;
      else if (hole < 0.15) (*price)(r, h) = -3.0;
      else if (hole < 0.18) (*expenditure)(r, h) = 0.0;
      else if (hole < 0.20) (*expenditure)(r, h) = kNaN;
      else if (hole < 0.21) (*price)(r, h) = kInf;
      else if (hole < 0.22) (*expenditure)(r, h) = kInf;
    }
  }
  for (int h = 0; h < num_headings; ++h) {
    (*price)(0, h) = h % 2 == 0 ? random.Uniform(1.0, 5.0) : kNaN;
    (*price)(1, h) = h % 2 == 1 ? random.Uniform(1.0, 5.0) : kNaN;
  }
}

// Zero expenditure keeps the heading (quantity 0); see the hand computation
// in ZeroExpenditureOnOneSideKeepsTheHeadingWithCpiManualWeights.
bool Valid(double p, double e) {
  return std::isfinite(p) && std::isfinite(e) && p > 0.0 && e >= 0.0;
}

double Sum(const std::vector<double>& values) {
  double sum = 0.0;
  for (double v : values) sum += v;
  return sum;
}

// Three regions, three items; hand computation of the starred Jevons index
// (the formula of the GEKS* form, Sergeev 2001, as stated in
// bilateral_matrix.h). Prices: a = (1, 1, 1), b = (2, 3, 5), c = (-, -, 7).
TEST(AllPairsJevonsRepresentative, AveragesTheJevonsOverEachSidesRepresentativeItems) {
  const double nan = std::nan("");
  Eigen::MatrixXd log_price(3, 3), present(3, 3), representative(3, 3);
  log_price << 0, 0, 0, std::log(2.0), std::log(3.0), std::log(5.0), nan, nan, std::log(7.0);
  present << 1, 1, 1, 1, 1, 1, 0, 0, 1;
  representative << 1, 0, 0, 0, 1, 0, 0, 0, 1;  // a: item 1, b: item 2, c: item 3
  Eigen::MatrixXi matched;
  const Eigen::MatrixXd j =
      AllPairsJevonsRepresentative(log_price, present, representative, Eigen::VectorXd(), &matched);
  // (a, b): item 1 from a's side (2/1), item 2 from b's side (3/1): sqrt(6).
  EXPECT_NEAR(j(0, 1), std::sqrt(6.0), 1e-14);
  EXPECT_NEAR(j(1, 0), 1.0 / std::sqrt(6.0), 1e-14);
  // (a, c): a's representative item 1 is not priced in c; c's item 3: 7/1.
  EXPECT_NEAR(j(0, 2), 7.0, 1e-13);
  // (b, c): only c's side again: 7/5.
  EXPECT_NEAR(j(1, 2), 7.0 / 5.0, 1e-14);
  for (int r = 0; r < 3; ++r) EXPECT_EQ(j(r, r), 1.0);
  EXPECT_EQ(matched(0, 1), 1);  // item 1 representative in a, priced by b
  EXPECT_EQ(matched(0, 2), 0);
  EXPECT_EQ(matched(2, 0), 1);

  // a flags items 1 and 3; item weights (1, 1, 3): ln J^(a)_ab =
  // (ln 2 + 3 ln 5) / 4, ln J^(b)_ab = ln 3; (a, c) is 7 from either side.
  representative(0, 2) = 1;
  Eigen::VectorXd weight(3);
  weight << 1, 1, 3;
  const Eigen::MatrixXd w =
      AllPairsJevonsRepresentative(log_price, present, representative, weight, nullptr);
  EXPECT_NEAR(w(0, 1),
              std::exp(0.5 * ((std::log(2.0) + 3 * std::log(5.0)) / 4 + std::log(3.0))), 1e-13);
  EXPECT_NEAR(w(0, 2), 7.0, 1e-13);
}

TEST(AllPairsJevonsRepresentative, LeavesAPairWithoutRepresentativeMatchesEmpty) {
  // Three regions price both items and only c flags one: a and b share no
  // item representative in either of them, so (a, b) has no index although
  // they share two items; each has one with c.
  Eigen::MatrixXd log_price = Eigen::MatrixXd::Zero(3, 2), present = Eigen::MatrixXd::Ones(3, 2),
                  representative = Eigen::MatrixXd::Zero(3, 2);
  representative(2, 0) = 1;
  const Eigen::MatrixXd j =
      AllPairsJevonsRepresentative(log_price, present, representative, Eigen::VectorXd(), nullptr);
  EXPECT_TRUE(std::isnan(j(0, 1)));
  EXPECT_EQ(j(0, 2), 1.0);
  EXPECT_EQ(j(0, 0), 1.0);
}

TEST(AllPairsWeighted, EveryEntryEqualsScalarFormulasOverMatchedHeadings) {
  const int num_regions = 14;
  const int num_headings = 11;
  Eigen::MatrixXd price, expenditure;
  MakeIncompleteData(num_regions, num_headings, 4242, &price, &expenditure);
  const BilateralMatrices m = AllPairsWeighted(price, expenditure);
  int num_pairs_checked = 0;
  for (int a = 0; a < num_regions; ++a) {
    for (int b = 0; b < num_regions; ++b) {
      std::vector<double> pa, pb, qa, qb;
      for (int h = 0; h < num_headings; ++h) {
        if (!Valid(price(a, h), expenditure(a, h)) || !Valid(price(b, h), expenditure(b, h))) {
          continue;
        }
        pa.push_back(price(a, h));
        pb.push_back(price(b, h));
        qa.push_back(expenditure(a, h) / price(a, h));
        qb.push_back(expenditure(b, h) / price(b, h));
      }
      SCOPED_TRACE("pair " + std::to_string(a) + "," + std::to_string(b));
      EXPECT_EQ(m.num_matched(a, b), static_cast<int>(pa.size()));
      if (pa.empty() || !(Sum(qa) > 0.0) || !(Sum(qb) > 0.0)) {
        EXPECT_TRUE(std::isnan(m.laspeyres(a, b)) && std::isnan(m.paasche(a, b)) &&
                    std::isnan(m.fisher(a, b)) && std::isnan(m.tornqvist(a, b)));
        continue;
      }
      PARITAS_EXPECT_CLOSE(m.laspeyres(a, b), Laspeyres(pa, pb, qa), 1e-12);
      PARITAS_EXPECT_CLOSE(m.paasche(a, b), Paasche(pa, pb, qb), 1e-12);
      PARITAS_EXPECT_CLOSE(m.fisher(a, b), Fisher(pa, pb, qa, qb), 1e-12);
      PARITAS_EXPECT_CLOSE(m.tornqvist(a, b), Tornqvist(pa, pb, qa, qb), 1e-12);
      ++num_pairs_checked;
    }
  }
  // The disjoint pair is empty; most other pairs are not.
  EXPECT_EQ(m.num_matched(0, 1), 0);
  EXPECT_TRUE(std::isnan(m.fisher(1, 0)));
  EXPECT_GT(num_pairs_checked, num_regions * num_regions / 2);
}

TEST(AllPairsWeighted, ReversalAndDualityHoldForEveryPair) {
  // Fisher and Törnqvist pass the reversal test and Paasche(a,b) =
  // 1 / Laspeyres(b,a) (CPI Manual 2004 ch. 15-16), pair by pair.
  Eigen::MatrixXd price, expenditure;
  MakeIncompleteData(9, 7, 17, &price, &expenditure);
  const BilateralMatrices m = AllPairsWeighted(price, expenditure);
  for (int a = 0; a < 9; ++a) {
    for (int b = 0; b < 9; ++b) {
      if (m.num_matched(a, b) == 0) continue;
      PARITAS_EXPECT_CLOSE(m.fisher(a, b) * m.fisher(b, a), 1.0, 1e-14);
      PARITAS_EXPECT_CLOSE(m.tornqvist(a, b) * m.tornqvist(b, a), 1.0, 1e-14);
      PARITAS_EXPECT_CLOSE(m.paasche(a, b) * m.laspeyres(b, a), 1.0, 1e-14);
    }
  }
  EXPECT_EQ(m.num_matched, m.num_matched.transpose());
}

TEST(AllPairsWeighted, PricesDoublingGiveTwoEverywhere) {
  // Two regions, two headings, region 1 twice as dear on both: every index
  // is 2 from region 0 and ½ back.
  Eigen::MatrixXd price(2, 2), expenditure(2, 2);
  price << 1.0, 3.0, 2.0, 6.0;
  expenditure << 10.0, 5.0, 4.0, 30.0;
  const BilateralMatrices m = AllPairsWeighted(price, expenditure);
  for (const Eigen::MatrixXd* index : {&m.laspeyres, &m.paasche, &m.fisher, &m.tornqvist}) {
    PARITAS_EXPECT_CLOSE((*index)(0, 1), 2.0, 1e-15);
    PARITAS_EXPECT_CLOSE((*index)(1, 0), 0.5, 1e-15);
    EXPECT_EQ((*index)(0, 0), 1.0);
    EXPECT_EQ((*index)(1, 1), 1.0);
  }
}

TEST(AllPairsWeighted, RegionWithoutValidHeadingIsNaNAndCountsZero) {
  Eigen::MatrixXd price(3, 2), expenditure(3, 2);
  price << 1.0, 2.0, kNaN, 0.0, 2.0, 3.0;
  expenditure << 1.0, 1.0, 5.0, 5.0, 1.0, 2.0;
  const BilateralMatrices m = AllPairsWeighted(price, expenditure);
  EXPECT_EQ(m.num_matched.row(1).sum(), 0);
  EXPECT_EQ(m.num_matched.col(1).sum(), 0);
  EXPECT_TRUE(std::isnan(m.fisher(1, 1)));
  EXPECT_TRUE(std::isnan(m.tornqvist(0, 1)));
  EXPECT_TRUE(std::isnan(m.laspeyres(2, 1)));
  EXPECT_EQ(m.num_matched(0, 2), 2);
  EXPECT_EQ(m.fisher(2, 2), 1.0);
}

TEST(AllPairsWeighted, ZeroExpenditureOnOneSideKeepsTheHeadingWithCpiManualWeights) {
  // Region a spends nothing on heading 0, region b spends on both. Hand
  // computation with the CPI Manual (ILO et al. 2004, ch. 15-17) formulas:
  //   p_a = (1, 1), p_b = (2, 1.5), e_a = (0, 10), e_b = (6, 4)
  //   q_a = (0, 10), q_b = (3, 8/3)
  //   Laspeyres(a,b) = (2*0 + 1.5*10) / (1*0 + 1*10)        = 1.5
  //   Paasche(a,b)   = (6 + 4) / (1*3 + 1*8/3) = 10 / (17/3) = 30/17
  //   Fisher(a,b)    = sqrt(1.5 * 30/17)                     = sqrt(45/17)
  //   ln Törnqvist   = ½(0 + 0.6) ln 2 + ½(1 + 0.4) ln 1.5   = 0.3 ln 2 + 0.7 ln 1.5
  // Dropping heading 0 instead would give 1.5 for all four.
  Eigen::MatrixXd price(2, 2), expenditure(2, 2);
  price << 1.0, 1.0, 2.0, 1.5;
  expenditure << 0.0, 10.0, 6.0, 4.0;
  const BilateralMatrices m = AllPairsWeighted(price, expenditure);
  PARITAS_EXPECT_CLOSE(m.laspeyres(0, 1), 1.5, 1e-15);
  PARITAS_EXPECT_CLOSE(m.paasche(0, 1), 30.0 / 17.0, 1e-15);
  PARITAS_EXPECT_CLOSE(m.fisher(0, 1), std::sqrt(45.0 / 17.0), 1e-15);
  PARITAS_EXPECT_CLOSE(m.tornqvist(0, 1), std::exp(0.3 * std::log(2.0) + 0.7 * std::log(1.5)),
                       1e-15);
  PARITAS_EXPECT_CLOSE(m.fisher(1, 0) * m.fisher(0, 1), 1.0, 1e-15);
  EXPECT_EQ(m.num_matched(0, 1), 2);
}

TEST(AllPairsWeighted, RegionSpendingNothingOnTheMatchedHeadingsHasNoIndex) {
  // Region 0 spends only on heading 1, which region 1 does not price: on
  // their one matched heading region 0 spends 0, so the pair has no index.
  Eigen::MatrixXd price(2, 2), expenditure(2, 2);
  price << 1.0, 1.0, 2.0, kNaN;
  expenditure << 0.0, 10.0, 6.0, 4.0;
  const BilateralMatrices m = AllPairsWeighted(price, expenditure);
  EXPECT_EQ(m.num_matched(0, 1), 1);
  EXPECT_TRUE(std::isnan(m.laspeyres(0, 1)) && std::isnan(m.paasche(0, 1)));
  EXPECT_TRUE(std::isnan(m.fisher(1, 0)) && std::isnan(m.tornqvist(1, 0)));
}

TEST(AllPairsWeighted, NoRegionsGiveEmptyMatrices) {
  const BilateralMatrices m = AllPairsWeighted(Eigen::MatrixXd(0, 4), Eigen::MatrixXd(0, 4));
  EXPECT_EQ(m.fisher.rows(), 0);
  EXPECT_EQ(m.num_matched.size(), 0);
}

TEST(AllPairsWeighted, OnlyTheChosenIndexIsFilledWithTheSameBits) {
  // 70 regions span more than one elementwise tile; a subset must equal the
  // full computation exactly, since compute and sensitivity rely on it.
  Eigen::MatrixXd price, expenditure;
  MakeIncompleteData(70, 9, 99, &price, &expenditure);
  const BilateralMatrices all = AllPairsWeighted(price, expenditure);
  const BilateralMatrices fisher = AllPairsWeighted(price, expenditure, BilateralOptions::OnlyFisher());
  const BilateralMatrices tornqvist =
      AllPairsWeighted(price, expenditure, BilateralOptions::OnlyTornqvist());
  EXPECT_EQ(fisher.laspeyres.size() + fisher.tornqvist.size() + fisher.num_matched.size(), 0);
  EXPECT_EQ(tornqvist.fisher.size() + tornqvist.paasche.size(), 0);
  auto same_bits = [](const Eigen::MatrixXd& x, const Eigen::MatrixXd& y) {
    return x.rows() == y.rows() && x.cols() == y.cols() &&
           ((x.array() == y.array()) || (x.array().isNaN() && y.array().isNaN())).all();
  };
  EXPECT_TRUE(same_bits(fisher.fisher, all.fisher));
  EXPECT_TRUE(same_bits(tornqvist.tornqvist, all.tornqvist));
  EXPECT_GT(all.fisher.array().isNaN().count(), 0);  // empty pairs are present
}

TEST(AllPairsJevons, EveryEntryEqualsScalarJevonsOverMatchedItems) {
  // Absent entries carry junk log prices (huge, NaN) that must be ignored.
  const int num_regions = 13;
  const int num_items = 17;
  RandomData random(777);
  Eigen::MatrixXd log_price(num_regions, num_items), present(num_regions, num_items);
  for (int r = 0; r < num_regions; ++r) {
    for (int i = 0; i < num_items; ++i) {
      log_price(r, i) = random.Uniform(-2.0, 6.0);
      const double hole = random.Uniform(0.0, 1.0);
      present(r, i) = hole < 0.25 ? 0.0 : 1.0;
      if (hole < 0.10) log_price(r, i) = 1e300;
      else if (hole < 0.20) log_price(r, i) = kNaN;
    }
  }
  for (int i = 0; i < num_items; ++i) {
    present(0, i) = i % 2 == 0 ? 1.0 : 0.0;
    present(1, i) = i % 2 == 1 ? 1.0 : 0.0;
    log_price(0, i) = log_price(1, i) = 0.5 + 0.01 * i;
  }
  Eigen::MatrixXi num_matched;
  const Eigen::MatrixXd jevons = AllPairsJevons(log_price, present, &num_matched);
  for (int a = 0; a < num_regions; ++a) {
    for (int b = 0; b < num_regions; ++b) {
      std::vector<double> pa, pb;
      for (int i = 0; i < num_items; ++i) {
        if (present(a, i) == 0.0 || present(b, i) == 0.0) continue;
        pa.push_back(std::exp(log_price(a, i)));
        pb.push_back(std::exp(log_price(b, i)));
      }
      SCOPED_TRACE("pair " + std::to_string(a) + "," + std::to_string(b));
      EXPECT_EQ(num_matched(a, b), static_cast<int>(pa.size()));
      if (pa.empty()) {
        EXPECT_TRUE(std::isnan(jevons(a, b)));
      } else {
        PARITAS_EXPECT_CLOSE(jevons(a, b), Jevons(pa, pb), 1e-12);
        PARITAS_EXPECT_CLOSE(jevons(a, b) * jevons(b, a), 1.0, 1e-14);
      }
    }
  }
  EXPECT_EQ(num_matched(0, 1), 0);
}

TEST(AllPairsJevons, PresentButNonFiniteLogPriceCountsAsAbsent) {
  Eigen::MatrixXd log_price(2, 3), present = Eigen::MatrixXd::Ones(2, 3);
  log_price << 0.0, 0.0, kNaN, std::log(2.0), std::log(8.0), 1.0;
  const Eigen::MatrixXd jevons = AllPairsJevons(log_price, present, nullptr);
  PARITAS_EXPECT_CLOSE(jevons(0, 1), 4.0, 1e-15);  // sqrt(2 * 8).
  EXPECT_EQ(jevons(1, 1), 1.0);
}

// The spread summaries by row blocks against the same summaries taken from
// the full matrices (computed here): per region as RegionSpreads, the
// large-spread check's largest spread and partner, every pair's spread in
// row order, and the widest pairs with their indices. Block sizes and
// thread counts must not change a bit.
TEST(AllPairsSpreads, EqualTheSummariesOfTheFullMatrices) {
  const int num_regions = 163;  // 40 blocks of 4 and 3 rows left
  const int num_headings = 23;
  Eigen::MatrixXd price, expenditure;
  MakeIncompleteData(num_regions, num_headings, 20261202, &price, &expenditure);
  const BilateralMatrices full = AllPairsWeighted(price, expenditure);
  const std::vector<RegionSpread> regions = RegionSpreads(full);
  std::vector<double> check_percent(num_regions, 0.0), pair_spreads;
  std::vector<int> check_partner(num_regions, -1);
  std::vector<SpreadPairIndices> pairs;
  for (int a = 0; a < num_regions; ++a) {
    for (int b = 0; b < num_regions; ++b) {
      const double s = std::abs(std::log(full.laspeyres(a, b) / full.paasche(a, b)));
      if (b != a && std::isfinite(100.0 * s) && 100.0 * s > check_percent[a]) {
        check_percent[a] = 100.0 * s, check_partner[a] = b;
      }
      if (b <= a || !std::isfinite(s)) continue;
      pair_spreads.push_back(s);
      pairs.push_back({a, b, s, full.laspeyres(a, b), full.paasche(a, b), full.fisher(a, b),
                       full.tornqvist(a, b), full.num_matched(a, b)});
    }
  }
  std::sort(pairs.begin(), pairs.end(), [](const SpreadPairIndices& x, const SpreadPairIndices& y) {
    return x.spread > y.spread || (x.spread == y.spread && (x.a < y.a || (x.a == y.a && x.b < y.b)));
  });
  ASSERT_GT(pairs.size(), 12u);
  for (int block_rows : {4, 12, 64, 128, 512}) {
    for (int threads : {1, 2}) {
      SCOPED_TRACE("block_rows " + std::to_string(block_rows) + ", threads " +
                   std::to_string(threads));
      SpreadOptions options;
      options.block_rows = block_rows;
      options.num_threads = threads;
      const SpreadSummary summary = AllPairsSpreads(price, expenditure, options);
      ASSERT_EQ(summary.regions.size(), regions.size());
      for (int a = 0; a < num_regions; ++a) {
        // Bit for bit (NaN for a region without any partner).
        EXPECT_TRUE(summary.regions[a].median == regions[a].median ||
                    (std::isnan(summary.regions[a].median) && std::isnan(regions[a].median)))
            << "region " << a;
        EXPECT_TRUE(summary.regions[a].max == regions[a].max ||
                    (std::isnan(summary.regions[a].max) && std::isnan(regions[a].max)))
            << "region " << a;
        EXPECT_EQ(summary.regions[a].worst_partner, regions[a].worst_partner) << "region " << a;
      }
      EXPECT_EQ(summary.check_percent, check_percent);
      EXPECT_EQ(summary.check_partner, check_partner);
      EXPECT_EQ(summary.pair_spreads, pair_spreads);
      ASSERT_EQ(summary.widest.size(), 12u);
      for (size_t i = 0; i < 12; ++i) {
        const SpreadPairIndices& got = summary.widest[i];
        const SpreadPairIndices& want = pairs[i];
        EXPECT_EQ(got.a, want.a);
        EXPECT_EQ(got.b, want.b);
        EXPECT_EQ(got.spread, want.spread);
        EXPECT_EQ(got.laspeyres, want.laspeyres);
        EXPECT_EQ(got.paasche, want.paasche);
        EXPECT_EQ(got.fisher, want.fisher);
        // Törnqvist from the pair's own sums, not the matrix products.
        EXPECT_NEAR(got.tornqvist, want.tornqvist, 1e-14 * want.tornqvist);
        EXPECT_EQ(got.num_matched, want.num_matched);
      }
    }
  }
  // Regions 0 and 1 share no heading: neither is the other's partner.
  EXPECT_NE(regions[0].worst_partner, 1);
  SpreadOptions no_pairs;
  no_pairs.keep_pair_spreads = false;
  no_pairs.num_widest = 0;
  const SpreadSummary lean = AllPairsSpreads(price, expenditure, no_pairs);
  EXPECT_TRUE(lean.pair_spreads.empty() && lean.widest.empty());
  EXPECT_EQ(lean.check_partner, check_partner);
}

TEST(AllPairsSpreads, OptionsOutOfRangeAreNamed) {
  SpreadOptions options;
  std::string error;
  EXPECT_TRUE(options.IsValid(&error));
  options.block_rows = 6;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "block_rows must be a multiple of 4, found 6");
  options.block_rows = 4;
  options.num_widest = -1;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "num_widest must be >= 0, found -1");
}

// Bit for bit, NaN where the other is NaN.
void ExpectSameBits(const GeksResult& got, const AggregateParities& want) {
  ASSERT_EQ(got.log_parity.size(), want.log_parity.size());
  for (Eigen::Index r = 0; r < want.log_parity.size(); ++r) {
    EXPECT_TRUE(got.log_parity[r] == want.log_parity[r] ||
                (std::isnan(got.log_parity[r]) && std::isnan(want.log_parity[r])))
        << "region " << r;
  }
  EXPECT_EQ(got.identified, want.identified);
  EXPECT_EQ(got.complete, want.complete);
  EXPECT_EQ(got.groups, want.groups);
  EXPECT_EQ(got.rms_log_residual, want.rms_log_residual);
}

// The row blocks take every entry and every sum in the full matrix's order,
// so a survey with missing headings, zero spending and a region without any
// spending gives the same bits as GEKS over the Fisher (Törnqvist) matrix.
TEST(GeksByRowBlocks, EqualsGeksOverTheIndexMatrixBitForBit) {
  const int num_regions = 163;  // 40 blocks of 4 and 3 rows left
  const int num_headings = 23;
  Eigen::MatrixXd price, expenditure;
  MakeIncompleteData(num_regions, num_headings, 20261203, &price, &expenditure);
  // Regions 0 and 1 share heading 0 (else they share none); region 7
  // spends nothing, so it takes no part.
  price(0, 0) = 2.0, price(1, 0) = 3.0, expenditure(0, 0) = 10.0, expenditure(1, 0) = 20.0;
  expenditure.row(7).setZero();
  const BilateralMatrices full = AllPairsWeighted(price, expenditure);
  for (GeksIndex index : {GeksIndex::kFisher, GeksIndex::kTornqvist}) {
    const bool fisher = index == GeksIndex::kFisher;
    const AggregateParities want = GeksOverIndex(fisher ? full.fisher : full.tornqvist);
    ASSERT_TRUE(want.complete);
    ASSERT_TRUE(std::isnan(want.log_parity[7]));
    for (int block_rows : {4, 12, 128, 512}) {
      for (int threads : {1, 2}) {
        SCOPED_TRACE(std::string(fisher ? "fisher" : "tornqvist") + ", block_rows " +
                     std::to_string(block_rows) + ", threads " + std::to_string(threads));
        GeksBlockOptions options;
        options.block_rows = block_rows;
        options.num_threads = threads;
        GeksResult got;
        ASSERT_TRUE(GeksByRowBlocks(index, price, expenditure, options, &got));
        ExpectSameBits(got, want);
      }
    }
  }
}

// The parities, flags, groups and residual of a GEKS result as an
// aggregate's (AsAggregate), or of an aggregate as the GEKS result it was
// made from (AsGeksResult): the two structs name these fields alike.
template <typename To, typename From>
To WithGeksFields(const From& from) {
  To to;
  to.log_parity = from.log_parity;
  to.identified = from.identified;
  to.complete = from.complete;
  to.groups = from.groups;
  to.rms_log_residual = from.rms_log_residual;
  return to;
}
AggregateParities AsAggregate(const GeksResult& geks) {
  return WithGeksFields<AggregateParities>(geks);
}
GeksResult AsGeksResult(const AggregateParities& aggregate) {
  return WithGeksFields<GeksResult>(aggregate);
}

// The bits of two spread summaries, NaN where the other is NaN.
void ExpectSameSpreads(const SpreadSummary& got, const SpreadSummary& want) {
  ASSERT_EQ(got.regions.size(), want.regions.size());
  for (size_t a = 0; a < want.regions.size(); ++a) {
    const RegionSpread &x = got.regions[a], &y = want.regions[a];
    EXPECT_TRUE(x.median == y.median || (std::isnan(x.median) && std::isnan(y.median))) << a;
    EXPECT_TRUE(x.max == y.max || (std::isnan(x.max) && std::isnan(y.max))) << a;
    EXPECT_EQ(x.worst_partner, y.worst_partner) << "region " << a;
  }
  EXPECT_EQ(got.check_percent, want.check_percent);
  EXPECT_EQ(got.check_partner, want.check_partner);
  EXPECT_EQ(got.pair_spreads, want.pair_spreads);
  ASSERT_EQ(got.widest.size(), want.widest.size());
  for (size_t i = 0; i < want.widest.size(); ++i) {
    const SpreadPairIndices &x = got.widest[i], &y = want.widest[i];
    EXPECT_EQ(x.a, y.a);
    EXPECT_EQ(x.b, y.b);
    EXPECT_EQ(x.spread, y.spread);
    EXPECT_EQ(x.laspeyres, y.laspeyres);
    EXPECT_EQ(x.paasche, y.paasche);
    EXPECT_EQ(x.fisher, y.fisher);
    EXPECT_EQ(x.tornqvist, y.tornqvist);
    EXPECT_EQ(x.num_matched, y.num_matched);
  }
}

// GEKS-Fisher and the spreads from the same row-block products give the
// bits of GeksByRowBlocks and of AllPairsSpreads apart (each tested against
// the full matrices above), with a region that spends nothing (no spread
// with anyone), for any block size and thread count, with and without the
// pairs kept.
TEST(GeksByRowBlocks, SpreadsEqualAllPairsSpreads) {
  const int num_regions = 163;  // 40 blocks of 4 and 3 rows left
  Eigen::MatrixXd price, expenditure;
  MakeIncompleteData(num_regions, 23, 20261205, &price, &expenditure);
  // Every pair shares a heading (else GEKS leaves the closed form).
  price(0, 0) = 2.0, price(1, 0) = 3.0, expenditure(0, 0) = 10.0, expenditure(1, 0) = 20.0;
  expenditure.row(7).setZero();
  for (bool keep_pairs : {true, false}) {
    SpreadOptions spread_options;
    spread_options.keep_pair_spreads = keep_pairs;
    spread_options.num_widest = keep_pairs ? 12 : 0;
    const SpreadSummary want = AllPairsSpreads(price, expenditure, spread_options);
    ASSERT_TRUE(std::isnan(want.regions[7].median));
    ASSERT_EQ(want.widest.size(), keep_pairs ? 12u : 0u);
    for (int block_rows : {4, 12, 128, 512}) {
      for (int threads : {1, 2}) {
        SCOPED_TRACE("block_rows " + std::to_string(block_rows) + ", threads " +
                     std::to_string(threads) + (keep_pairs ? ", pairs kept" : ""));
        GeksBlockOptions options;
        options.block_rows = block_rows;
        options.num_threads = threads;
        GeksResult geks, geks_alone;
        SpreadSummary spreads;
        ASSERT_TRUE(GeksFisherAndSpreadsByRowBlocks(price, expenditure, options, spread_options,
                                                    &geks, &spreads));
        ASSERT_TRUE(GeksByRowBlocks(GeksIndex::kFisher, price, expenditure, options, &geks_alone));
        ExpectSameBits(geks, AsAggregate(geks_alone));
        ExpectSameSpreads(spreads, want);
      }
    }
  }
  // A pair without an index: false, both untouched.
  Eigen::MatrixXd unlinked_price, unlinked_expenditure;
  MakeIncompleteData(41, 9, 20261204, &unlinked_price, &unlinked_expenditure);
  GeksResult geks;
  geks.rms_log_residual = -1.0;
  SpreadSummary spreads;
  spreads.check_percent = {-1.0};
  EXPECT_FALSE(GeksFisherAndSpreadsByRowBlocks(unlinked_price, unlinked_expenditure,
                                               GeksBlockOptions(), SpreadOptions(), &geks,
                                               &spreads));
  EXPECT_EQ(geks.rms_log_residual, -1.0);
  EXPECT_EQ(spreads.check_percent, std::vector<double>{-1.0});
}

// Without the medians (SpreadOptions::region_medians false, as compute runs
// without the report) the row blocks hold no spread past their block, yet
// every region's largest spread and its first partner keep their bits, and
// so do the check, the pairs and the widest; only the median is NaN. Six
// regions priced alike make ties, so the first partner must be the one kept.
TEST(GeksByRowBlocks, WithoutMediansTheLargestSpreadsKeepTheirBits) {
  const int num_regions = 163;
  Eigen::MatrixXd price, expenditure;
  MakeIncompleteData(num_regions, 23, 20261208, &price, &expenditure);
  price(0, 0) = 2.0, price(1, 0) = 3.0, expenditure(0, 0) = 10.0, expenditure(1, 0) = 20.0;
  expenditure.row(7).setZero();
  // Regions 40 to 45 alike, their prices 10,000 times dearer on the headings
  // where they spend most and as much cheaper elsewhere: wide spreads with
  // many regions, and six equal partners for each of those.
  for (int h = 0; h < 23; ++h) {
    price(40, h) = 1.0 + h;
    expenditure(40, h) = h % 2 == 0 ? 900.0 : 10.0;
    price(40, h) *= h % 2 == 0 ? 1e4 : 1e-4;
  }
  for (int copy = 41; copy <= 45; ++copy) {
    price.row(copy) = price.row(40);
    expenditure.row(copy) = expenditure.row(40);
  }
  SpreadOptions with_medians;
  const SpreadSummary want = AllPairsSpreads(price, expenditure, with_medians);
  int ties_to_first = 0;
  for (int a = 0; a < num_regions; ++a)
    ties_to_first += want.regions[a].worst_partner == 40 ? 1 : 0;
  ASSERT_GT(ties_to_first, 10);  // ties with 41 to 45 met and settled
  SpreadOptions without = with_medians;
  without.region_medians = false;
  SpreadSummary want_lean = want;
  for (RegionSpread& region : want_lean.regions) region.median = kNaN;
  ExpectSameSpreads(AllPairsSpreads(price, expenditure, without), want_lean);
  for (int block_rows : {4, 12, 128, 512}) {
    for (int threads : {1, 2}) {
      SCOPED_TRACE("block_rows " + std::to_string(block_rows) + ", threads " +
                   std::to_string(threads));
      GeksBlockOptions options;
      options.block_rows = block_rows;
      options.num_threads = threads;
      GeksResult geks, geks_with_medians;
      SpreadSummary spreads, spreads_with_medians;
      ASSERT_TRUE(
          GeksFisherAndSpreadsByRowBlocks(price, expenditure, options, without, &geks, &spreads));
      ASSERT_TRUE(GeksFisherAndSpreadsByRowBlocks(price, expenditure, options, with_medians,
                                                  &geks_with_medians, &spreads_with_medians));
      ExpectSameBits(geks, AsAggregate(geks_with_medians));
      ExpectSameSpreads(spreads_with_medians, want);
      ExpectSameSpreads(spreads, want_lean);
      EXPECT_TRUE(std::isnan(spreads.regions[7].max));
      EXPECT_EQ(spreads.regions[7].worst_partner, -1);
    }
  }
}

// The node-level call the compute stage makes for the root: from 400
// regions on, the geks-fisher method's parities (with the heading counts)
// and the spreads apart, bit for bit; below, false.
TEST(GeksFisherWithSpreads, EqualsTheMethodAndTheSpreadsApart) {
  NodeArrays arrays;
  MakeIncompleteData(401, 6, 20261206, &arrays.price, &arrays.expenditure);
  arrays.price.col(0).setConstant(1.5);  // every pair shares heading 0
  arrays.expenditure.col(0).setConstant(4.0);
  const AggregationMethod& method = *FindAggregationMethod("geks-fisher");
  const AggregateParities want =
      AggregateFromBilaterals(arrays, NodeBilaterals(arrays, method.BilateralsNeeded()), method);
  SpreadOptions spread_options;
  spread_options.num_threads = 2;
  const SpreadSummary want_spreads = AllPairsSpreads(arrays.price, arrays.expenditure, spread_options);
  AggregateParities got;
  SpreadSummary spreads;
  ASSERT_TRUE(GeksFisherWithSpreads(arrays, spread_options, &got, &spreads));
  ExpectSameBits(AsGeksResult(got), want);
  EXPECT_EQ(got.num_headings, want.num_headings);
  ExpectSameSpreads(spreads, want_spreads);
  NodeArrays small;
  small.price = arrays.price.topRows(399);
  small.expenditure = arrays.expenditure.topRows(399);
  EXPECT_FALSE(GeksFisherWithSpreads(small, spread_options, &got, &spreads));
}

// A node's arrays carry the thread count its row blocks may use (the root
// of a survey of one aggregate runs alone): from 400 regions on, GEKS over
// Fisher and over Törnqvist by row blocks on 2 threads gives the bits of 1
// thread and of the full matrix.
TEST(GeksOverArrays, GivesTheSameBitsOnOneThreadOrTwo) {
  NodeArrays arrays;
  MakeIncompleteData(403, 7, 20261207, &arrays.price, &arrays.expenditure);
  arrays.price.col(0).setConstant(0.8);  // every pair shares heading 0
  arrays.expenditure.col(0).setConstant(2.5);
  const BilateralMatrices full = AllPairsWeighted(arrays.price, arrays.expenditure);
  for (const bool fisher : {true, false}) {
    const AggregateParities want = GeksOverIndex(fisher ? full.fisher : full.tornqvist);
    for (const int threads : {1, 2}) {
      arrays.num_threads = threads;
      const AggregateParities got = fisher ? GeksFisher(arrays, BilateralMatrices())
                                           : GeksTornqvist(arrays, BilateralMatrices());
      SCOPED_TRACE(std::string(fisher ? "fisher" : "tornqvist") + ", threads " + std::to_string(threads));
      ExpectSameBits(AsGeksResult(got), want);
    }
  }
}

// Regions 0 and 1 of MakeIncompleteData share no heading: the closed form
// does not apply, the blocks say so, and GeksFisher (GeksTornqvist) solves
// the graph over the matrix it then forms.
TEST(GeksByRowBlocks, LeavesAPairWithoutIndexToTheGraphSolve) {
  NodeArrays arrays;
  MakeIncompleteData(41, 9, 20261204, &arrays.price, &arrays.expenditure);
  const BilateralMatrices full = AllPairsWeighted(arrays.price, arrays.expenditure);
  for (GeksIndex index : {GeksIndex::kFisher, GeksIndex::kTornqvist}) {
    const bool fisher = index == GeksIndex::kFisher;
    const AggregateParities want = GeksOverIndex(fisher ? full.fisher : full.tornqvist);
    ASSERT_FALSE(want.complete);
    GeksResult got;
    got.rms_log_residual = -1.0;
    EXPECT_FALSE(
        GeksByRowBlocks(index, arrays.price, arrays.expenditure, GeksBlockOptions(), &got));
    EXPECT_EQ(got.rms_log_residual, -1.0);  // untouched
    const AggregateParities fallback = fisher ? GeksFisher(arrays, BilateralMatrices())
                                              : GeksTornqvist(arrays, BilateralMatrices());
    ExpectSameBits(AsGeksResult(fallback), want);
  }
}

TEST(GeksByRowBlocks, OptionsOutOfRangeAreNamed) {
  GeksBlockOptions options;
  std::string error;
  EXPECT_TRUE(options.IsValid(&error));
  options.block_rows = 6;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "block_rows must be a multiple of 4, found 6");
  options.block_rows = 4;
  options.num_threads = -1;
  EXPECT_FALSE(options.IsValid(&error));
  EXPECT_EQ(error, "num_threads must be >= 0, found -1");
}

}  // namespace
}  // namespace paritas
