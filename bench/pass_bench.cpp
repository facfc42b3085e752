// The factor pass against parsing alone, on a generated numeric CSV of 20 columns.
//
//   pass_bench [--quick] [--keep] [--threads N]
//
// For each size (1M rows, and 4M rows unless --quick) the parent writes /tmp/stepledger-bench-
// <rows>.csv, then re-executes itself with --child FILE so that the peak memory reported is
// that size's alone. The child times
//   (a) parse only: CsvReader::Next and ClassifyCell on every field;
//   (b) RunFactorPass with a 20-term plan (19 numeric terms and one power term);
// and reads the peak resident memory (VmHWM of /proc/self/status) after each phase, reset
// between phases through /proc/self/clear_refs where the kernel allows it. The parent prints
// MB/s of both, the ratio (b)/(a) (goal >= 0.5) and the peaks. The design is built from the
// profile of a 10 000-row sample so that no extra pass over the big file is timed.

#include <charconv>
#include <chrono>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <map>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include <unistd.h>

#include "generated_csv.h"
#include "stepledger/engine/csv.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/design.h"
#include "stepledger/engine/profile.h"

namespace {

constexpr int kColumns = 20;  // y and x1..x19

using Clock = std::chrono::steady_clock;

const stepledger::bench::GeneratedCsv kShape{kColumns, kColumns - 1, 0.1, 1.0, 20261201};

void WriteCsv(const std::filesystem::path& path, std::uint64_t rows) {
  stepledger::bench::WriteGeneratedCsv(path, rows, kShape);
}

std::uint64_t PeakResidentKb() {
  std::ifstream status("/proc/self/status");
  for (std::string line; std::getline(status, line);) {
    if (line.rfind("VmHWM:", 0) == 0) return std::strtoull(line.c_str() + 6, nullptr, 10);
  }
  return 0;
}

// Resets the peak to the current resident size (Linux 4.0+); false when not allowed.
bool ResetPeak() {
  std::ofstream clear("/proc/self/clear_refs");
  clear << "5";
  clear.flush();
  return static_cast<bool>(clear);
}

stepledger::DesignSpec MakeSpec() {
  stepledger::DesignSpec spec = stepledger::bench::GeneratedCsvSpec(kShape);
  stepledger::TermSpec square;
  square.name = "x1^2";
  square.kind = stepledger::TermKind::kPower;
  square.column = "x1";
  square.degree = 2;
  spec.terms.push_back(square);
  return spec;
}

int RunChild(const std::filesystem::path& data, int threads) {
  const std::uint64_t bytes = std::filesystem::file_size(data);
  const std::uint64_t start_kb = PeakResidentKb();

  // The design, from a sample of the same file (not timed).
  const std::filesystem::path sample = data.string() + ".sample.csv";
  {
    std::ifstream in(data, std::ios::binary);
    std::ofstream out(sample, std::ios::binary);
    std::string line;
    for (int i = 0; i <= 10000 && std::getline(in, line); ++i) out << line << "\n";
  }
  const stepledger::CsvOptions csv;
  const stepledger::Design design =
      stepledger::BuildDesign(MakeSpec(), stepledger::ProfileCsv(sample, csv));
  std::filesystem::remove(sample);

  // (a) parse only.
  ResetPeak();
  auto start = Clock::now();
  std::uint64_t numbers = 0;
  double checksum = 0;
  {
    stepledger::CsvReader reader(data, csv);
    stepledger::CsvRecord record;
    while (reader.Next(record)) {
      for (const stepledger::CsvField& field : record.fields) {
        double value = 0;
        if (stepledger::ClassifyCell(field.text, csv.missing_tokens, value) ==
            stepledger::CellKind::kNumber) {
          ++numbers;
          checksum += value;
        }
      }
    }
  }
  const double parse_seconds = std::chrono::duration<double>(Clock::now() - start).count();
  const std::uint64_t parse_peak_kb = PeakResidentKb();

  // (b) the factor pass.
  const bool reset = ResetPeak();
  stepledger::PassOptions options;
  options.threads = threads;
  start = Clock::now();
  const stepledger::PassResult pass = stepledger::RunFactorPass(data, design, options);
  const double pass_seconds = std::chrono::duration<double>(Clock::now() - start).count();
  const std::uint64_t pass_peak_kb = PeakResidentKb();

  std::cout << "bytes=" << bytes << " rows=" << pass.accounting.rows_used
            << " numbers=" << numbers << " checksum=" << checksum
            << " parse_seconds=" << parse_seconds << " pass_seconds=" << pass_seconds
            << " start_kb=" << start_kb << " parse_peak_kb=" << parse_peak_kb
            << " pass_peak_kb=" << pass_peak_kb << " peak_reset=" << (reset ? 1 : 0) << "\n";
  return 0;
}

std::map<std::string, std::string> ParseKeyValues(const std::string& text) {
  std::map<std::string, std::string> values;
  std::istringstream stream(text);
  for (std::string item; stream >> item;) {
    const auto equals = item.find('=');
    if (equals != std::string::npos) values[item.substr(0, equals)] = item.substr(equals + 1);
  }
  return values;
}

std::filesystem::path SelfPath() { return std::filesystem::read_symlink("/proc/self/exe"); }

}  // namespace

int main(int argc, char** argv) {
  bool quick = false, keep = false;
  int threads = 1;
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--child" && i + 1 < argc) {
      for (int j = i + 2; j + 1 < argc; ++j) {
        if (std::string(argv[j]) == "--threads") threads = std::atoi(argv[j + 1]);
      }
      return RunChild(argv[i + 1], threads);
    }
    if (arg == "--quick") {
      quick = true;
    } else if (arg == "--keep") {
      keep = true;
    } else if (arg == "--threads" && i + 1 < argc) {
      threads = std::atoi(argv[++i]);
    } else {
      std::cerr << "usage: pass_bench [--quick] [--keep] [--threads N]\n";
      return 2;
    }
  }
  if (threads < 1) threads = 1;

  std::vector<std::uint64_t> sizes = {1'000'000};
  if (!quick) sizes.push_back(4'000'000);

  std::printf("factor pass vs parse only: %d numeric columns, 20-term plan, %d thread(s)\n\n",
              kColumns, threads);
  std::printf("| rows | file MB | parse MB/s | pass MB/s | pass/parse | peak MB parse | peak MB pass |\n");
  std::printf("| ---: | ---: | ---: | ---: | ---: | ---: | ---: |\n");
  for (const std::uint64_t rows : sizes) {
    const std::filesystem::path data =
        std::filesystem::temp_directory_path() / ("stepledger-bench-" + std::to_string(rows) + ".csv");
    if (!std::filesystem::exists(data)) WriteCsv(data, rows);
    const std::string command = "'" + SelfPath().string() + "' --child '" + data.string() +
                                "' --threads " + std::to_string(threads);
    FILE* pipe = ::popen(command.c_str(), "r");
    std::string output;
    char buffer[512];
    while (pipe != nullptr && std::fgets(buffer, sizeof buffer, pipe) != nullptr) output += buffer;
    const int status = pipe != nullptr ? ::pclose(pipe) : -1;
    if (!keep) std::filesystem::remove(data);
    if (status != 0) {
      std::cerr << "pass_bench: child for " << rows << " rows failed\n";
      return 3;
    }
    const auto values = ParseKeyValues(output);
    const double mb = std::stod(values.at("bytes")) / 1e6;
    const double parse_rate = mb / std::stod(values.at("parse_seconds"));
    const double pass_rate = mb / std::stod(values.at("pass_seconds"));
    std::printf("| %llu | %.0f | %.0f | %.0f | %.2f | %.1f | %.1f%s |\n",
                static_cast<unsigned long long>(rows), mb, parse_rate, pass_rate,
                pass_rate / parse_rate, std::stod(values.at("parse_peak_kb")) / 1024.0,
                std::stod(values.at("pass_peak_kb")) / 1024.0,
                values.at("peak_reset") == "1" ? "" : " (cumulative)");
    std::fflush(stdout);
  }
  std::printf("\nGoal: pass/parse >= 0.5; peak memory independent of the row count.\n");
  return 0;
}
