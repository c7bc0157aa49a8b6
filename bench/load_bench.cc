// Loads a survey (written by paritas_synth) and reports seconds, MB/s and
// peak memory: the figures behind "loading 10 million quotes is fast and lean".
// Usage: load_bench CONFIG [THREADS [BLOCK_MIB]]. Run in a fresh process per measurement
// so that the peak memory is the load's own.
#include <sys/resource.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: load_bench CONFIG [THREADS [BLOCK_MIB]]\n");
    return 1;
  }
  paritas::RunConfig config;
  std::string error;
  if (!paritas::LoadRunConfig(argv[1], &config, &error)) {
    std::fprintf(stderr, "load_bench: %s\n", error.c_str());
    return 1;
  }
  paritas::LoadOptions options;
  options.num_threads = argc > 2 ? std::atoi(argv[2]) : 0;
  if (argc > 3) options.block_bytes = static_cast<int64_t>(std::atoi(argv[3])) << 20;
  paritas::Survey survey;
  paritas::LoadSummary summary;
  const auto start = std::chrono::steady_clock::now();
  const bool ok = paritas::LoadSurvey(config, options, &survey, &summary);
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  if (!ok) {
    std::fprintf(stderr, "load_bench: %s\n", summary.message.c_str());
    return 1;
  }
  int64_t bytes = 0;
  for (const auto& file : summary.files) bytes += file.size_bytes;
  rusage usage{};
  getrusage(RUSAGE_SELF, &usage);
  const double cell_mb = static_cast<double>(survey.cells.size()) *
                         (2 * sizeof(int32_t) + 4 * sizeof(double) + sizeof(int32_t) + 1) / 1e6;
  std::printf(
      "threads %d: %lld quotes, %zu cells, %.1f MB read in %.3f s = %.0f MB/s "
      "(read %.3f s, cells %.3f s); peak memory %.0f MB (cell table %.0f MB); "
      "quote arrays moved %d times\n",
      options.num_threads, static_cast<long long>(survey.num_quotes), survey.cells.size(),
      bytes / 1e6, seconds, bytes / 1e6 / seconds, summary.read_seconds, summary.cells_seconds,
      usage.ru_maxrss / 1024.0, cell_mb, summary.num_quote_array_moves);
  return 0;
}
