// Loads a survey from a price file (with weight and quantity columns), an
// items file (with reference_quantity) and an expenditure file, and prints
// its cells, for the numpy cross-check in tests/python/quote_numpy_check.py.
//
// Usage: quote_crosscheck_tool PRICES.csv ITEMS.csv EXPENDITURE.csv
//   Prints region,item,num_quotes,log_price,log_sd,weight (17 significant
//   digits), or the load's message on standard error with exit code 1.
#include <cstdio>
#include <string>

#include "paritas/survey/survey_loader.h"

int main(int argc, char** argv) {
  if (argc != 4) {
    std::fprintf(stderr, "usage: quote_crosscheck_tool PRICES.csv ITEMS.csv EXPENDITURE.csv\n");
    return 1;
  }
  paritas::RunConfig config;
  config.survey.prices = {paritas::PriceSource{argv[1], paritas::CsvFormat(), {}}};
  config.survey.items = argv[2];
  config.survey.expenditure = argv[3];
  paritas::Survey survey;
  paritas::LoadSummary summary;
  if (!paritas::LoadSurvey(config, paritas::LoadOptions(), &survey, &summary)) {
    std::fprintf(stderr, "quote_crosscheck_tool: %s\n%s", summary.message.c_str(),
                 summary.DescribeRejections(5).c_str());
    return 1;
  }
  const paritas::CellPrices& cells = survey.cells;
  std::printf("region,item,num_quotes,log_price,log_sd,weight\n");
  for (size_t k = 0; k < cells.size(); ++k) {
    std::printf("%s,%s,%d,%.17g,%.17g,%.17g\n",
                std::string(survey.regions.Code(cells.region[k])).c_str(),
                std::string(survey.items.Code(cells.item[k])).c_str(), cells.num_quotes[k],
                cells.log_price[k], cells.log_sd[k], cells.weight.empty() ? 1.0 : cells.weight[k]);
  }
  return 0;
}
