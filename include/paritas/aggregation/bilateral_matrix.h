// All-pairs bilateral indices as matrix products.
//
// A node of the classification (or a basic heading) gives region x column
// arrays with a presence mask; every pairwise sum over matched columns is a
// product of masked arrays (e.g. sum_h m_ah m_bh x_ah y_bh = ((M∘X) (M∘Y)ᵀ)_ab),
// so no loop runs over pairs and columns together and the cost is a handful
// of regions x columns x regions products.
#ifndef PARITAS_AGGREGATION_BILATERAL_MATRIX_H_
#define PARITAS_AGGREGATION_BILATERAL_MATRIX_H_

#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/aggregation/geks.h"

namespace paritas {

// Region x region matrices of bilateral indices. Entry (a, b) compares b with
// a ("the cost in b of what costs 1 in a"), as the scalar functions of
// index_formulas.h do with region a as the first argument. Entries are NaN
// where the pair has no matched column; the diagonal is exactly 1 for every
// region with at least one valid column (NaN otherwise).
struct BilateralMatrices {
  // Laspeyres, quantities of region a: sum p_b q_a / sum p_a q_a.
  Eigen::MatrixXd laspeyres;
  // Paasche, quantities of region b: sum p_b q_b / sum p_a q_b. Equals
  // 1 / laspeyres transposed.
  Eigen::MatrixXd paasche;
  // Fisher, sqrt(laspeyres * paasche) elementwise; fisher(a,b) fisher(b,a) = 1.
  Eigen::MatrixXd fisher;
  // Törnqvist with both regions' expenditure shares renormalised over the
  // pair's matched columns; ln tornqvist is antisymmetric.
  Eigen::MatrixXd tornqvist;
  // Number of matched columns per pair (symmetric; diagonal = the region's
  // own number of valid columns): price > 0 in both and expenditure >= 0 in
  // both, so a heading one region spends nothing on counts.
  Eigen::MatrixXi num_matched;
};

// Which matrices AllPairsWeighted fills; the others are left empty (0 x 0).
// A node whose bilaterals are not written needs only the index its GEKS
// runs on, which saves a product or two and most elementwise passes.
struct BilateralOptions {
  // Fills laspeyres and paasche. Default true.
  bool laspeyres_paasche = true;
  // Fills fisher. Default true.
  bool fisher = true;
  // Fills tornqvist. Default true.
  bool tornqvist = true;
  // Fills num_matched (costs one more product). Default true.
  bool num_matched = true;

  // Returns the options that fill only `fisher` (chosen = Fisher) or only
  // `tornqvist`.
  static BilateralOptions OnlyFisher();
  static BilateralOptions OnlyTornqvist();
  // Returns the options that fill nothing.
  static BilateralOptions None();
  // Returns true; every combination is allowed (all false computes nothing).
  bool IsValid(std::string* error) const;
};

// Computes Laspeyres, Paasche, Fisher and Törnqvist between every pair of
// regions (those `options` asks for; every matrix by default). A filled
// matrix has the same entries whichever others are asked for. `price` and `expenditure` are regions x headings, of equal shape
// (asserted). A heading counts for a pair when both regions have a finite
// price > 0 and a finite expenditure >= 0 there; entries that fail this are
// ignored whatever their value (NaN included). Zero expenditure on one side
// keeps the heading in the pair with the weights the CPI Manual formulas
// give (ILO/IMF/OECD/UNECE/Eurostat/World Bank 2004, Consumer Price Index
// Manual, ch. 15-17): quantity 0, so Laspeyres(a, b) gives it weight 0 when
// a spends nothing, Paasche(a, b) the share of b, and Törnqvist half of the
// other region's share. A pair where either region spends nothing on all
// matched headings has NaN entries. Quantities are
// expenditure / price. Each entry equals the scalar formula of
// index_formulas.h over the pair's matched headings. Cost O(R² H) in a few
// matrix products for R regions and H headings.
BilateralMatrices AllPairsWeighted(const Eigen::MatrixXd& price,
                                   const Eigen::MatrixXd& expenditure,
                                   const BilateralOptions& options = BilateralOptions());

// Computes the Jevons index between every pair of regions: entry (a, b) is
// exp(mean over matched items of ln p_b - ln p_a), exactly 1 on the diagonal
// of a region with any priced item. `log_price` is regions x items and
// `present` the mask of the same shape (asserted): an item counts for a
// region where `present` is non-zero and the log price is finite; the log
// price elsewhere is ignored whatever its value. Resizes and fills
// `num_matched` (matched items per pair, symmetric) when non-null. NaN where
// no item is matched.
Eigen::MatrixXd AllPairsJevons(const Eigen::MatrixXd& log_price, const Eigen::MatrixXd& present,
                               Eigen::MatrixXi* num_matched);

// Computes the weighted Jevons index between every pair of regions: entry
// (a, b) is exp(sum_i w_i (ln p_bi - ln p_ai) / sum_i w_i) over the items i
// matched by a and b, w_i = `item_weight`(i) (one per column, finite,
// >= 0). A whole-number weight k is the same as the item appearing k times,
// so item bootstraps reuse the heading's arrays. Items of weight 0 count as
// absent (a region with only such items gets NaN on its diagonal). Otherwise
// as AllPairsJevons, which it equals for unit weights.
Eigen::MatrixXd AllPairsJevonsWeighted(const Eigen::MatrixXd& log_price,
                                       const Eigen::MatrixXd& present,
                                       const Eigen::VectorXd& item_weight);

// Computes the Jevons index with representative items between every pair
// of regions (the "star" form of GEKS* for basic headings): entry (a, b) is
// the geometric mean of two Jevons indices over the items both regions
// priced, one over those representative in a, one over those representative
// in b (Sergeev 2001; Eurostat-OECD Methodological Manual on PPPs, 2012
// edition, GEKS* for basic headings; section not checked, from memory):
//   ln J*_ab = 1/2 (ln J_ab^(a) + ln J_ab^(b)),
//   ln J_ab^(a) = sum_i w_i r_ai m_bi (ln p_bi - ln p_ai) / sum_i w_i r_ai m_bi,
// with m the presence mask, r the representative mask (counted only where
// present) and w the item weights (empty = all 1). When only one of the two
// has a matched item, J*_ab is that one; when neither has, the pair has no
// index (NaN), however many unflagged items it shares. The diagonal is 1 for
// a region with any representative item, NaN otherwise.
// `num_matched` (when non-null) gets the representative matches per pair:
// (a, b) = items representative in a and priced by b.
Eigen::MatrixXd AllPairsJevonsRepresentative(const Eigen::MatrixXd& log_price,
                                             const Eigen::MatrixXd& present,
                                             const Eigen::MatrixXd& representative,
                                             const Eigen::VectorXd& item_weight,
                                             Eigen::MatrixXi* num_matched);

// Paasche-Laspeyres spread statistics of one region against all others, as
// |ln(Laspeyres / Paasche)| (shown x100 as "P-L spread, %" on the terminal
// and in the report).
struct RegionSpread {
  // Median over the partners with a finite spread (mean of the two middle
  // values of an even count); NaN when there is none, or when not asked
  // for (SpreadOptions::region_medians).
  double median = 0.0;
  // Largest of them (NaN when there is none) and its partner (the first
  // region index reaching it; -1 when none).
  double max = 0.0;
  int worst_partner = -1;
};

// A pair of regions (a < b) with its spread |ln(L / P)| and its indices
// (entry (a, b) of each matrix of BilateralMatrices).
struct SpreadPairIndices {
  int a = -1, b = -1;
  double spread = 0.0;
  double laspeyres = 0.0, paasche = 0.0, fisher = 0.0, tornqvist = 0.0;
  int num_matched = 0;
};

// What the terminal, the large-spread warnings and the report need of the
// spreads between every pair of regions, without the region x region
// matrices (AllPairsSpreads).
struct SpreadSummary {
  // Per region, as computed from the full matrices with the elementwise
  // (vectorised) logarithm of the matrix expression: RegionSpreads (with
  // SpreadOptions::region_medians false, the medians are NaN and the rest
  // the same bits).
  std::vector<RegionSpread> regions;
  // Per region, with std::log and the first partner whose 100 |ln(L / P)|
  // is strictly above all before it and above 0 (the large-spread check):
  // the value in percent (0 when none) and the partner (-1 when none).
  std::vector<double> check_percent;
  std::vector<int> check_partner;
  // Finite spreads (std::log) of the pairs a < b, row by row: filled only
  // when SpreadOptions::keep_pair_spreads (the report's cards and histogram).
  std::vector<double> pair_spreads;
  // The widest pairs (a < b), widest first, ties by (a, b).
  std::vector<SpreadPairIndices> widest;
};

struct SpreadOptions {
  // Keeps every pair's spread in SpreadSummary::pair_spreads (8 bytes a
  // pair: 36 MB at 3,000 regions). Default true.
  bool keep_pair_spreads = true;
  // Forms each region's median spread (RegionSpread::median, the report's
  // table); false leaves it NaN, and the row blocks of
  // GeksFisherAndSpreadsByRowBlocks then hold no spread of any pair past
  // its block (the medians need them all at once: two triangles of
  // regions x (regions - 1) / 2 doubles, 72 MB at 3,000 regions). The
  // largest spread and its partner are the same either way. Default true.
  bool region_medians = true;
  // Number of widest pairs kept, >= 0. Default 12 (the report's table).
  int num_widest = 12;
  // Regions per row block, a positive multiple of 4 (a rule kept from
  // when the products' summation order depended on an entry's place; every
  // sum is now the same chain in any block); memory is about
  // 4 x block x regions doubles per thread. The results do not depend on
  // it. Default 128.
  int block_rows = 128;
  // Threads over the blocks, >= 0; 0 = OpenMP's default. Default 0.
  int num_threads = 0;
  // Returns false (and says why in `error`) when a field is out of range.
  bool IsValid(std::string* error) const;
};

// Computes the spread summary of AllPairsWeighted(price, expenditure)
// without forming its region x region matrices: the sums behind Laspeyres
// and Paasche are formed for a block of rows (and the transposed block) at a
// time, reduced and dropped. Time grows as regions^2 x columns, memory as
// block_rows x regions (plus pair_spreads when kept). Runs over blocks in
// parallel when called outside a parallel region; the result does not
// depend on the thread count. Entries equal those of the full matrices
// (tested: BilateralMatrix.SpreadSummaryEqualsFullMatrices).
SpreadSummary AllPairsSpreads(const Eigen::MatrixXd& price, const Eigen::MatrixXd& expenditure,
                              const SpreadOptions& options = SpreadOptions());

// GeksByRowBlocks(GeksIndex::kFisher, price, expenditure, options, result)
// and AllPairsSpreads(price, expenditure, spread_options) together: the
// sums behind Laspeyres and Paasche are those behind Fisher, so the row
// blocks' products serve both (about a third of the work of the two apart
// at 3,000 regions x 100 headings). Both results are bit for bit those of
// the two functions (tested: GeksByRowBlocks.SpreadsEqualAllPairsSpreads),
// for any block size and thread count; spread_options.block_rows and
// num_threads are not used (`options`' are). Memory, with region_medians
// (the default): the spreads of every pair seen from each side, n (n - 1)
// doubles, besides GeksByRowBlocks's; without it, a few doubles a region.
// Returns false, leaving both untouched, when GeksByRowBlocks would.
bool GeksFisherAndSpreadsByRowBlocks(const Eigen::MatrixXd& price,
                                     const Eigen::MatrixXd& expenditure,
                                     const GeksBlockOptions& options,
                                     const SpreadOptions& spread_options, GeksResult* result,
                                     SpreadSummary* spreads);

}  // namespace paritas

#endif  // PARITAS_AGGREGATION_BILATERAL_MATRIX_H_
