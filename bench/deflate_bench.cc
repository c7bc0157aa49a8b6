// Throughput of `paritas deflate`: writes a seeded 3-column file (id, region,
// value) of N rows and a parities folder, deflates it once to warm the page
// cache and then timed, and prints rows/s and MB/s. A figure for the README,
// never an assertion.
//
// Usage: deflate_bench [num_rows = 5000000] [num_regions = 16] [folder =
// /tmp/paritas_deflate_bench]
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <random>
#include <string>

#include "paritas/use/deflation.h"

int main(int argc, char** argv) {
  const long long num_rows = argc > 1 ? std::atoll(argv[1]) : 5000000;
  const int num_regions = argc > 2 ? std::atoi(argv[2]) : 16;
  const std::string dir = argc > 3 ? argv[3] : "/tmp/paritas_deflate_bench";
  if (num_rows <= 0 || num_regions <= 0) {
    std::fprintf(stderr, "usage: deflate_bench [num_rows] [num_regions] [folder]\n");
    return 1;
  }
  std::filesystem::create_directories(dir + "/parities");

  std::mt19937_64 engine(20240611);
  std::string text = "node,kind,region,parity\n";
  for (int r = 0; r < num_regions; ++r) {
    text += "all,aggregate,r" + std::to_string(r) + "," +
            std::to_string(80.0 + 40.0 * (engine() % 1000) / 1000.0) + "\n";
  }
  std::FILE* parities = std::fopen((dir + "/parities/parities.csv").c_str(), "wb");
  std::fwrite(text.data(), 1, text.size(), parities);
  std::fclose(parities);

  // Rows grouped by region in runs, as micro-data usually are.
  const std::string input = dir + "/input.csv";
  std::FILE* file = std::fopen(input.c_str(), "wb");
  std::string block = "id,region,value\n";
  int region = 0;
  char line[96];
  for (long long i = 0; i < num_rows; ++i) {
    if (engine() % 64 == 0) region = static_cast<int>(engine() % num_regions);
    const double value = 1000.0 + static_cast<double>(engine() % 9000000) / 100.0;
    const int n = std::snprintf(line, sizeof(line), "%lld,r%d,%.2f\n", i, region, value);
    block.append(line, n);
    if (block.size() > (1 << 20)) {
      std::fwrite(block.data(), 1, block.size(), file);
      block.clear();
    }
  }
  std::fwrite(block.data(), 1, block.size(), file);
  std::fclose(file);

  paritas::DeflateOptions options;
  options.parities_dir = dir + "/parities";
  options.input_path = input;
  options.output_path = dir + "/output.csv";
  options.value_columns = {"value"};
  paritas::DeflateSummary summary;
  double best_seconds = 1e300;
  for (int run = 0; run < 3; ++run) {
    if (!paritas::Deflate(options, &summary)) {
      std::fprintf(stderr, "deflate failed: %s\n", summary.message.c_str());
      return 1;
    }
    if (run > 0 && summary.deflate_seconds < best_seconds) best_seconds = summary.deflate_seconds;
  }
  const double megabytes = static_cast<double>(summary.num_bytes_read) / 1e6;
  std::printf(
      "deflate: %lld rows, %.1f MB, 3 columns, %d regions: best of 2 runs %.3f s = %.2f million "
      "rows/s, %.0f MB/s (one core)\n",
      static_cast<long long>(summary.num_rows_read), megabytes, num_regions, best_seconds,
      static_cast<double>(summary.num_rows_read) / best_seconds / 1e6, megabytes / best_seconds);
  std::filesystem::remove(input);
  std::filesystem::remove(options.output_path);
  return 0;
}
