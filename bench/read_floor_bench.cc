// What reading a price file costs at the least on this machine: the parts
// every reading of it must do, each timed alone on the file held in memory,
// against which the survey reader's speed (load_bench) is read.
//   split:            find each record and its fields (no quoting, no checks)
//   parse and intern: the same, the region and item codes interned (a table
//                     per thread, as the reader's chunks keep) and the price
//                     read by the reader's exact fast path
//   + log:            the same and the price's natural logarithm
//   SHA-256:          the file's digest, which run.json records (one stream,
//                     so one thread whatever THREADS says)
//   file read:        the file read from the page cache in blocks of 16 MiB,
//                     as the reader reads it (one stream)
// The reader does more than these (checks of every field, the rows' hashes
// and the search for repeated rows, the quotes' arrays written, the blocks'
// merge in file order), so its speed lies below the floor they give.
// Usage: read_floor_bench PRICES_CSV [THREADS [RUNS]]; medians of RUNS.
#include <omp.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <fstream>
#include <functional>
#include <sstream>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "base/median.h"
#include "base/plain_decimal.h"
#include "base/sha256.h"
#include "paritas/base/code_table.h"

namespace {

// Fields of a record looked at: those up to the last of the three columns.
constexpr int kMaxFields = 64;

struct Columns {
  int region = -1, item = -1, price = -1;
};

// The positions of the region, item and price columns in the header line.
Columns FindColumns(std::string_view header) {
  Columns columns;
  int index = 0;
  size_t start = 0;
  while (start <= header.size()) {
    size_t end = header.find(',', start);
    if (end == std::string_view::npos) end = header.size();
    std::string_view name = header.substr(start, end - start);
    if (!name.empty() && name.back() == '\r') name.remove_suffix(1);
    if (name == "region") columns.region = index;
    if (name == "item") columns.item = index;
    if (name == "price") columns.price = index;
    ++index;
    start = end + 1;
  }
  return columns;
}

// What one thread's part of the file gave: rows, and a sum that keeps the
// compiler from leaving the work out.
struct PartResult {
  int64_t rows = 0;
  double sum = 0.0;
};

enum class Step { kSplit, kParseAndIntern, kParseInternAndLog };

// Walks the records of [begin, end) (whole lines) doing `step`'s work.
PartResult ReadPart(const char* begin, const char* end, const Columns& columns, Step step) {
  PartResult result;
  paritas::CodeTable regions, items;
  const int last = std::max({columns.region, columns.item, columns.price});
  std::string_view fields[kMaxFields];
  const char* p = begin;
  while (p < end) {
    const char* line_end = static_cast<const char*>(std::memchr(p, '\n', end - p));
    if (line_end == nullptr) line_end = end;
    int n = 0;
    const char* field = p;
    for (const char* q = p; n <= last; ++q) {
      if (q == line_end || *q == ',') {
        fields[n++] = std::string_view(field, q - field);
        if (q == line_end) break;
        field = q + 1;
      }
    }
    p = line_end + 1;
    ++result.rows;
    if (n <= last) continue;
    if (step == Step::kSplit) {
      result.sum += static_cast<double>(fields[columns.price].size());
      continue;
    }
    const int region = regions.Intern(fields[columns.region]);
    const int item = items.Intern(fields[columns.item]);
    std::string_view price_text = fields[columns.price];
    if (!price_text.empty() && price_text.back() == '\r') price_text.remove_suffix(1);
    double price = 0.0;
    if (!paritas::internal::ParsePlainDecimal(price_text, '.', &price)) price = 1.0;
    if (step == Step::kParseInternAndLog) price = std::log(price);
    result.sum += price + region + item;
  }
  return result;
}

// Median seconds of `runs` calls of `work`.
double TimeRuns(int runs, const std::function<void()>& work) {
  std::vector<double> seconds;
  for (int r = 0; r < runs; ++r) {
    const auto start = std::chrono::steady_clock::now();
    work();
    seconds.push_back(std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count());
  }
  return paritas::MedianInPlace(&seconds);
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: read_floor_bench PRICES_CSV [THREADS [RUNS]]\n");
    return 1;
  }
  const int threads = argc > 2 ? std::max(1, std::atoi(argv[2])) : omp_get_max_threads();
  const int runs = argc > 3 ? std::max(1, std::atoi(argv[3])) : 5;
  std::ifstream in(argv[1], std::ios::binary);
  if (!in) {
    std::fprintf(stderr, "read_floor_bench: cannot open %s\n", argv[1]);
    return 1;
  }
  std::ostringstream buffer;
  buffer << in.rdbuf();
  const std::string text = buffer.str();
  const size_t header_end = text.find('\n');
  if (header_end == std::string::npos) {
    std::fprintf(stderr, "read_floor_bench: %s has no header line\n", argv[1]);
    return 1;
  }
  const Columns columns = FindColumns(std::string_view(text).substr(0, header_end));
  if (columns.region < 0 || columns.item < 0 || columns.price < 0) {
    std::fprintf(stderr, "read_floor_bench: %s lacks a region, item or price column\n", argv[1]);
    return 1;
  }
  if (std::max({columns.region, columns.item, columns.price}) >= kMaxFields) {
    std::fprintf(stderr, "read_floor_bench: the region, item and price columns must be among the first %d\n",
                 kMaxFields);
    return 1;
  }
  // Parts of about equal size, each ending after a line feed.
  std::vector<size_t> cut{header_end + 1};
  for (int t = 1; t < threads; ++t) {
    size_t at = std::max(cut.back(), header_end + 1 + (text.size() - header_end - 1) * t / threads);
    at = text.find('\n', at);
    cut.push_back(at == std::string::npos ? text.size() : at + 1);
  }
  cut.push_back(text.size());
  const double megabytes = static_cast<double>(text.size()) / 1e6;
  std::printf("%s: %.1f MB, %d threads, medians of %d runs\n", argv[1], megabytes, threads, runs);
  int64_t rows = 0;
  // Thread-seconds per row: what a row costs the threads that did the work.
  auto report = [&](const char* what, double seconds, int threads_used) {
    std::printf("  %-18s %7.3f s  %6.0f MB/s  %6.1f ns per row and thread\n", what, seconds,
                megabytes / seconds, seconds * 1e9 * threads_used / static_cast<double>(rows));
  };
  double floor_seconds = 0.0;
  for (Step step : {Step::kSplit, Step::kParseAndIntern, Step::kParseInternAndLog}) {
    std::vector<PartResult> parts(threads);
    const double seconds = TimeRuns(runs, [&] {
#pragma omp parallel for num_threads(threads) schedule(static, 1)
      for (int t = 0; t < threads; ++t) {
        parts[t] = ReadPart(text.data() + cut[t], text.data() + cut[t + 1], columns, step);
      }
    });
    rows = 0;
    for (const PartResult& part : parts) rows += part.rows;
    if (rows == 0) {
      std::fprintf(stderr, "read_floor_bench: %s has no rows below its header\n", argv[1]);
      return 1;
    }
    report(step == Step::kSplit ? "split" : step == Step::kParseAndIntern ? "parse and intern" : "+ log", seconds,
           threads);
    if (step == Step::kParseInternAndLog) floor_seconds = seconds;
  }
  std::string digest;
  const double sha_seconds = TimeRuns(runs, [&] {
    paritas::internal::Sha256 sha;
    sha.Update(text.data(), text.size());
    digest = sha.HexDigest();
  });
  report("SHA-256", sha_seconds, 1);
  const double file_seconds = TimeRuns(runs, [&] {
    std::ifstream file(argv[1], std::ios::binary);
    const size_t block = size_t{16} << 20;
    const std::unique_ptr<char[]> bytes = std::make_unique_for_overwrite<char[]>(block);
    while (file.read(bytes.get(), static_cast<std::streamsize>(block)) || file.gcount() > 0) {
    }
  });
  report("file read", file_seconds, 1);
  // On T threads the two single streams share the cores with the parse.
  floor_seconds += (sha_seconds + file_seconds) / threads;
  std::printf("  floor (+ log, SHA-256 and file read shared by %d threads): %.3f s = %.0f MB/s; %lld rows, "
              "digest %.16s\n",
              threads, floor_seconds, megabytes / floor_seconds, static_cast<long long>(rows), digest.c_str());
  return 0;
}
