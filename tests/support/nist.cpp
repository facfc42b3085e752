#include "support/nist.h"

#include <cmath>
#include <cstdlib>
#include <fstream>
#include <regex>
#include <sstream>
#include <stdexcept>

#include "support/test_paths.h"

namespace stepledger::testing {
namespace {

std::vector<std::string> Tokens(const std::string& line) {
  std::istringstream stream(line);
  std::vector<std::string> tokens;
  std::string token;
  while (stream >> token) tokens.push_back(token);
  return tokens;
}

double ParseNumber(const std::string& token, const std::string& where) {
  // strtod accepts every form NIST uses: Fortran exponents (E+16), a trailing decimal point
  // ("557028453333333.") and "Infinity".
  char* end = nullptr;
  const double value = std::strtod(token.c_str(), &end);
  if (token.empty() || end != token.c_str() + token.size()) {
    throw std::runtime_error(where + ": not a number: '" + token + "'");
  }
  return value;
}

std::pair<int, int> LineRange(const std::string& line, const std::string& where) {
  static const std::regex pattern(R"(lines\s+(\d+)\s+to\s+(\d+))");
  std::smatch match;
  if (!std::regex_search(line, match, pattern)) {
    throw std::runtime_error(where + ": expected '(lines A to B)', found '" + line + "'");
  }
  return {std::stoi(match[1]), std::stoi(match[2])};
}

}  // namespace

NistDataset ReadNistDataset(const std::filesystem::path& path) {
  std::ifstream stream(path, std::ios::binary);
  if (!stream) throw std::runtime_error(path.string() + ": cannot open");
  std::vector<std::string> lines;
  std::string line;
  while (std::getline(stream, line)) {
    if (!line.empty() && line.back() == '\r') line.pop_back();
    lines.push_back(line);
  }
  auto where = [&](int number) { return path.string() + ":" + std::to_string(number); };
  if (lines.size() < 6) throw std::runtime_error(where(static_cast<int>(lines.size())) + ": file too short");
  const auto [certified_first, certified_last] = LineRange(lines[4], where(5));
  const auto [data_first, data_last] = LineRange(lines[5], where(6));
  if (data_last > static_cast<int>(lines.size()) || certified_last > static_cast<int>(lines.size())) {
    throw std::runtime_error(where(6) + ": line ranges beyond the end of the file");
  }

  NistDataset dataset;
  dataset.name = path.stem().string();
  NistCertified& certified = dataset.certified;
  bool have_sd = false, have_r2 = false, have_regression = false, have_residual = false;
  static const std::regex parameter(R"(B(\d+))");
  for (int number = certified_first; number <= certified_last; ++number) {
    const std::vector<std::string> tokens = Tokens(lines[number - 1]);
    if (tokens.empty()) continue;
    if (std::regex_match(tokens[0], parameter) && tokens.size() == 3) {
      if (certified.estimates.empty()) dataset.first_parameter_is_b0 = tokens[0] == "B0";
      certified.estimates.push_back(ParseNumber(tokens[1], where(number)));
      certified.standard_deviations.push_back(ParseNumber(tokens[2], where(number)));
    } else if (tokens.size() == 3 && tokens[0] == "Standard" && tokens[1] == "Deviation") {
      certified.residual_sd = ParseNumber(tokens[2], where(number));
      have_sd = true;
    } else if (tokens.size() == 2 && tokens[0] == "R-Squared") {
      certified.r_squared = ParseNumber(tokens[1], where(number));
      have_r2 = true;
    } else if (tokens.size() == 5 && tokens[0] == "Regression") {
      certified.regression_df = ParseNumber(tokens[1], where(number));
      certified.regression_ss = ParseNumber(tokens[2], where(number));
      certified.regression_ms = ParseNumber(tokens[3], where(number));
      certified.regression_f = ParseNumber(tokens[4], where(number));
      have_regression = true;
    } else if (tokens.size() == 4 && tokens[0] == "Residual") {
      certified.residual_df = ParseNumber(tokens[1], where(number));
      certified.residual_ss = ParseNumber(tokens[2], where(number));
      certified.residual_ms = ParseNumber(tokens[3], where(number));
      have_residual = true;
    }
  }
  if (certified.estimates.empty() || !have_sd || !have_r2 || !have_regression || !have_residual) {
    throw std::runtime_error(where(certified_first) + ": incomplete certified block in lines " +
                             std::to_string(certified_first) + "-" + std::to_string(certified_last));
  }

  std::vector<std::vector<double>> rows;
  for (int number = data_first; number <= data_last; ++number) {
    const std::vector<std::string> tokens = Tokens(lines[number - 1]);
    if (tokens.empty()) continue;
    std::vector<double> values;
    for (const std::string& token : tokens) values.push_back(ParseNumber(token, where(number)));
    if (!rows.empty() && values.size() != rows.front().size()) {
      throw std::runtime_error(where(number) + ": expected " + std::to_string(rows.front().size()) +
                               " values, found " + std::to_string(values.size()));
    }
    if (values.size() < 2) throw std::runtime_error(where(number) + ": a data row needs y and x");
    rows.push_back(std::move(values));
  }
  dataset.y.set_size(rows.size());
  dataset.predictors.set_size(rows.size(), rows.empty() ? 0 : rows.front().size() - 1);
  for (std::size_t i = 0; i < rows.size(); ++i) {
    dataset.y(i) = rows[i][0];
    for (std::size_t j = 1; j < rows[i].size(); ++j) dataset.predictors(i, j - 1) = rows[i][j];
  }
  return dataset;
}

std::filesystem::path NistDirectory() {
  std::filesystem::path folder = ReferenceDir() / "nist-strd";
  if (!std::filesystem::is_directory(folder)) {
    throw std::runtime_error("NIST StRD folder '" + folder.string() + "' is missing");
  }
  return folder;
}

double LogRelativeError(double computed, double certified) {
  if (std::isnan(computed)) return 0;
  const double error = certified == 0 ? std::abs(computed) : std::abs(computed - certified) / std::abs(certified);
  if (error == 0) return 15;
  return std::min(15.0, std::max(0.0, -std::log10(error)));
}

}  // namespace stepledger::testing
