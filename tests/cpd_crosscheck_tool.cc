// Reads CPD cells from a CSV and prints the fit, for the statsmodels
// cross-check in tests/python/cpd_statsmodels_check.py. Kept to plain text in
// and out so the Python side needs nothing but the standard library to talk
// to it.
//
// Usage: cpd_crosscheck_tool CELLS.csv [ERRORS [LOSS]]
//   CELLS.csv has the header region,item,log_price,weight (0-based indices;
//   an empty weight means 1). ERRORS is the sandwich kind of log_se_robust
//   (off, hc0, hc1, hc3; default hc0), LOSS the CPD loss (least-squares,
//   huber, cauchy; default least-squares). Prints
//   region,log_parity,log_se,log_se_robust, one line per region, parities
//   normalised to region 0 = 0, then a line "# scale,<threshold>,<fits>".
#include <algorithm>
#include <cstdio>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include "paritas/elementary/cpd.h"
#include "paritas/base/text.h"

namespace {

int Fail(const std::string& message) {
  std::fprintf(stderr, "cpd_crosscheck_tool: %s\n", message.c_str());
  return 1;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2 || argc > 4) return Fail("usage: cpd_crosscheck_tool CELLS.csv [ERRORS [LOSS]]");
  paritas::RobustErrors errors = paritas::RobustErrors::kHc0;
  if (argc >= 3 && !paritas::FromString(argv[2], &errors)) {
    return Fail(std::string("unknown ERRORS '") + argv[2] + "'");
  }
  paritas::CpdLoss loss = paritas::CpdLoss::kLeastSquares;
  if (argc >= 4 && !paritas::FromString(argv[3], &loss)) {
    return Fail(std::string("unknown LOSS '") + argv[3] + "'");
  }
  std::ifstream in(argv[1]);
  if (!in) return Fail(std::string("cannot open ") + argv[1]);
  std::string line;
  std::getline(in, line);
  if (!line.empty() && line.back() == '\r') line.pop_back();
  if (paritas::Trim(line) != "region,item,log_price,weight") {
    return Fail("expected the header region,item,log_price,weight");
  }
  std::vector<int> region;
  std::vector<int> item;
  std::vector<double> log_price;
  std::vector<double> weight;
  int line_number = 1;
  while (std::getline(in, line)) {
    ++line_number;
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (paritas::Trim(line).empty()) continue;
    std::stringstream fields(line);
    std::string text[4];
    for (std::string& t : text) std::getline(fields, t, ',');
    double value[4] = {0.0, 0.0, 0.0, 1.0};
    for (int f = 0; f < 4; ++f) {
      if (f == 3 && paritas::Trim(text[f]).empty()) continue;
      if (paritas::ParseNumber(text[f], &value[f]) != paritas::NumberStatus::kOk) {
        return Fail(std::string(argv[1]) + ":" + std::to_string(line_number) + ": bad field '" +
                    text[f] + "'");
      }
    }
    region.push_back(static_cast<int>(value[0]));
    item.push_back(static_cast<int>(value[1]));
    log_price.push_back(value[2]);
    weight.push_back(value[3]);
  }
  int num_regions = 0;
  int num_items = 0;
  for (size_t k = 0; k < region.size(); ++k) {
    num_regions = std::max(num_regions, region[k] + 1);
    num_items = std::max(num_items, item[k] + 1);
  }

  paritas::CpdData data;
  data.num_regions = num_regions;
  data.num_items = num_items;
  data.region = region;
  data.item = item;
  data.log_price = log_price;
  data.weight = weight;
  paritas::CpdOptions options;
  options.reference_weights.assign(num_regions, 0.0);
  if (num_regions > 0) options.reference_weights[0] = 1.0;
  options.robust_errors = errors;
  options.loss = loss;
  const paritas::CpdResult result = paritas::FitCpd(data, options);
  if (!result.identified) return Fail("fit failed: " + result.message);

  std::printf("region,log_parity,log_se,log_se_robust\n");
  for (int r = 0; r < num_regions; ++r) {
    std::printf("%d,%.17g,%.17g,%.17g\n", r, result.log_parity[r], result.log_se[r],
                result.log_se_robust[r]);
  }
  std::printf("# scale,%.17g,%d\n", result.robust_scale_used, result.num_robust_iterations);
  return 0;
}
