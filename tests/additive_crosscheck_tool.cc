// Reads a node's cells from a CSV and prints the ln parities of an
// aggregation method, for the numpy cross-check in
// tests/python/additive_numpy_check.py. Plain text in and out, as
// cpd_crosscheck_tool.
//
// Usage: additive_crosscheck_tool METHOD CELLS.csv
//   CELLS.csv has the header region,heading,price,expenditure (0-based
//   indices; absent cells are simply not listed). Prints region,log_parity
//   (mean 0 over the regions with a parity), or the method's failure on
//   standard error with exit code 2.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "paritas/aggregation/aggregation.h"

namespace {

int Fail(const std::string& message) {
  std::fprintf(stderr, "additive_crosscheck_tool: %s\n", message.c_str());
  return 1;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 3) return Fail("usage: additive_crosscheck_tool METHOD CELLS.csv");
  const paritas::AggregationMethod* method = paritas::FindAggregationMethod(argv[1]);
  if (method == nullptr) return Fail(std::string("no method ") + argv[1]);
  std::ifstream in(argv[2]);
  if (!in) return Fail(std::string("cannot open ") + argv[2]);
  std::string line;
  std::getline(in, line);
  if (line.rfind("region,heading,price,expenditure", 0) != 0) {
    return Fail("expected the header region,heading,price,expenditure");
  }
  struct Cell {
    int region, heading;
    double price, expenditure;
  };
  std::vector<Cell> cells;
  int num_regions = 0, num_headings = 0;
  while (std::getline(in, line)) {
    Cell c;
    if (std::sscanf(line.c_str(), "%d,%d,%lf,%lf", &c.region, &c.heading, &c.price,
                    &c.expenditure) != 4) {
      continue;
    }
    cells.push_back(c);
    num_regions = std::max(num_regions, c.region + 1);
    num_headings = std::max(num_headings, c.heading + 1);
  }
  paritas::NodeArrays arrays;
  arrays.price = Eigen::MatrixXd::Constant(num_regions, num_headings, std::nan(""));
  arrays.expenditure = arrays.price;
  for (const Cell& c : cells) {
    arrays.price(c.region, c.heading) = c.price;
    arrays.expenditure(c.region, c.heading) = c.expenditure;
  }
  const paritas::AggregateParities result = paritas::AggregateFromBilaterals(
      arrays, paritas::NodeBilaterals(arrays, method->BilateralsNeeded()), *method);
  if (!result.failure.empty()) {
    std::fprintf(stderr, "%s\n", result.failure.c_str());
    return 2;
  }
  std::printf("region,log_parity\n");
  for (int r = 0; r < num_regions; ++r) std::printf("%d,%.17g\n", r, result.log_parity(r));
  return 0;
}
