#include "test_util.h"

#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>

#include <sys/wait.h>
#include <unistd.h>

#include <cstdlib>
#include <mutex>
#include <system_error>
#include <vector>

#include <nlohmann/json.hpp>

#include "base/sha256.h"

namespace paritas::testing {

::testing::AssertionResult IsClose(double actual, double expected, double rel_tol) {
  if (std::isnan(actual) && std::isnan(expected)) return ::testing::AssertionSuccess();
  if (std::isinf(actual) || std::isinf(expected)) {
    if (actual == expected) return ::testing::AssertionSuccess();
  } else if (std::abs(actual - expected) <= rel_tol * std::max(1.0, std::abs(expected))) {
    return ::testing::AssertionSuccess();
  }
  std::ostringstream s;
  s.precision(17);
  s << actual << " differs from " << expected << " by more than " << rel_tol;
  return ::testing::AssertionFailure() << s.str();
}

std::string TestDataPath(const std::string& relative) {
  return std::string(PARITAS_TEST_DATA_DIR) + "/" + relative;
}

std::string SourcePath(const std::string& relative) {
  return std::string(PARITAS_SOURCE_DIR) + "/" + relative;
}

std::vector<SixCommodityRow> ReadSixCommodityRows() {
  std::ifstream in(TestDataPath("published/six_commodity_prices_quantities.csv"));
  std::string line;
  std::getline(in, line);  // Header.
  std::vector<SixCommodityRow> rows;
  while (std::getline(in, line)) {
    if (line.empty()) continue;
    std::stringstream fields(line);
    std::string situation, quantity;
    SixCommodityRow row;
    std::getline(fields, situation, ',');
    std::getline(fields, row.commodity, ',');
    std::getline(fields, row.price_text, ',');
    std::getline(fields, quantity, ',');
    row.situation = std::stoi(situation);
    row.price = std::stod(row.price_text);
    row.quantity = std::stod(quantity);
    rows.push_back(std::move(row));
  }
  return rows;
}

std::string WriteSixCommoditySurvey(const std::string& name, const std::string& classification) {
  const std::string dir = MakeTempDir(name);
  std::string prices = "region,item,price,heading\n";
  std::string expenditure = "region,heading,expenditure\n";
  for (const SixCommodityRow& row : ReadSixCommodityRows()) {
    const std::string region = "s" + std::to_string(row.situation);
    prices += region + ",i_" + row.commodity + "," + row.price_text + "," + row.commodity + "\n";
    std::ostringstream value;
    value.precision(17);
    value << row.price * row.quantity;
    expenditure += region + "," + row.commodity + "," + value.str() + "\n";
  }
  WriteTextFile(dir + "/prices.csv", prices);
  WriteTextFile(dir + "/expenditure.csv", expenditure);
  WriteTextFile(dir + "/run.yaml",
                "survey:\n  prices: prices.csv\n  expenditure: expenditure.csv\nclassification:\n" +
                    classification);
  return dir + "/run.yaml";
}

namespace {

// The folders MakeTempDir made, removed when the process ends: a full test
// run makes about a thousand (some of hundreds of MB), which otherwise pile
// up in the temporary folder run after run.
class TempDirs {
 public:
  void Add(const std::string& dir) {
    std::lock_guard<std::mutex> lock(mutex_);
    dirs_.push_back(dir);
  }
  ~TempDirs() {
    const char* keep = std::getenv("PARITAS_KEEP_TEST_FILES");
    if (keep != nullptr && keep[0] != '\0' && std::string(keep) != "0") return;
    for (const std::string& dir : dirs_) {
      std::error_code ec;
      std::filesystem::remove_all(dir, ec);
    }
  }

 private:
  std::mutex mutex_;
  std::vector<std::string> dirs_;
};

}  // namespace

std::string MakeTempDir(const std::string& name) {
  namespace fs = std::filesystem;
  static TempDirs made;
  // The process id keeps tests that ctest runs in parallel out of each
  // other's folders.
  fs::path dir = fs::temp_directory_path() / ("paritas_test_" + std::to_string(::getpid()) + "_" + name);
  fs::remove_all(dir);
  fs::create_directories(dir);
  made.Add(dir.string());
  return dir.string();
}

void WriteTextFile(const std::string& path, const std::string& contents) {
  std::filesystem::path p(path);
  if (p.has_parent_path()) std::filesystem::create_directories(p.parent_path());
  std::ofstream out(path, std::ios::binary);
  out << contents;
}

void WriteRunFile(const std::string& dir, const std::string& relative,
                  const std::string& contents) {
  WriteTextFile(dir + "/" + relative, contents);
  nlohmann::json record = nlohmann::json::parse(ReadTextFile(dir + "/run.json"));
  for (nlohmann::json& file : record["outputs"]) {
    if (file["path"] == relative) {
      file["bytes"] = contents.size();
      file["sha256"] = internal::Sha256Hex(contents);
    }
  }
  WriteTextFile(dir + "/run.json", record.dump(1));
}

std::string ReadTextFile(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream s;
  s << in.rdbuf();
  return s.str();
}

int RunCli(const std::string& arguments, std::string* out, std::string* err) {
  static int counter = 0;
  const std::string base = std::filesystem::temp_directory_path().string() + "/paritas_cli_" +
                           std::to_string(::getpid()) + "_" + std::to_string(counter++);
  const std::string command = std::string(PARITAS_CLI_PATH) + " " + arguments + " </dev/null >" +
                              base + ".out 2>" + base + ".err";
  const int status = std::system(command.c_str());
  if (out != nullptr) *out = ReadTextFile(base + ".out");
  if (err != nullptr) *err = ReadTextFile(base + ".err");
  std::filesystem::remove(base + ".out");
  std::filesystem::remove(base + ".err");
  return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

size_t CountOf(const std::string& text, const std::string& needle) {
  size_t count = 0;
  for (size_t at = text.find(needle); at != std::string::npos;
       at = text.find(needle, at + needle.size())) {
    ++count;
  }
  return count;
}

}  // namespace paritas::testing
