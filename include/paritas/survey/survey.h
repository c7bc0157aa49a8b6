// The survey data model: interned codes, region x heading expenditure, and
// per basic heading a compact table of cell prices (one per region x item
// priced), built once and shared by every later computation.
#ifndef PARITAS_SURVEY_SURVEY_H_
#define PARITAS_SURVEY_SURVEY_H_

#include <cstdint>
#include <string>
#include <vector>

#include <Eigen/Core>

#include "paritas/survey/classification.h"
#include "paritas/base/code_table.h"

namespace paritas {

// Cell prices of all headings in structure-of-arrays form, sorted by heading,
// then item, then region. A cell is one region x item with at least one
// quote; its price is the geometric mean of the quotes, weighted by the
// quote weights when the price files carry them.
struct CellPrices {
  std::vector<int32_t> region;      // region index
  std::vector<int32_t> item;        // item index (items are grouped by heading)
  // Mean of ln(quote): sum w ln p / sum w with quote weights w (1 without).
  std::vector<double> log_price;
  // Standard deviation of ln(quote); 0 for one quote. Weighted:
  // sqrt(sum w (ln p - mean)^2 / (V1 - V2 / V1)), V1 = sum w, V2 = sum w^2.
  std::vector<double> log_sd;
  std::vector<double> log_min;      // smallest ln(quote)
  std::vector<double> log_max;      // largest ln(quote)
  std::vector<int32_t> num_quotes;  // quotes behind the cell (>= 1)
  // 1 when at least one quote of the cell is flagged representative.
  std::vector<uint8_t> representative;
  // Sum of the quote weights behind the cell; empty when no price file has
  // a weight column.
  std::vector<double> weight;

  size_t size() const { return region.size(); }
};

// Where one basic heading's items and cells sit in the survey's arrays.
struct HeadingRange {
  int item_begin = 0;  // items [item_begin, item_end) belong to the heading
  int item_end = 0;
  int64_t cell_begin = 0;  // cells [cell_begin, cell_end) belong to the heading
  int64_t cell_end = 0;
  int num_items() const { return item_end - item_begin; }
  int64_t num_cells() const { return cell_end - cell_begin; }
};

struct Survey {
  // Regions in the order of regions.csv when given, else sorted by code.
  CodeTable regions;
  // Items grouped by heading (in classification order), sorted by code within.
  CodeTable items;
  // Heading index of each item (index into classification.headings()).
  std::vector<int> item_heading;
  std::vector<std::string> item_description;  // empty when not given
  std::vector<std::string> item_unit;          // empty when not given
  std::vector<std::string> region_name;        // empty when not given
  // Population of each region; NaN when not given.
  std::vector<double> region_population;
  bool has_population = false;

  Classification classification;
  // Basic heading codes, in classification order (as classification.headings()).
  std::vector<std::string> heading_codes;
  std::vector<HeadingRange> heading_range;

  CellPrices cells;
  // Nominal expenditure of region r on heading h (currency units, >= 0), or
  // NaN where expenditure.csv has no row. With national weights every
  // region's row holds the national amounts.
  Eigen::MatrixXd expenditure;
  // True when expenditure.csv has no region column: one national basket
  // weighs every region (compute values it at each region's heading
  // parities; regional nominal and real expenditure are unknown).
  bool national_weights = false;

  // Heading parities made elsewhere (survey.external_parities), regions x
  // headings: ln parity and its standard error (NaN where the file gives
  // none); both empty (0 x 0) when there is no file.
  Eigen::MatrixXd external_log_parity;
  Eigen::MatrixXd external_log_se;
  // The external file's path as given; empty without one.
  std::string external_path;

  int64_t num_quotes = 0;
  int num_regions() const { return regions.size(); }
  int num_items() const { return items.size(); }
  int num_headings() const { return static_cast<int>(heading_codes.size()); }
};

// Linked groups of regions within one heading: regions are linked when they
// price a common item, directly or through other regions. Largest group
// first, ties by smallest region index; one group when all are linked.
std::vector<std::vector<int>> HeadingRegionGroups(const Survey& survey, int heading);

}  // namespace paritas

#endif  // PARITAS_SURVEY_SURVEY_H_
