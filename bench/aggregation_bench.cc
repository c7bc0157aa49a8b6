// Times every registered aggregation method on the root of a survey (written
// by paritas_synth): the bilateral matrices the method asks for and the
// method itself, each the fastest of several runs on one thread, so the
// figures compare methods rather than the machine's load.
// Usage: aggregation_bench CONFIG [REPETITIONS].
// Or: aggregation_bench --geks-fisher|--geks-tornqvist REGIONS HEADINGS
// [REPETITIONS [THREADS]] times that GEKS on random arrays (every 10th entry
// missing) over the full index matrix and by row blocks, and checks that
// both give the same bits. Or: aggregation_bench --geks-fisher-spreads
// REGIONS HEADINGS [REPETITIONS [THREADS]] times GEKS-Fisher by row blocks
// and the root's spread summary apart and together (same bits checked).
#include <omp.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <random>
#include <string>

#include "paritas/aggregation/aggregation.h"
#include "paritas/compute/compute.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"

namespace {

double Seconds(std::chrono::steady_clock::time_point start) {
  return std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
}

// REGIONS x HEADINGS random prices and spending, every 10th price missing.
paritas::NodeArrays RandomArrays(int regions, int headings) {
  std::mt19937_64 random(20261202);
  std::normal_distribution<double> log_price(0.0, 0.2);
  std::uniform_real_distribution<double> spending(1.0, 100.0);
  paritas::NodeArrays arrays;
  arrays.price.resize(regions, headings);
  arrays.expenditure.resize(regions, headings);
  for (int h = 0; h < headings; ++h) {
    for (int r = 0; r < regions; ++r) {
      const bool missing = (r * 7 + h * 3) % 10 == 0;
      arrays.price(r, h) = missing ? std::nan("") : std::exp(log_price(random));
      arrays.expenditure(r, h) = spending(random);
    }
  }
  return arrays;
}

// REGIONS HEADINGS [REPS [THREADS]] after the mode's flag (REPS default 3,
// THREADS 1); sets OpenMP's thread count. False (usage printed) when short.
struct Shape {
  int regions = 0, headings = 0, repetitions = 3, threads = 1;
};

bool ReadShape(int argc, char** argv, const char* mode, Shape* shape) {
  if (argc < 4) {
    std::fprintf(stderr, "usage: aggregation_bench %s REGIONS HEADINGS [REPS [THREADS]]\n", mode);
    return false;
  }
  shape->regions = std::atoi(argv[2]);
  shape->headings = std::atoi(argv[3]);
  shape->repetitions = argc > 4 ? std::max(1, std::atoi(argv[4])) : 3;
  shape->threads = argc > 5 ? std::max(1, std::atoi(argv[5])) : 1;
  omp_set_num_threads(shape->threads);
  return true;
}

// GEKS over `index` on REGIONS x HEADINGS random arrays: the full-matrix
// path against the row blocks, fastest of `repetitions` each.
int GeksPaths(paritas::GeksIndex index, int argc, char** argv) {
  Shape shape;
  if (!ReadShape(argc, argv, "--geks-fisher|--geks-tornqvist", &shape)) return 1;
  const int regions = shape.regions, headings = shape.headings;
  const int repetitions = shape.repetitions, threads = shape.threads;
  const paritas::NodeArrays arrays = RandomArrays(regions, headings);
  double matrix_seconds = 1e300, block_seconds = 1e300;
  paritas::AggregateParities by_matrix, by_blocks;
  for (int k = 0; k < repetitions; ++k) {
    auto start = std::chrono::steady_clock::now();
    const bool fisher = index == paritas::GeksIndex::kFisher;
    const paritas::BilateralMatrices formed = paritas::NodeBilaterals(
        arrays, fisher ? paritas::BilateralOptions::OnlyFisher()
                       : paritas::BilateralOptions::OnlyTornqvist());
    by_matrix = paritas::GeksOverIndex(fisher ? formed.fisher : formed.tornqvist);
    matrix_seconds = std::min(matrix_seconds, Seconds(start));
    start = std::chrono::steady_clock::now();
    paritas::GeksResult geks;
    if (!paritas::GeksByRowBlocks(index, arrays.price, arrays.expenditure,
                                  paritas::GeksBlockOptions(), &geks)) {
      std::fprintf(stderr, "aggregation_bench: a pair without an index\n");
      return 1;
    }
    by_blocks.log_parity = geks.log_parity;
    by_blocks.rms_log_residual = geks.rms_log_residual;
    block_seconds = std::min(block_seconds, Seconds(start));
  }
  const bool same =
      std::memcmp(by_matrix.log_parity.data(), by_blocks.log_parity.data(),
                  sizeof(double) * regions) == 0 &&
      by_matrix.rms_log_residual == by_blocks.rms_log_residual;
  // Floating-point operations of the products: two R x H x R for Fisher's
  // matrix (three for Törnqvist's); twice as many over the upper triangle
  // for the blocks, as many in all.
  const double num_products = index == paritas::GeksIndex::kFisher ? 2.0 : 3.0;
  const double gflop = num_products * 2.0 * regions * static_cast<double>(headings) * regions * 1e-9;
  std::printf("%s %d x %d, %d threads, fastest of %d: matrix %.4f s (%.1f GFLOP/s of "
              "products), blocks %.4f s (%.1f GFLOP/s); same bits: %s\n",
              argv[1] + 2, regions, headings, threads, repetitions, matrix_seconds,
              gflop / matrix_seconds, block_seconds, gflop / block_seconds,
              same ? "yes" : "NO");
  return same ? 0 : 2;
}


// GEKS-Fisher by row blocks and the spread summary (pairs kept, as with the
// report) on REGIONS x HEADINGS random arrays: apart (GeksByRowBlocks, then
// AllPairsSpreads) against together (GeksFisherAndSpreadsByRowBlocks),
// fastest of `repetitions` each; checks that both give the same bits.
int GeksWithSpreads(int argc, char** argv) {
  Shape shape;
  if (!ReadShape(argc, argv, "--geks-fisher-spreads", &shape)) return 1;
  const int regions = shape.regions, headings = shape.headings;
  const int repetitions = shape.repetitions, threads = shape.threads;
  const paritas::NodeArrays arrays = RandomArrays(regions, headings);
  paritas::GeksBlockOptions options;
  options.num_threads = threads;
  paritas::SpreadOptions spread_options;
  spread_options.num_threads = threads;
  double apart_seconds = 1e300, together_seconds = 1e300;
  paritas::GeksResult geks_apart, geks_together;
  paritas::SpreadSummary spreads_apart, spreads_together;
  for (int k = 0; k < repetitions; ++k) {
    auto start = std::chrono::steady_clock::now();
    const bool linked = paritas::GeksByRowBlocks(paritas::GeksIndex::kFisher, arrays.price,
                                                 arrays.expenditure, options, &geks_apart);
    spreads_apart = paritas::AllPairsSpreads(arrays.price, arrays.expenditure, spread_options);
    apart_seconds = std::min(apart_seconds, Seconds(start));
    start = std::chrono::steady_clock::now();
    if (!linked || !paritas::GeksFisherAndSpreadsByRowBlocks(arrays.price, arrays.expenditure,
                                                             options, spread_options,
                                                             &geks_together, &spreads_together)) {
      std::fprintf(stderr, "aggregation_bench: a pair without an index\n");
      return 1;
    }
    together_seconds = std::min(together_seconds, Seconds(start));
  }
  bool same = std::memcmp(geks_apart.log_parity.data(), geks_together.log_parity.data(),
                          sizeof(double) * regions) == 0 &&
              geks_apart.rms_log_residual == geks_together.rms_log_residual &&
              spreads_apart.pair_spreads == spreads_together.pair_spreads &&
              spreads_apart.check_percent == spreads_together.check_percent &&
              spreads_apart.check_partner == spreads_together.check_partner &&
              spreads_apart.widest.size() == spreads_together.widest.size();
  for (int r = 0; same && r < regions; ++r) {
    const paritas::RegionSpread &x = spreads_apart.regions[r], &y = spreads_together.regions[r];
    same = std::memcmp(&x.median, &y.median, sizeof(double)) == 0 &&
           std::memcmp(&x.max, &y.max, sizeof(double)) == 0 && x.worst_partner == y.worst_partner;
  }
  std::printf("geks-fisher with spreads %d x %d, %d threads, fastest of %d: apart %.4f s, "
              "together %.4f s; same bits: %s\n",
              regions, headings, threads, repetitions, apart_seconds, together_seconds,
              same ? "yes" : "NO");
  return same ? 0 : 2;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc > 1 && std::strcmp(argv[1], "--geks-fisher") == 0) {
    return GeksPaths(paritas::GeksIndex::kFisher, argc, argv);
  }
  if (argc > 1 && std::strcmp(argv[1], "--geks-fisher-spreads") == 0) {
    return GeksWithSpreads(argc, argv);
  }
  if (argc > 1 && std::strcmp(argv[1], "--geks-tornqvist") == 0) {
    return GeksPaths(paritas::GeksIndex::kTornqvist, argc, argv);
  }
  if (argc < 2) {
    std::fprintf(stderr, "usage: aggregation_bench CONFIG [REPETITIONS]\n");
    return 1;
  }
  const int repetitions = argc > 2 ? std::max(1, std::atoi(argv[2])) : 5;
  paritas::RunConfig config;
  std::string error;
  if (!paritas::LoadRunConfig(argv[1], &config, &error)) {
    std::fprintf(stderr, "aggregation_bench: %s\n", error.c_str());
    return 1;
  }
  paritas::Survey survey;
  paritas::LoadSummary load;
  if (!paritas::LoadSurvey(config, paritas::LoadOptions(), &survey, &load)) {
    std::fprintf(stderr, "aggregation_bench: %s\n", load.message.c_str());
    return 1;
  }
  paritas::ParityResult result;
  paritas::ComputeSummary summary;
  if (!paritas::ComputeParities(survey, paritas::ComputeOptions::FromConfig(config), &result,
                                &summary)) {
    std::fprintf(stderr, "aggregation_bench: %s\n", summary.message.c_str());
    return 1;
  }
  omp_set_num_threads(1);
  const paritas::NodeArrays arrays = paritas::NodeInputArrays(survey, result, 0);
  std::printf("root: %lld regions x %lld headings, fastest of %d runs on one thread\n",
              static_cast<long long>(arrays.price.rows()),
              static_cast<long long>(arrays.price.cols()), repetitions);
  for (const paritas::AggregationMethod* method : paritas::AggregationMethods()) {
    const std::string name(method->Name());
    double bilateral_seconds = 1e300, method_seconds = 1e300;
    for (int k = 0; k < repetitions; ++k) {
      auto start = std::chrono::steady_clock::now();
      const paritas::BilateralMatrices bilaterals =
          paritas::NodeBilaterals(arrays, method->BilateralsNeeded());
      bilateral_seconds = std::min(bilateral_seconds, Seconds(start));
      start = std::chrono::steady_clock::now();
      const paritas::AggregateParities out = method->Aggregate(arrays, bilaterals);
      method_seconds = std::min(method_seconds, Seconds(start));
      if (!out.identified) std::fprintf(stderr, "%s: not identified\n", name.c_str());
    }
    std::printf("%-16s bilaterals %.3f s + method %.3f s = %.3f s\n", name.c_str(),
                bilateral_seconds, method_seconds, bilateral_seconds + method_seconds);
  }
  return 0;
}
