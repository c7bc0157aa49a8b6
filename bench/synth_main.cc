// paritas_synth: writes a seeded synthetic survey (prices, items, expenditure,
// regions, classification, config) into a folder, for benchmarks and trials.
// Plain argv parsing keeps this tool free of the command-line library.
#include <charconv>
#include <chrono>
#include <cstdio>
#include <cstring>
#include <filesystem>
#include <string>
#include <string_view>
#include <system_error>

#include "synthetic_survey.h"

namespace {

constexpr char kUsage[] =
    "usage: paritas_synth --out FOLDER [options]\n"
    "\n"
    "Writes a synthetic regional price survey with known price levels.\n"
    "\n"
    "options (default in brackets):\n"
    "  --out FOLDER                 folder to write into (required)\n"
    "  --regions R                  number of regions [50]\n"
    "  --headings H                 number of basic headings [20]\n"
    "  --items-per-heading I        items in each heading [20]\n"
    "  --coverage C                 share of region x item cells priced, (0, 1] [0.7]\n"
    "  --quotes-per-cell Q          quotes in each priced cell [2]\n"
    "  --seed S                     seed of the random streams [1]\n"
    "  --noise-sd X                 sd of ln quote around the model [0.05]\n"
    "  --region-level-sd X          sd of the regions' ln price level [0.1]\n"
    "  --heading-deviation-sd X     sd of heading deviations of ln price level [0.05]\n"
    "  --groups G                   number of aggregate groups [4]\n"
    "  --representative-share X     share of cells flagged representative [0]\n"
    "  --help                       show this text\n";

int Fail(const std::string& message) {
  std::fprintf(stderr, "paritas_synth: error: %s\n", message.c_str());
  return 1;
}

template <typename T>
bool ParseNumber(std::string_view flag, std::string_view text, T* value, std::string* error) {
  const char* end = text.data() + text.size();
  auto result = std::from_chars(text.data(), end, *value);
  if (result.ec != std::errc() || result.ptr != end || text.empty()) {
    *error = std::string(flag) + ": '" + std::string(text) + "' is not a valid number";
    return false;
  }
  return true;
}

std::string WithThousands(int64_t value) {
  std::string digits = std::to_string(value);
  for (int pos = static_cast<int>(digits.size()) - 3; pos > 0; pos -= 3) digits.insert(pos, ",");
  return digits;
}

}  // namespace

int main(int argc, char** argv) {
  using paritas::synthetic::SyntheticOptions;
  SyntheticOptions options;
  std::string folder;
  std::string error;
  for (int k = 1; k < argc; ++k) {
    std::string_view arg = argv[k];
    if (arg == "--help" || arg == "-h") {
      std::fputs(kUsage, stdout);
      return 0;
    }
    // Accept both "--flag value" and "--flag=value".
    std::string_view flag = arg;
    std::string_view value;
    const size_t equals = arg.find('=');
    if (equals != std::string_view::npos) {
      flag = arg.substr(0, equals);
      value = arg.substr(equals + 1);
    } else if (k + 1 < argc) {
      value = argv[++k];
    } else {
      return Fail(std::string(flag) + ": missing value\n" + kUsage);
    }
    bool ok = true;
    if (flag == "--out") {
      folder = std::string(value);
    } else if (flag == "--regions") {
      ok = ParseNumber(flag, value, &options.num_regions, &error);
    } else if (flag == "--headings") {
      ok = ParseNumber(flag, value, &options.num_headings, &error);
    } else if (flag == "--items-per-heading") {
      ok = ParseNumber(flag, value, &options.items_per_heading, &error);
    } else if (flag == "--coverage") {
      ok = ParseNumber(flag, value, &options.coverage, &error);
    } else if (flag == "--quotes-per-cell") {
      ok = ParseNumber(flag, value, &options.quotes_per_cell, &error);
    } else if (flag == "--seed") {
      ok = ParseNumber(flag, value, &options.seed, &error);
    } else if (flag == "--noise-sd") {
      ok = ParseNumber(flag, value, &options.noise_sd, &error);
    } else if (flag == "--region-level-sd") {
      ok = ParseNumber(flag, value, &options.region_level_sd, &error);
    } else if (flag == "--heading-deviation-sd") {
      ok = ParseNumber(flag, value, &options.heading_deviation_sd, &error);
    } else if (flag == "--groups") {
      ok = ParseNumber(flag, value, &options.num_groups, &error);
    } else if (flag == "--representative-share") {
      ok = ParseNumber(flag, value, &options.representative_share, &error);
    } else {
      return Fail("unknown option '" + std::string(flag) + "'\n" + kUsage);
    }
    if (!ok) return Fail(error);
  }
  if (folder.empty()) return Fail(std::string("--out is required\n") + kUsage);
  if (!options.IsValid(&error)) return Fail(error);

  using Clock = std::chrono::steady_clock;
  const auto start = Clock::now();
  const paritas::synthetic::SyntheticSurvey survey = paritas::synthetic::Generate(options);
  const auto generated = Clock::now();
  if (!paritas::synthetic::WriteSurvey(survey, folder, &error)) {
    std::fprintf(stderr, "paritas_synth: error: %s\n", error.c_str());
    return 2;
  }
  const auto written = Clock::now();

  int64_t num_bytes = 0;
  for (const char* name : {"prices.csv", "items.csv", "expenditure.csv", "regions.csv",
                           "classification.yaml", "config.yaml"}) {
    std::error_code code;
    const auto size = std::filesystem::file_size(std::filesystem::path(folder) / name, code);
    if (!code) num_bytes += static_cast<int64_t>(size);
  }
  const double generate_seconds = std::chrono::duration<double>(generated - start).count();
  const double write_seconds = std::chrono::duration<double>(written - generated).count();
  const int64_t num_items = static_cast<int64_t>(survey.items.size());
  const int64_t num_quotes = static_cast<int64_t>(survey.quote_price.size());
  const int64_t num_cells = num_quotes / options.quotes_per_cell;
  std::printf("regions: %s, headings: %s, items: %s, groups: %s\n",
              WithThousands(options.num_regions).c_str(),
              WithThousands(options.num_headings).c_str(), WithThousands(num_items).c_str(),
              WithThousands(options.num_groups).c_str());
  std::printf("priced cells: %s of %s (coverage %.4f), quotes: %s\n",
              WithThousands(num_cells).c_str(),
              WithThousands(int64_t{options.num_regions} * num_items).c_str(),
              static_cast<double>(num_cells) / (double(options.num_regions) * num_items),
              WithThousands(num_quotes).c_str());
  std::printf("generated in %.2f s, wrote %.1f MB to %s in %.2f s\n", generate_seconds,
              num_bytes / 1e6, folder.c_str(), write_seconds);
  return 0;
}
