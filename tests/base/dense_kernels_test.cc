// The dense kernels, AVX-512, AVX2 + FMA and portable, against the order of
// operations their header promises (an in-order chain of fused
// multiply-adds per entry), against each other bit for bit and against
// Eigen's products, on shapes that are and are not multiples of the tiles,
// including one row and no columns.
#include "base/dense_kernels.h"

#include <gtest/gtest.h>
#include <omp.h>

#include <Eigen/Core>
#include <cmath>
#include <cstdint>
#include <ostream>
#include <random>
#include <string>
#include <vector>

#include "base/dense_products.h"

namespace paritas::internal {
namespace {

struct Shape {
  int rows;
  int cols;
};

// Row counts around the vector widths (4, 8) and the tile heights (12, 24),
// column counts around the tile width (4), and 0.
const std::vector<Shape>& Shapes() {
  static const std::vector<Shape> shapes = {
      {1, 0},   {1, 1},   {1, 7},  {2, 3},  {3, 4},  {4, 5},  {5, 1},    {7, 9},     {8, 0},
      {9, 2},   {11, 13}, {12, 12}, {13, 4}, {16, 5},   {17, 6},    {23, 7},
      {24, 3},  {25, 8},  {33, 5}, {50, 999}, {49, 1000}, {64, 31}};
  return shapes;
}

// Entries uniform in [-1, 1), or whole numbers in [-3, 3] (all products and
// sums of a few thousand of them exact, so every order gives the same bits).
Eigen::MatrixXd Random(int rows, int cols, bool whole, std::mt19937_64* random) {
  std::uniform_real_distribution<double> uniform(-1.0, 1.0);
  std::uniform_int_distribution<int> small(-3, 3);
  Eigen::MatrixXd x(rows, cols);
  for (int j = 0; j < cols; ++j) {
    for (int i = 0; i < rows; ++i) x(i, j) = whole ? small(*random) : uniform(*random);
  }
  return x;
}

// The order the header documents: acc = fma(x_ik, y_kj, acc) for k in order.
double FusedDot(int depth, const double* x, int64_t x_step, const double* y, int64_t y_step) {
  double acc = 0.0;
  for (int k = 0; k < depth; ++k) acc = std::fma(x[k * x_step], y[k * y_step], acc);
  return acc;
}

// One instruction set's vector kernels.
struct VectorKernels {
  const char* name;
  bool (*here)();  // whether this CPU runs them
  decltype(&MultiplyAvx2Fma) multiply;
  decltype(&MultiplyTransposedAvx2Fma) multiply_transposed;
  decltype(&SubtractGramLowerAvx2Fma) subtract_gram_lower;
};

// Names the set in the test's listing (instead of the struct's bytes).
void PrintTo(const VectorKernels& set, std::ostream* out) { *out << set.name; }

// The tests below run once per instruction set, skipped on a CPU without it.
class DenseKernelsTest : public ::testing::TestWithParam<VectorKernels> {
 protected:
  void SetUp() override {
    if (!GetParam().here()) GTEST_SKIP() << "this CPU has no " << GetParam().name;
  }
};

INSTANTIATE_TEST_SUITE_P(
    VectorSets, DenseKernelsTest,
    ::testing::Values(VectorKernels{"Avx2Fma", CpuHasAvx2Fma, MultiplyAvx2Fma, MultiplyTransposedAvx2Fma,
                                    SubtractGramLowerAvx2Fma},
                      VectorKernels{"Avx512", CpuHasAvx512, MultiplyAvx512, MultiplyTransposedAvx512,
                                    SubtractGramLowerAvx512}),
    [](const ::testing::TestParamInfo<VectorKernels>& set) { return std::string(set.param.name); });

TEST_P(DenseKernelsTest, GramUpdateFollowsTheFusedOrderAndLeavesTheUpperTriangle) {
  std::mt19937_64 random(11);
  for (const Shape& shape : Shapes()) {
    const int m = shape.rows, n = shape.cols;
    const Eigen::MatrixXd x = Random(m, n, false, &random);
    const Eigen::MatrixXd before = Random(m, m, false, &random);
    Eigen::MatrixXd s = before;
    GetParam().subtract_gram_lower(m, n, x.data(), m, s.data(), m);
    for (int j = 0; j < m; ++j) {
      for (int i = 0; i < m; ++i) {
        const double expected = i >= j && n > 0
                                    ? before(i, j) - FusedDot(n, x.data() + i, m, x.data() + j, m)
                                    : before(i, j);
        ASSERT_EQ(s(i, j), expected) << m << " x " << n << " at (" << i << ", " << j << ")";
      }
    }
  }
}

// Whether `ours` equals `eigen` exactly (whole numbers: every partial sum
// is exact in either order) or within 1e-13 of each entry's terms'
// magnitudes (the error bound of a sum), over the lower triangle only when
// asked.
::testing::AssertionResult AgreesWithEigen(const Eigen::MatrixXd& ours, const Eigen::MatrixXd& eigen,
                                           const Eigen::MatrixXd& magnitude, bool whole, bool lower_only) {
  for (Eigen::Index j = 0; j < ours.cols(); ++j) {
    for (Eigen::Index i = lower_only ? j : 0; i < ours.rows(); ++i) {
      const bool agrees = whole ? ours(i, j) == eigen(i, j)
                                : std::abs(ours(i, j) - eigen(i, j)) <= 1e-13 * magnitude(i, j);
      if (!agrees) {
        return ::testing::AssertionFailure()
               << "at (" << i << ", " << j << "): " << ours(i, j) << " against Eigen's " << eigen(i, j);
      }
    }
  }
  return ::testing::AssertionSuccess();
}

TEST_P(DenseKernelsTest, GramUpdateAgreesWithEigenToRoundingAndExactlyOnWholeNumbers) {
  std::mt19937_64 random(12);
  for (const bool whole : {false, true}) {
    for (const Shape& shape : Shapes()) {
      const int m = shape.rows, n = shape.cols;
      const Eigen::MatrixXd x = Random(m, n, whole, &random);
      const Eigen::MatrixXd before = Random(m, m, whole, &random);
      Eigen::MatrixXd eigen = before, ours = before;
      eigen.selfadjointView<Eigen::Lower>().rankUpdate(x, -1.0);
      GetParam().subtract_gram_lower(m, n, x.data(), m, ours.data(), m);
      // Error bound of a sum: relative to the sum of the terms' magnitudes.
      const Eigen::MatrixXd magnitude = before.cwiseAbs() + x.cwiseAbs() * x.cwiseAbs().transpose();
      ASSERT_TRUE(AgreesWithEigen(ours, eigen, magnitude, whole, /*lower_only=*/true)) << m << " x " << n;
    }
  }
}

TEST_P(DenseKernelsTest, ProductFollowsTheFusedOrder) {
  std::mt19937_64 random(13);
  for (const Shape& shape : Shapes()) {
    // 600: sums over three blocks of steps, the last one short.
    for (const int depth : {0, 1, 5, shape.rows, 50, 600}) {
      const int m = shape.rows, n = shape.cols;
      const Eigen::MatrixXd a = Random(m, depth, false, &random);
      const Eigen::MatrixXd b = Random(depth, n, false, &random);
      Eigen::MatrixXd out =
          Eigen::MatrixXd::Constant(m, n, 7.0);  // every entry must be overwritten
      GetParam().multiply(m, n, depth, a.data(), m, b.data(), depth, out.data(), m);
      for (int j = 0; j < n; ++j) {
        for (int i = 0; i < m; ++i) {
          const double expected =
              depth == 0 ? 0.0 : FusedDot(depth, a.data() + i, m, b.data() + j * depth, 1);
          ASSERT_EQ(out(i, j), expected)
              << m << " x " << depth << " x " << n << " at (" << i << ", " << j << ")";
        }
      }
    }
  }
}

TEST_P(DenseKernelsTest, ProductAgreesWithEigenToRoundingAndExactlyOnWholeNumbers) {
  std::mt19937_64 random(14);
  for (const bool whole : {false, true}) {
    for (const Shape& shape : Shapes()) {
      const int m = shape.rows, n = shape.cols, depth = shape.rows + 3;
      const Eigen::MatrixXd a = Random(m, depth, whole, &random);
      const Eigen::MatrixXd b = Random(depth, n, whole, &random);
      const Eigen::MatrixXd eigen = a * b;
      Eigen::MatrixXd ours(m, n);
      GetParam().multiply(m, n, depth, a.data(), m, b.data(), depth, ours.data(), m);
      const Eigen::MatrixXd magnitude = a.cwiseAbs() * b.cwiseAbs();
      ASSERT_TRUE(AgreesWithEigen(ours, eigen, magnitude, whole, /*lower_only=*/false)) << m << " x " << n;
    }
  }
}

TEST_P(DenseKernelsTest, ProductReadsAndWritesThroughLeadingDimensions) {
  // Blocks of larger matrices: entries outside the blocks must not be read
  // into the result nor written.
  std::mt19937_64 random(15);
  const Eigen::MatrixXd a = Random(9, 6, false, &random), b = Random(8, 7, false, &random);
  Eigen::MatrixXd out = Eigen::MatrixXd::Constant(10, 9, 5.0);
  GetParam().multiply(7, 5, 6, &a(1, 0), 9, &b(2, 1), 8, &out(2, 3), 10);
  const Eigen::MatrixXd expected = a.block(1, 0, 7, 6) * b.block(2, 1, 6, 5);
  for (int j = 0; j < 9; ++j) {
    for (int i = 0; i < 10; ++i) {
      const bool inside = i >= 2 && i < 9 && j >= 3 && j < 8;
      if (!inside) {
        ASSERT_EQ(out(i, j), 5.0) << i << ", " << j;
      } else {
        ASSERT_NEAR(out(i, j), expected(i - 2, j - 3), 1e-14) << i << ", " << j;
      }
    }
  }
}

TEST_P(DenseKernelsTest, RankUpdateReadsAndWritesThroughLeadingDimensions) {
  // A 13 x 7 block of a larger x updates a 13 x 13 block of a larger s:
  // nothing outside the block's lower triangle may change, and the block's
  // entries must come from the block of x alone.
  std::mt19937_64 random(16);
  const Eigen::MatrixXd x = Random(20, 9, false, &random);
  Eigen::MatrixXd s = Eigen::MatrixXd::Constant(19, 19, 5.0);
  GetParam().subtract_gram_lower(13, 7, &x(2, 1), 20, &s(3, 4), 19);
  const Eigen::MatrixXd block = x.block(2, 1, 13, 7);
  const Eigen::MatrixXd expected = Eigen::MatrixXd::Constant(13, 13, 5.0) - block * block.transpose();
  for (int j = 0; j < 19; ++j) {
    for (int i = 0; i < 19; ++i) {
      const bool inside = i >= 3 && i < 16 && j >= 4 && j < 17 && i - 3 >= j - 4;
      if (!inside) {
        ASSERT_EQ(s(i, j), 5.0) << i << ", " << j;
      } else {
        ASSERT_NEAR(s(i, j), expected(i - 3, j - 4), 1e-13) << i << ", " << j;
      }
    }
  }
}

// A leading x cols matrix (a rows x cols block and the rows beyond it)
// whose entries have both signs and magnitudes spanning 2^-30 .. 2^30, so
// that products and partial sums round in every way and any difference in
// the order of operations or the number of roundings shows in the last bits.
Eigen::MatrixXd Awkward(int64_t leading, int cols, std::mt19937_64* random) {
  std::uniform_real_distribution<double> mantissa(-1.0, 1.0);
  std::uniform_int_distribution<int> exponent(-30, 30);
  Eigen::MatrixXd x(leading, cols);
  for (int j = 0; j < cols; ++j) {
    for (int i = 0; i < leading; ++i) x(i, j) = std::ldexp(mantissa(*random), exponent(*random));
  }
  return x;
}

TEST(DenseKernels, PortableKernelsFollowTheFusedOrder) {
  // The same reference loop as the vector kernels' tests, on every CPU.
  std::mt19937_64 random(17);
  for (const Shape& shape : Shapes()) {
    const int m = shape.rows, n = shape.cols;
    const Eigen::MatrixXd x = Random(m, n, false, &random);
    const Eigen::MatrixXd before = Random(m, m, false, &random);
    Eigen::MatrixXd s = before;
    SubtractGramLowerPortable(m, n, x.data(), m, s.data(), m);
    const Eigen::MatrixXd b = Random(n, m, false, &random);  // for a b' and a b
    Eigen::MatrixXd product(m, m), transposed(m, m);
    MultiplyPortable(m, m, n, x.data(), m, b.data(), n, product.data(), m);
    MultiplyTransposedPortable(m, m, n, x.data(), m, x.data(), m, transposed.data(), m);
    for (int j = 0; j < m; ++j) {
      for (int i = 0; i < m; ++i) {
        // Without columns x has no storage (no pointer into it is formed).
        const double gram = n > 0 ? FusedDot(n, x.data() + i, m, x.data() + j, m) : 0.0;
        const double ab = n > 0 ? FusedDot(n, x.data() + i, m, b.data() + j * n, 1) : 0.0;
        ASSERT_EQ(s(i, j), i >= j && n > 0 ? before(i, j) - gram : before(i, j)) << m << " x " << n;
        ASSERT_EQ(product(i, j), ab) << m << " x " << n;
        ASSERT_EQ(transposed(i, j), gram) << m << " x " << n;
      }
    }
  }
}

TEST_P(DenseKernelsTest, TransposedProductFollowsTheFusedOrder) {
  std::mt19937_64 random(18);
  for (const Shape& shape : Shapes()) {
    for (const int depth : {0, 1, 5, 100, 600}) {
      const int m = shape.rows, n = shape.cols;
      const Eigen::MatrixXd a = Random(m, depth, false, &random);
      const Eigen::MatrixXd b = Random(n, depth, false, &random);
      Eigen::MatrixXd out = Eigen::MatrixXd::Constant(m, n, 7.0);
      GetParam().multiply_transposed(m, n, depth, a.data(), m, b.data(), n, out.data(), m);
      for (int j = 0; j < n; ++j) {
        for (int i = 0; i < m; ++i) {
          const double expected = depth == 0 ? 0.0 : FusedDot(depth, a.data() + i, m, b.data() + j, n);
          ASSERT_EQ(out(i, j), expected) << m << " x " << depth << " x " << n;
        }
      }
    }
  }
}

// The vector and portable kernels on blocks of larger matrices (leading
// dimensions beyond the rows) with awkward entries: every bit the same.
TEST_P(DenseKernelsTest, VectorAndPortableKernelsGiveTheSameBits) {
  std::mt19937_64 random(19);
  for (const Shape& shape : Shapes()) {
    for (const int depth : {1, 3, 13, 257}) {
      const int m = shape.rows, n = shape.cols;
      const int64_t ld = m + 3, ld_b = n + 5, ld_out = m + 2;
      const Eigen::MatrixXd a = Awkward(ld, depth, &random);
      const Eigen::MatrixXd b = Awkward(depth + 1, n, &random);
      const Eigen::MatrixXd bt = Awkward(ld_b, depth, &random);
      Eigen::MatrixXd vector_out = Eigen::MatrixXd::Zero(ld_out, n), portable_out = vector_out;
      GetParam().multiply(m, n, depth, a.data(), ld, b.data(), depth + 1, vector_out.data(), ld_out);
      MultiplyPortable(m, n, depth, a.data(), ld, b.data(), depth + 1, portable_out.data(), ld_out);
      ASSERT_TRUE(vector_out == portable_out) << "a b, " << m << " x " << depth << " x " << n;
      GetParam().multiply_transposed(m, n, depth, a.data(), ld, bt.data(), ld_b, vector_out.data(), ld_out);
      MultiplyTransposedPortable(m, n, depth, a.data(), ld, bt.data(), ld_b, portable_out.data(),
                                 ld_out);
      ASSERT_TRUE(vector_out == portable_out) << "a b', " << m << " x " << depth << " x " << n;
      Eigen::MatrixXd vector_s = Awkward(ld_out, m, &random), portable_s = vector_s;
      GetParam().subtract_gram_lower(m, depth, a.data(), ld, vector_s.data(), ld_out);
      SubtractGramLowerPortable(m, depth, a.data(), ld, portable_s.data(), ld_out);
      ASSERT_TRUE(vector_s == portable_s) << "s - a a', " << m << " x " << depth;
    }
  }
}

TEST(DenseProducts, SplitOverThreadsKeepsEveryBit) {
  // Large enough (2^24 terms and more) for the wrappers to split the
  // columns over two threads; the single-thread run is the reference.
  std::mt19937_64 random(20);
  const Eigen::MatrixXd a = Awkward(600, 60, &random), b = Awkward(500, 60, &random);
  Eigen::MatrixXd one(600, 500), two(600, 500), product_one, product_two;
  const Eigen::MatrixXd bt = b.transpose();
  const int threads = omp_get_max_threads();
  omp_set_num_threads(1);
  SetProductTransposed(a, b, one);
  SetProduct(a, bt, &product_one);
  omp_set_num_threads(2);
  SetProductTransposed(a, b, two);
  SetProduct(a, bt, &product_two);
  omp_set_num_threads(threads);
  EXPECT_TRUE(one == two);
  EXPECT_TRUE(product_one == product_two);
  EXPECT_TRUE(one == product_one);  // a b' formed either way
  EXPECT_LE((one - a * b.transpose()).cwiseAbs().maxCoeff(),
            1e-13 * (a.cwiseAbs() * b.cwiseAbs().transpose()).maxCoeff());
}

TEST(DenseKernels, AreNamedAsTheRunRecordWritesThem) {
  EXPECT_STREQ(ToString(DenseKernels::kPortable), "portable");
  EXPECT_STREQ(ToString(DenseKernels::kAvx2Fma), "avx2-fma");
  EXPECT_STREQ(ToString(DenseKernels::kAvx512), "avx512");
  EXPECT_STREQ(ToString(DenseKernels::kUnfused), "unfused");
}

}  // namespace
}  // namespace paritas::internal
