// Seeded synthetic price surveys with known regional price effects, for the
// benchmarks and for the tests that check parities recover a known truth.
//
// Model: ln p = ln P_r(h) + ln pi_i + noise, where ln P_r(h) = regional effect
// of region r in heading h (a region level plus a heading-specific deviation,
// i.e. a product of the two in levels), pi_i the item's price level, noise
// N(0, noise_sd^2) per quote.
//
// Design: every random quantity comes from its own stream of one small
// generator (xoshiro256** seeded through splitmix64, normals by Box-Muller),
// so the output does not depend on the standard library's distributions and
// changing, say, the coverage leaves the true price levels untouched.
#ifndef PARITAS_BENCH_SYNTHETIC_SURVEY_H_
#define PARITAS_BENCH_SYNTHETIC_SURVEY_H_

#include <array>
#include <cstdint>
#include <string>
#include <vector>

namespace paritas::synthetic {

// Knobs of the generator. The defaults give a mid-sized survey (50 regions,
// 400 items, about 28,000 quotes) that the whole pipeline handles in well
// under a second.
struct SyntheticOptions {
  // Number of regions, >= 2 (a parity needs two regions).
  int num_regions = 50;
  // Number of basic headings, >= 1.
  int num_headings = 20;
  // Items in each heading, >= 1. The first item of every heading is an anchor
  // priced in every region, which links all regions within the heading.
  int items_per_heading = 20;
  // Share of region x item cells that are priced, (0, 1]. The anchors count
  // towards it; when 1 / items_per_heading exceeds it the anchors alone set
  // the coverage. Other cells are priced independently with the probability
  // that makes the expected share equal the request.
  double coverage = 0.7;
  // Quotes (observations) in each priced cell, >= 1.
  int quotes_per_cell = 2;
  // Standard deviation of ln quote around the model, log points, >= 0.
  double noise_sd = 0.05;
  // Standard deviation of the regions' overall ln price level, >= 0.
  double region_level_sd = 0.10;
  // Standard deviation of heading-specific deviations of ln price level, >= 0.
  double heading_deviation_sd = 0.05;
  // Number of aggregate groups the headings are split into, in contiguous
  // blocks of near-equal size; 1 <= num_groups <= num_headings.
  int num_groups = 4;
  // Seed of all random streams; any value.
  uint64_t seed = 1;
  // Share of priced region x item cells flagged representative, [0, 1]. The
  // flag holds for all quotes of a cell. When > 0, a region x heading with no
  // flagged item gets its anchor flagged, so every region has a
  // representative item in every heading. 0 writes no representative column.
  double representative_share = 0.0;

  // Returns false and sets `error` (e.g. "coverage = 1.5 is outside (0, 1]")
  // when a field is out of range or the survey would exceed 2^31 - 1 quotes.
  bool IsValid(std::string* error) const;
};

// The truth behind a synthetic survey and its observations.
struct SyntheticSurvey {
  std::vector<std::string> regions;   // codes r0001, ...
  std::vector<std::string> headings;  // codes h001, ...
  std::vector<std::string> groups;    // codes g01, ...
  std::vector<int> heading_group;     // group index of each heading
  std::vector<std::string> items;     // codes i00001, ..., heading by heading
  std::vector<int> item_heading;      // heading index of each item
  // True ln price level of region r in heading h: true_log_level[r * H + h],
  // region level plus heading deviation (not normalised to any reference).
  std::vector<double> true_log_level;
  // True ln price level of each item (ln pi_i), log-uniform between ln 0.5
  // and ln 500 currency units.
  std::vector<double> true_item_log_level;
  // Nominal expenditure of region r on heading h: expenditure[r * H + h]
  // (> 0, currency units per year): population x per-head budget x heading
  // share x regional price level.
  std::vector<double> expenditure;
  // Inhabitants of each region (whole numbers, log-uniform 20,000-5,000,000).
  std::vector<double> population;
  // Quotes, sorted by region then item: region index, item index, price
  // (currency units, > 0), representative flag (0 or 1).
  std::vector<int> quote_region;
  std::vector<int> quote_item;
  std::vector<double> quote_price;
  std::vector<uint8_t> quote_representative;
};

// Generates a survey; the same options give the same survey on every run and
// machine (own generator, no std:: distributions; the only platform
// dependence left is the last bit of libm's log, exp, sin and cos).
// `options` must be valid (asserted).
SyntheticSurvey Generate(const SyntheticOptions& options);

// Writes prices.csv (region,item,price[,representative]), items.csv
// (item,heading), expenditure.csv (region,heading,expenditure), regions.csv
// (region,name,population), classification.yaml (root `all`, one list of
// heading codes per group) and config.yaml (pointing at these files) into
// `folder`, created if needed. Prices carry 6 significant digits (relative
// rounding below 5e-6, far under any sensible noise_sd). Each file goes to a
// temporary name first and is renamed into place. Returns false and sets
// `error` on failure.
bool WriteSurvey(const SyntheticSurvey& survey, const std::string& folder, std::string* error);

// Small, fast, portable random generator: xoshiro256** (Blackman & Vigna,
// "Scrambled linear pseudorandom number generators", 2021) with its state
// filled from splitmix64, as its authors recommend.
class RandomStream {
 public:
  // Streams with the same seed and different `stream` numbers are
  // independent for all practical purposes.
  explicit RandomStream(uint64_t seed, uint64_t stream = 0);
  // Returns a stream starting from the raw xoshiro256** state `state` (not
  // all zero), for checks against the reference implementation's outputs.
  static RandomStream FromState(const std::array<uint64_t, 4>& state);

  // Returns the next 64 random bits.
  uint64_t NextBits();
  // Returns a uniform double in [0, 1) with 53 random bits.
  double NextUniform();
  // Returns a standard normal draw (Box-Muller; the second value of each
  // pair is kept for the next call).
  double NextNormal();

  // Returns the next output of splitmix64 with state `*state` (Vigna's
  // reference algorithm), advancing the state.
  static uint64_t SplitMix64(uint64_t* state);

 private:
  RandomStream() = default;

  std::array<uint64_t, 4> state_{};
  double spare_normal_ = 0.0;
  bool has_spare_normal_ = false;
};

}  // namespace paritas::synthetic

#endif  // PARITAS_BENCH_SYNTHETIC_SURVEY_H_
