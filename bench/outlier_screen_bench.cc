// Measures the outlier screen on generated surveys with planted recording
// errors: the share of errors found and the false flags per 1,000 clean
// cells, for the robust and the least-squares fit. Figures for the README,
// never assertions. Each trial is one seeded survey (the synthetic
// generator); about 10 % of region x heading pairs are cut to a single item
// (a region's only cell in the heading), then errors are planted in distinct
// region x heading pairs: whole cells of single-item pairs, whole cells of
// pairs with several items, and one quote of a cell. The same surveys without
// the planted errors give the clean false-flag rate.
// Usage: outlier_screen_bench [trials=20] [seed=20260301] [noise_sd=0.05]
//    or: outlier_screen_bench --time CONFIG [runs=3] [threads=0]
// The second form times the screen alone (FindOutliers) on a survey from its
// config, after loading it and computing its parities once: wall and CPU
// seconds per run, and a digest of outliers.csv and dispersion.csv (FNV-1a)
// so that two builds can be checked to give the same screen.
//    or: outlier_screen_bench --kernels [m=50] [n=1000] [repeats=2000]
// The third form times the screen's two dense products alone at its shape
// (m items, n regions): the rank update S -= X X' (X m x n) and G C (m x m
// times m x n), Eigen's, the AVX2 + FMA and the AVX-512 kernels, in GFLOP/s
// (counting m (m + 1) n and 2 m^2 n).
#include <chrono>
#include <cmath>
#include <ctime>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <map>
#include <set>
#include <string>
#include <unistd.h>
#include <vector>

#include <Eigen/Core>

#include "base/dense_kernels.h"
#include "paritas/compute/compute.h"
#include "paritas/survey/config.h"
#include "paritas/survey/survey_loader.h"
#include "paritas/uncertainty/outliers.h"
#include "planted_errors.h"
#include "synthetic_survey.h"

namespace {

using paritas::synthetic::RandomStream;
using paritas::synthetic::SyntheticSurvey;

enum class Where { kSingleItemCell, kMultiItemCell, kOneQuote };
constexpr Where kWheres[] = {Where::kSingleItemCell, Where::kMultiItemCell, Where::kOneQuote};
const char* Name(Where where) {
  switch (where) {
    case Where::kSingleItemCell:
      return "whole cell, region's only item of the heading";
    case Where::kMultiItemCell:
      return "whole cell, region prices several items";
    case Where::kOneQuote:
      return "one quote of a two-quote cell";
  }
  return "?";
}
constexpr double kFactors[] = {100.0, 10.0, 3.0, 1.5, 1.0 / 1.5, 1.0 / 3.0, 0.1};
constexpr int kErrorsPerKind = 14;  // per trial and kind of cell: 2 per factor

struct PlantedError {
  Where where;
  double factor;
  std::string region, item;  // codes
};

// Tallies over trials, per fit.
struct Tally {
  std::map<std::pair<int, int>, int> found;  // (where, factor index) -> errors found
  int64_t clean_cells = 0, false_cells = 0, clean_leave_one_out = 0, false_leave_one_out = 0;
  int64_t clean_quote_cells = 0, false_quotes = 0;
  // Surveys without errors: screened cells, and cells beyond kTails.
  int64_t clean_survey_cells = 0;
  int64_t beyond[3] = {0, 0, 0};
};

// |standardised residual| levels of the calibration table, and the share of
// a standard normal beyond each (2 Phi(-x)).
constexpr double kTails[3] = {2.5, 3.0, 3.5};
constexpr double kNormalTails[3] = {0.012419, 0.0026998, 0.00046525};

int Pick(RandomStream* stream, int n) { return std::min(n - 1, static_cast<int>(stream->NextUniform() * n)); }

// Cuts ~10 % of region x heading pairs to one item priced in >= 3 regions;
// returns the pairs cut (region * H + heading) with the item kept.
std::map<int, int> CutToSingleItems(SyntheticSurvey* survey, RandomStream* stream) {
  const int num_regions = static_cast<int>(survey->regions.size());
  const int num_headings = static_cast<int>(survey->headings.size());
  std::map<int, int> cut;
  for (int r = 0; r < num_regions; ++r) {
    for (int h = 0; h < num_headings; ++h) {
      if (stream->NextUniform() >= 0.1) continue;
      std::vector<int> candidates;
      for (int item : paritas::synthetic::ItemsPriced(*survey, r, h)) {
        if (paritas::synthetic::NumRegionsPricing(*survey, item) >= 3) candidates.push_back(item);
      }
      if (candidates.empty()) continue;
      const int keep = candidates[Pick(stream, static_cast<int>(candidates.size()))];
      paritas::synthetic::KeepOnlyItem(r, h, keep, survey);
      cut[r * num_headings + h] = keep;
    }
  }
  return cut;
}

// Plants kErrorsPerKind errors of each kind in distinct region x heading
// pairs, factors in turn.
std::vector<PlantedError> PlantErrors(const std::map<int, int>& cut, SyntheticSurvey* survey,
                                      RandomStream* stream) {
  const int num_regions = static_cast<int>(survey->regions.size());
  const int num_headings = static_cast<int>(survey->headings.size());
  std::set<int> used;
  std::vector<PlantedError> planted;
  int turn = 0;
  for (Where where : kWheres) {
    for (int e = 0, attempts = 0; e < kErrorsPerKind && attempts < 10000; ++attempts) {
      const int r = Pick(stream, num_regions), h = Pick(stream, num_headings), pair = r * num_headings + h;
      const bool is_cut = cut.count(pair) > 0;
      if (used.count(pair) || is_cut != (where == Where::kSingleItemCell)) continue;
      const std::vector<int> items = paritas::synthetic::ItemsPriced(*survey, r, h);
      if (!is_cut && items.size() < 3) continue;
      const int item = is_cut ? cut.at(pair) : items[Pick(stream, static_cast<int>(items.size()))];
      if (paritas::synthetic::NumRegionsPricing(*survey, item) < 3) continue;
      const double factor = kFactors[turn++ % std::size(kFactors)];
      paritas::synthetic::ScaleQuotes(r, item, factor, where == Where::kOneQuote ? 0 : -1, survey);
      planted.push_back({where, factor, survey->regions[r], survey->items[item]});
      used.insert(pair);
      ++e;
    }
  }
  return planted;
}

bool Load(const SyntheticSurvey& truth, const std::string& folder, paritas::Survey* survey,
          paritas::ParityResult* result) {
  std::string error;
  paritas::RunConfig config;
  paritas::LoadSummary load;
  paritas::ComputeSummary compute;
  if (!paritas::synthetic::WriteSurvey(truth, folder, &error) ||
      !paritas::LoadRunConfig(folder + "/config.yaml", &config, &error) ||
      !paritas::LoadSurvey(config, paritas::LoadOptions(), survey, &load) ||
      !paritas::ComputeParities(*survey, paritas::ComputeOptions::FromConfig(config), result, &compute)) {
    std::fprintf(stderr, "%s%s%s\n", error.c_str(), load.message.c_str(), compute.message.c_str());
    return false;
  }
  return true;
}

void Count(const paritas::Survey& survey, const paritas::OutlierReport& report,
           const std::vector<PlantedError>& planted, Tally* tally) {
  std::map<std::pair<std::string, std::string>, size_t> planted_at;
  for (size_t e = 0; e < planted.size(); ++e) planted_at[{planted[e].region, planted[e].item}] = e;
  std::set<size_t> found;
  std::set<std::pair<int, int>> false_quote_cells;
  for (const paritas::Outlier& o : report.outliers) {
    const auto at = planted_at.find({std::string(survey.regions.Code(o.region)), std::string(survey.items.Code(o.item))});
    if (at != planted_at.end()) {
      found.insert(at->second);
    } else if (o.kind == paritas::OutlierKind::kCell) {
      ++tally->false_cells;
      tally->false_leave_one_out += o.how == paritas::ScreenedBy::kLeaveOneOut;
    } else {
      false_quote_cells.insert({o.region, o.item});
    }
  }
  tally->false_quotes += static_cast<int64_t>(false_quote_cells.size());
  for (size_t e : found) {
    const int f = static_cast<int>(std::find(std::begin(kFactors), std::end(kFactors), planted[e].factor) - std::begin(kFactors));
    ++tally->found[{static_cast<int>(planted[e].where), f}];
  }
  const int64_t screened = report.num_cells_by_fit + report.num_cells_leave_one_out;
  tally->clean_cells += screened - static_cast<int64_t>(planted.size());
  int64_t planted_single = 0;
  for (const PlantedError& e : planted) planted_single += e.where == Where::kSingleItemCell;
  tally->clean_leave_one_out += report.num_cells_leave_one_out - planted_single;
  int64_t multi_quote = 0;
  for (size_t c = 0; c < survey.cells.size(); ++c) multi_quote += survey.cells.num_quotes[c] > 1;
  tally->clean_quote_cells += multi_quote - static_cast<int64_t>(planted.size());
}

std::string Share(int found, int total) {
  char text[64];
  std::snprintf(text, sizeof text, "%d/%d", found, total);
  return text;
}

std::string PerThousand(int64_t count, int64_t total) {
  char text[64];
  std::snprintf(text, sizeof text, "%.2f (%lld of %lld)", total > 0 ? 1000.0 * count / total : 0.0,
                static_cast<long long>(count), static_cast<long long>(total));
  return text;
}

std::string FactorLabel(double factor) {
  char label[32];
  if (factor >= 1) {
    std::snprintf(label, sizeof label, "x%g", factor);
  } else {
    std::snprintf(label, sizeof label, "x1/%g", std::round(10.0 / factor) / 10.0);
  }
  return label;
}

void Print(const Tally tallies[2], int trials, const paritas::synthetic::SyntheticOptions& synth) {
  std::printf("%d trials: %d regions x %d headings x %d items, coverage %.1f, %d quotes per cell, noise sd %.2f;\n",
              trials, synth.num_regions, synth.num_headings, synth.items_per_heading, synth.coverage,
              synth.quotes_per_cell, synth.noise_sd);
  std::printf("about 10 %% of region x heading pairs cut to one item; threshold 3.5.\n\n");
  std::printf("errors found, robust fit (least-squares fit in brackets):\n\n| factor |");
  for (Where where : kWheres) std::printf(" %s |", Name(where));
  std::printf("\n| --- | --- | --- | --- |\n");
  const int per_factor = trials * kErrorsPerKind / static_cast<int>(std::size(kFactors));
  for (size_t f = 0; f < std::size(kFactors); ++f) {
    std::printf("| %s |", FactorLabel(kFactors[f]).c_str());
    for (Where where : kWheres) {
      const std::pair<int, int> key{static_cast<int>(where), static_cast<int>(f)};
      const int robust = tallies[0].found.count(key) ? tallies[0].found.at(key) : 0;
      const int plain = tallies[1].found.count(key) ? tallies[1].found.at(key) : 0;
      std::printf(" %s (%d) |", Share(robust, per_factor).c_str(), plain);
    }
    std::printf("\n");
  }
  std::printf("\n| false flags per 1,000 clean cells | robust (default) | least-squares |\n| --- | --- | --- |\n");
  std::printf("| cells, surveys with planted errors | %s | %s |\n",
              PerThousand(tallies[0].false_cells, tallies[0].clean_cells).c_str(),
              PerThousand(tallies[1].false_cells, tallies[1].clean_cells).c_str());
  std::printf("| of which screened by leave-one-out | %s | %s |\n",
              PerThousand(tallies[0].false_leave_one_out, tallies[0].clean_leave_one_out).c_str(),
              PerThousand(tallies[1].false_leave_one_out, tallies[1].clean_leave_one_out).c_str());
  std::printf("| cells, the same surveys without errors | %s | %s |\n",
              PerThousand(tallies[0].beyond[2], tallies[0].clean_survey_cells).c_str(),
              PerThousand(tallies[1].beyond[2], tallies[1].clean_survey_cells).c_str());
  std::printf("| quotes (cells with a quote flagged), surveys with errors | %s | %s |\n",
              PerThousand(tallies[0].false_quotes, tallies[0].clean_quote_cells).c_str(),
              PerThousand(tallies[1].false_quotes, tallies[1].clean_quote_cells).c_str());
  std::printf("\n| clean cells with \\|standardised residual\\| above | normal | robust (default) | least-squares |\n"
              "| --- | --- | --- | --- |\n");
  for (int x = 0; x < 3; ++x) {
    std::printf("| %.1f | %.3f | %.3f | %.3f |\n", kTails[x], 1000.0 * kNormalTails[x],
                1000.0 * tallies[0].beyond[x] / tallies[0].clean_survey_cells,
                1000.0 * tallies[1].beyond[x] / tallies[1].clean_survey_cells);
  }
  std::printf("(per 1,000 clean cells, the surveys without errors)\n");
}

}  // namespace

uint64_t Fnv1a(const std::string& text, uint64_t hash = 14695981039346656037ull) {
  for (unsigned char ch : text) hash = (hash ^ ch) * 1099511628211ull;
  return hash;
}

int TimeScreen(const std::string& config_path, int runs, int threads) {
  std::string error;
  paritas::RunConfig config;
  paritas::LoadSummary load;
  paritas::ComputeSummary compute;
  paritas::Survey survey;
  paritas::ParityResult result;
  if (!paritas::LoadRunConfig(config_path, &config, &error)) {
    std::fprintf(stderr, "%s\n", error.c_str());
    return 1;
  }
  config.threads = threads;
  if (!paritas::LoadSurvey(config, paritas::LoadOptions(), &survey, &load) ||
      !paritas::ComputeParities(survey, paritas::ComputeOptions::FromConfig(config), &result, &compute)) {
    std::fprintf(stderr, "%s%s\n", load.message.c_str(), compute.message.c_str());
    return 1;
  }
  const paritas::OutlierOptions options = paritas::OutlierOptions::FromConfig(config);
  for (int run = 0; run < runs; ++run) {
    const auto wall0 = std::chrono::steady_clock::now();
    const std::clock_t cpu0 = std::clock();
    const paritas::OutlierReport report = paritas::FindOutliers(survey, result, options);
    const double cpu = static_cast<double>(std::clock() - cpu0) / CLOCKS_PER_SEC;
    const double wall = std::chrono::duration<double>(std::chrono::steady_clock::now() - wall0).count();
    int64_t iterations = 0;
    for (int n : report.num_iterations) iterations += n;
    const uint64_t digest = Fnv1a(paritas::DispersionCsv(survey, report), Fnv1a(paritas::OutliersCsv(survey, report)));
    std::printf("run %d: %.3f s wall, %.3f CPU-s; %zu flagged, %lld iterations, digest %016llx\n", run + 1, wall,
                cpu, report.outliers.size(), static_cast<long long>(iterations),
                static_cast<unsigned long long>(digest));
  }
  return 0;
}

// Returns GFLOP/s of `product` run `repeats` times (flop per run given).
template <typename Product>
double GigaflopsPerSecond(int repeats, double flop, Product product) {
  const auto start = std::chrono::steady_clock::now();
  for (int r = 0; r < repeats; ++r) product();
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
  return repeats * flop / seconds * 1e-9;
}

int TimeKernels(int m, int n, int repeats) {
  namespace pi = paritas::internal;
  Eigen::MatrixXd x = Eigen::MatrixXd::Random(m, n), g = Eigen::MatrixXd::Random(m, m);
  Eigen::MatrixXd s = Eigen::MatrixXd::Zero(m, m), gc(m, n);
  const double gram_flop = static_cast<double>(m) * (m + 1) * n, product_flop = 2.0 * m * m * n;
  struct Path {
    const char* name;
    bool here;
    decltype(&pi::SubtractGramLowerAvx2Fma) gram;
    decltype(&pi::MultiplyAvx2Fma) product;
  };
  const Path paths[] = {{"AVX2 + FMA", pi::CpuHasAvx2Fma(), pi::SubtractGramLowerAvx2Fma, pi::MultiplyAvx2Fma},
                        {"AVX-512", pi::CpuHasAvx512(), pi::SubtractGramLowerAvx512, pi::MultiplyAvx512}};
  std::printf("m = %d, n = %d, %d repeats; GFLOP/s, Eigen (as built), AVX2 + FMA, AVX-512 (0: not on this CPU)\n", m,
              n, repeats);
  for (int round = 0; round < 2; ++round) {  // A B C A B C
    const double eigen_gram = GigaflopsPerSecond(repeats, gram_flop, [&] {
      s.selfadjointView<Eigen::Lower>().rankUpdate(x, -1.0);
    });
    const double eigen_product = GigaflopsPerSecond(repeats, product_flop, [&] { gc.noalias() = g * x; });
    double gram[2] = {0.0, 0.0}, product[2] = {0.0, 0.0};
    for (int p = 0; p < 2; ++p) {
      if (!paths[p].here) continue;
      gram[p] = GigaflopsPerSecond(repeats, gram_flop, [&] { paths[p].gram(m, n, x.data(), m, s.data(), m); });
      product[p] = GigaflopsPerSecond(repeats, product_flop, [&] {
        paths[p].product(m, n, m, g.data(), m, x.data(), m, gc.data(), m);
      });
    }
    std::printf("round %d: S -= X X' %.1f, %.1f, %.1f; G C %.1f, %.1f, %.1f\n", round + 1, eigen_gram, gram[0],
                gram[1], eigen_product, product[0], product[1]);
  }
  std::printf("(checksum %g)\n", s.sum() + gc.sum());
  return 0;
}

int main(int argc, char** argv) {
  if (argc > 1 && std::string(argv[1]) == "--kernels") {
    return TimeKernels(argc > 2 ? std::atoi(argv[2]) : 50, argc > 3 ? std::atoi(argv[3]) : 1000,
                       argc > 4 ? std::atoi(argv[4]) : 2000);
  }
  if (argc > 2 && std::string(argv[1]) == "--time") {
    return TimeScreen(argv[2], argc > 3 ? std::atoi(argv[3]) : 3, argc > 4 ? std::atoi(argv[4]) : 0);
  }
  const int trials = argc > 1 ? std::atoi(argv[1]) : 20;
  const uint64_t seed = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : 20260301;
  const double noise_sd = argc > 3 ? std::atof(argv[3]) : 0.05;
  paritas::synthetic::SyntheticOptions synth;
  synth.num_regions = 30;
  synth.num_headings = 12;
  synth.items_per_heading = 10;
  synth.num_groups = 3;
  synth.noise_sd = noise_sd;
  const std::string folder =
      (std::filesystem::temp_directory_path() / ("paritas-outlier-bench-" + std::to_string(::getpid()))).string();
  Tally tallies[2];
  const paritas::OutlierFit fits[2] = {paritas::OutlierFit::kRobust, paritas::OutlierFit::kLeastSquares};
  for (int t = 0; t < trials; ++t) {
    synth.seed = seed + t;
    SyntheticSurvey truth = paritas::synthetic::Generate(synth);
    RandomStream stream(synth.seed, 1000);
    const std::map<int, int> cut = CutToSingleItems(&truth, &stream);
    SyntheticSurvey clean = truth;
    const std::vector<PlantedError> planted = PlantErrors(cut, &truth, &stream);
    paritas::Survey survey, clean_survey;
    paritas::ParityResult result, clean_result;
    if (!Load(truth, folder, &survey, &result) || !Load(clean, folder, &clean_survey, &clean_result)) return 1;
    for (int f = 0; f < 2; ++f) {
      paritas::OutlierOptions options;
      options.fit = fits[f];
      Count(survey, paritas::FindOutliers(survey, result, options), planted, &tallies[f]);
      // A threshold near 0 lists every screened cell with its residual.
      options.threshold = 1e-9;
      const paritas::OutlierReport report = paritas::FindOutliers(clean_survey, clean_result, options);
      for (const paritas::Outlier& o : report.outliers) {
        if (o.kind != paritas::OutlierKind::kCell) continue;
        for (int x = 0; x < 3; ++x) tallies[f].beyond[x] += std::abs(o.standardised_residual) > kTails[x];
      }
      tallies[f].clean_survey_cells += report.num_cells_by_fit + report.num_cells_leave_one_out;
    }
  }
  std::filesystem::remove_all(folder);
  Print(tallies, trials, synth);
  return 0;
}
