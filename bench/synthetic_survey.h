// Seeded synthetic price surveys with known regional price effects, for the
// benchmarks and for the tests that check parities recover a known truth.
//
// Model: ln p = ln P_r(h) + ln pi_i + noise, where P_r(h) = regional effect of
// region r in heading h (a region level times a heading-specific deviation),
// pi_i the item's price level, noise N(0, noise_sd^2) per quote.
#ifndef PARITAS_BENCH_SYNTHETIC_SURVEY_H_
#define PARITAS_BENCH_SYNTHETIC_SURVEY_H_

#include <cstdint>
#include <string>
#include <vector>

namespace paritas::synthetic {

struct SyntheticOptions {
  int num_regions = 50;
  int num_headings = 20;
  int items_per_heading = 20;
  // Share of region x item cells that are priced (0, 1].
  double coverage = 0.7;
  int quotes_per_cell = 2;
  // Standard deviation of ln quote around the model, log points.
  double noise_sd = 0.05;
  // Standard deviation of the regions' overall ln price level.
  double region_level_sd = 0.10;
  // Standard deviation of heading-specific deviations of ln price level.
  double heading_deviation_sd = 0.05;
  // Number of aggregate groups the headings are split into.
  int num_groups = 4;
  uint64_t seed = 1;
  // Share of items flagged representative in each region.
  double representative_share = 0.0;

  bool IsValid(std::string* error) const;
};

// The truth behind a synthetic survey and its observations.
struct SyntheticSurvey {
  std::vector<std::string> regions;   // codes r0001, ...
  std::vector<std::string> headings;  // codes h001, ...
  std::vector<std::string> groups;    // codes g01, ...
  std::vector<int> heading_group;     // group index of each heading
  std::vector<std::string> items;     // codes i00001, ...
  std::vector<int> item_heading;      // heading index of each item
  // True ln price level of region r in heading h: true_log_level[r * H + h].
  std::vector<double> true_log_level;
  // Expenditure of region r on heading h: expenditure[r * H + h] (> 0).
  std::vector<double> expenditure;
  std::vector<double> population;
  // Quotes: region index, item index, price, representative flag.
  std::vector<int> quote_region;
  std::vector<int> quote_item;
  std::vector<double> quote_price;
  std::vector<uint8_t> quote_representative;
};

// Generates a survey; the same options give the same survey on every run and
// machine (own generator, no std:: distributions).
SyntheticSurvey Generate(const SyntheticOptions& options);

// Writes prices.csv, items.csv, expenditure.csv, regions.csv,
// classification.yaml and config.yaml into `folder` (created if needed).
// Returns false and sets `error` on failure.
bool WriteSurvey(const SyntheticSurvey& survey, const std::string& folder, std::string* error);

}  // namespace paritas::synthetic

#endif  // PARITAS_BENCH_SYNTHETIC_SURVEY_H_
