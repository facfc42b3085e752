// Reading data at the command line: the text is read once, so a pipe, a FIFO and /dev/stdin work
// as data; any thread count gives the same route, model, accounting and fingerprint; the typed
// spill in --work-dir is gone after a run, after an error, after SIGTERM, and a full working
// folder is a clear error that leaves no output behind.

#include <fcntl.h>
#include <signal.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include <chrono>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <random>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include <gtest/gtest.h>
#include <zlib.h>
#include <zstd.h>
#include <nlohmann/json.hpp>

#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::RunCommand;
using testing::RunStepledger;
using testing::StepledgerBinary;
using testing::TempDir;

// An invented pricing data set whose true model the test knows: price = 900 - 6 age + 9 memory
// + grade effect + noise; `noise1` and `noise2` carry no signal; a few cells are missing.
std::string Listings(std::size_t rows, unsigned seed) {
  std::mt19937_64 random(seed);
  std::normal_distribution<double> noise(0.0, 35.0);
  std::uniform_int_distribution<int> age(1, 60), memory(4, 64), grade(0, 2);
  std::uniform_real_distribution<double> uniform(0.0, 1.0);
  const char* grades[] = {"A", "B", "C"};
  const double grade_effect[] = {80, 20, 0};
  std::string text = "price,age,memory,grade,noise1,noise2,note\n";
  for (std::size_t row = 0; row < rows; ++row) {
    const int a = age(random), m = memory(random), g = grade(random);
    const double price = 900 - 6 * a + 9 * m + grade_effect[g] + noise(random);
    char line[256];
    std::snprintf(line, sizeof line, "%.2f,%d,%s,%s,%.4f,%.4f,\"free, text\nline %zu\"\n", price, a,
                  row % 997 == 5 ? "" : std::to_string(m).c_str(), grades[g], uniform(random), uniform(random), row);
    text += line;
  }
  return text;
}

constexpr const char* kPlan = R"({
  "response": "price",
  "terms": [
    {"name": "age", "column": "age"},
    {"name": "memory", "column": "memory"},
    {"name": "grade", "categorical": "grade"},
    {"name": "noise1", "column": "noise1"},
    {"name": "noise2", "column": "noise2"}
  ],
  "method": "stepwise",
  "criterion": "bic"
})";

// select --out into a fresh folder; returns the audit.
nlohmann::json SelectAudit(const std::vector<std::string>& extra, const std::filesystem::path& data,
                           const std::filesystem::path& plan, const std::filesystem::path& out_dir) {
  std::vector<std::string> args = {"select", data.string(), "--plan", plan.string(), "--quiet",
                                   "--out", out_dir.string(), "--force"};
  args.insert(args.end(), extra.begin(), extra.end());
  const auto run = RunStepledger(args);
  EXPECT_EQ(run.status, 0) << run.err;
  std::ifstream in(out_dir / "audit.json");
  return nlohmann::json::parse(in);
}

bool EmptyFolder(const std::filesystem::path& folder) { return std::filesystem::is_empty(folder); }

// Over 3 MiB, so that 2 and 3 threads really read 2 and 3 byte ranges (a range is at least 1 MiB),
// with quoted fields holding line ends and delimiters across the cuts.
TEST(DataReadingTest, ThreadCountsGiveTheSameRouteModelAndAccounting) {
  TempDir dir;
  const auto data = dir.Write("listings.csv", Listings(60000, 11));
  ASSERT_GT(std::filesystem::file_size(data), 3u << 20);
  const auto plan = dir.Write("plan.json", kPlan);
  const auto work = dir.path() / "work";
  std::filesystem::create_directory(work);
  std::vector<nlohmann::json> results;
  for (const char* threads : {"1", "2", "3"}) {
    results.push_back(SelectAudit({"--threads", threads, "--work-dir", work.string()}, data, plan,
                                  dir.path() / (std::string("out") + threads)));
    EXPECT_TRUE(EmptyFolder(work)) << threads << " threads left a spill behind";
  }
  const nlohmann::json& one = results[0];
  ASSERT_TRUE(one.contains("steps"));
  for (std::size_t r = 1; r < results.size(); ++r) {
    const nlohmann::json& other = results[r];
    for (const char* key : {"sha256", "bytes", "rows_read", "rows_used", "rows_dropped"}) {
      EXPECT_EQ(other["data"][key], one["data"][key]) << r + 1 << " threads: data." << key;
    }
    ASSERT_EQ(other["steps"].size(), one["steps"].size());
    for (std::size_t step = 0; step < one["steps"].size(); ++step) {
      EXPECT_EQ(other["steps"][step]["action"], one["steps"][step]["action"]);
      EXPECT_EQ(other["steps"][step]["term"], one["steps"][step]["term"]);
    }
    const auto& a = one["model"]["coefficients"];
    const auto& b = other["model"]["coefficients"];
    ASSERT_EQ(a.size(), b.size());
    for (std::size_t c = 0; c < a.size(); ++c) {
      EXPECT_EQ(a[c]["name"], b[c]["name"]);
      const double x = a[c]["estimate"].get<double>(), y = b[c]["estimate"].get<double>();
      EXPECT_LE(std::abs(x - y), 1e-12 * std::max(std::abs(x), std::abs(y))) << a[c]["name"];
    }
  }
}

TEST(DataReadingTest, APipeAFifoAndStandardInputAreReadOnce) {
  TempDir dir;
  const std::string text = Listings(3000, 5);
  const auto data = dir.Write("listings.csv", text);
  const auto plan = dir.Write("plan.json", kPlan);
  const nlohmann::json expected = SelectAudit({}, data, plan, dir.path() / "from_file");

  const auto fifo = dir.path() / "listings.fifo";
  ASSERT_EQ(::mkfifo(fifo.c_str(), 0600), 0);
  std::thread writer([&] { std::ofstream(fifo) << text; });
  const nlohmann::json from_fifo = SelectAudit({}, fifo, plan, dir.path() / "from_fifo");
  writer.join();
  EXPECT_EQ(from_fifo["data"]["sha256"], expected["data"]["sha256"]);
  EXPECT_EQ(from_fifo["model"]["terms"], expected["model"]["terms"]);

  const auto stdin_out = dir.path() / "from_stdin";
  const std::string command = "cat '" + data.string() + "' | '" + StepledgerBinary().string() +
                              "' select /dev/stdin --plan '" + plan.string() + "' --quiet --out '" +
                              stdin_out.string() + "'";
  ASSERT_EQ(RunCommand(command), 0);
  std::ifstream in(stdin_out / "audit.json");
  const nlohmann::json from_stdin = nlohmann::json::parse(in);
  EXPECT_EQ(from_stdin["data"]["sha256"], expected["data"]["sha256"]);
  EXPECT_EQ(from_stdin["model"]["terms"], expected["model"]["terms"]);
}

TEST(DataReadingTest, AnErrorMidFileLeavesNoSpill) {
  TempDir dir;
  const auto data = dir.Write("listings.csv", Listings(20000, 3) + "500,nan,8,A,0.1,0.2,x\n");
  const auto plan = dir.Write("plan.json", kPlan);
  const auto work = dir.path() / "work";
  std::filesystem::create_directory(work);
  for (const char* threads : {"1", "2"}) {
    const auto run = RunStepledger({"select", data.string(), "--plan", plan.string(), "--threads", threads,
                                    "--work-dir", work.string(), "--out", (dir.path() / "out").string()});
    EXPECT_EQ(run.status, 2);
    EXPECT_NE(run.err.find("listings.csv:40002:5:"), std::string::npos) << run.err;
    EXPECT_TRUE(EmptyFolder(work));
    EXPECT_FALSE(std::filesystem::exists(dir.path() / "out" / "audit.json"));
  }
}

// The program is killed with SIGTERM while its spill exists: the handler removes it.
TEST(DataReadingTest, SigtermRemovesTheSpill) {
  TempDir dir;
  const auto data = dir.Write("listings.csv", Listings(200000, 9));
  const auto plan = dir.Write("plan.json", kPlan);
  const auto work = dir.path() / "work";
  std::filesystem::create_directory(work);
  const pid_t child = ::fork();
  ASSERT_GE(child, 0);
  if (child == 0) {
    const std::string binary = StepledgerBinary().string();
    ::execl(binary.c_str(), binary.c_str(), "select", data.c_str(), "--plan", plan.c_str(), "--quiet",
            "--threads", "1", "--work-dir", work.c_str(), static_cast<char*>(nullptr));
    ::_exit(127);
  }
  // Wait until the spill has data in it, then stop the run.
  bool seen = false;
  for (int wait = 0; wait < 2000 && !seen; ++wait) {
    std::this_thread::sleep_for(std::chrono::milliseconds(5));
    for (const auto& folder : std::filesystem::directory_iterator(work)) {
      for (const auto& file : std::filesystem::directory_iterator(folder.path())) {
        if (std::filesystem::file_size(file.path()) > 0) seen = true;
      }
    }
  }
  ASSERT_TRUE(seen) << "the run never wrote its spill";
  ASSERT_EQ(::kill(child, SIGTERM), 0);
  int status = 0;
  ASSERT_EQ(::waitpid(child, &status, 0), child);
  EXPECT_TRUE(WIFSIGNALED(status) && WTERMSIG(status) == SIGTERM) << "status " << status;
  EXPECT_TRUE(EmptyFolder(work)) << "the spill outlived SIGTERM";
}

// The data file is changed while `select` runs — appended to in place, or replaced by another
// file renamed over its name — once its spill exists. Whatever the moment, the result is never a
// mix: either exit 2 naming the change, or the audit of the original file (its fingerprint and
// its model, as a run on an untouched copy gives), because later passes read the spill only.
TEST(DataReadingTest, AFileChangedOrReplacedDuringTheRunNeverGivesAMixedAudit) {
  TempDir dir;
  const std::string original = Listings(120000, 21);
  const auto pristine = dir.Write("pristine.csv", original);
  const auto plan = dir.Write("plan.json", kPlan);
  const nlohmann::json expected = SelectAudit({"--threads", "1"}, pristine, plan, dir.path() / "expected");
  const auto other = dir.Write("other.csv", Listings(120000, 22));
  for (const bool replace : {false, true}) {
    const auto data = dir.Write("listings.csv", original);
    const auto work = dir.path() / (replace ? "work_replace" : "work_append");
    const auto out_dir = dir.path() / (replace ? "out_replace" : "out_append");
    std::filesystem::create_directory(work);
    const pid_t child = ::fork();
    ASSERT_GE(child, 0);
    if (child == 0) {
      const int devnull = ::open("/dev/null", O_WRONLY);
      ::dup2(devnull, 1);
      const std::string binary = StepledgerBinary().string();
      ::execl(binary.c_str(), binary.c_str(), "select", data.c_str(), "--plan", plan.c_str(), "--quiet", "--threads",
              "1", "--work-dir", work.c_str(), "--out", out_dir.c_str(), static_cast<char*>(nullptr));
      ::_exit(127);
    }
    bool seen = false;
    for (int wait = 0; wait < 20000 && !seen; ++wait) {
      std::this_thread::sleep_for(std::chrono::microseconds(200));
      std::error_code error;
      seen = !std::filesystem::is_empty(work, error) && !error;
    }
    if (replace) {
      std::filesystem::copy_file(other, dir.path() / "incoming.csv", std::filesystem::copy_options::overwrite_existing);
      std::filesystem::rename(dir.path() / "incoming.csv", data);
    } else {
      std::ofstream(data, std::ios::app) << "999,1,8,A,0.5,0.5,late\n";
    }
    int status = 0;
    ASSERT_EQ(::waitpid(child, &status, 0), child);
    ASSERT_TRUE(WIFEXITED(status)) << "status " << status;
    const int code = WEXITSTATUS(status);
    EXPECT_TRUE(code == 0 || code == 2) << "exit " << code;
    EXPECT_TRUE(EmptyFolder(work));
    if (code == 2) {
      EXPECT_FALSE(std::filesystem::exists(out_dir)) << "a refused run wrote output";
      continue;
    }
    std::ifstream in(out_dir / "audit.json");
    const nlohmann::json audit = nlohmann::json::parse(in);
    EXPECT_EQ(audit["data"]["sha256"], expected["data"]["sha256"]) << (replace ? "replaced" : "appended");
    EXPECT_EQ(audit["data"]["rows_read"], expected["data"]["rows_read"]);
    EXPECT_EQ(audit["model"]["terms"], expected["model"]["terms"]);
    EXPECT_EQ(audit["model"]["coefficients"], expected["model"]["coefficients"]);
  }
}

// A working folder that runs out of room (a file size limit stands in for a full disk: writes
// fail with EFBIG once past it): exit 2, the folder named, no spill and no output left.
TEST(DataReadingTest, AFullWorkingFolderIsAClearErrorAndLeavesNothing) {
  TempDir dir;
  const auto data = dir.Write("listings.csv", Listings(40000, 2));
  const auto plan = dir.Write("plan.json", kPlan);
  const auto work = dir.path() / "work";
  const auto out_dir = dir.path() / "out";
  std::filesystem::create_directory(work);
  std::string err;
  const std::string command = "trap '' XFSZ; ulimit -f 1024; '" + StepledgerBinary().string() + "' select '" +
                              data.string() + "' --plan '" + plan.string() + "' --threads 1 --work-dir '" +
                              work.string() + "' --out '" + out_dir.string() + "' 2>&1";
  const int status = RunCommand("bash -c \"" + command + "\"", &err);
  EXPECT_EQ(status, 2) << err;
  EXPECT_NE(err.find("cannot write the typed copy of the rows in '" + work.string() + "'"), std::string::npos) << err;
  EXPECT_NE(err.find("needs about"), std::string::npos) << err;
  EXPECT_NE(err.find("--work-dir"), std::string::npos) << err;
  EXPECT_TRUE(EmptyFolder(work));
  EXPECT_FALSE(std::filesystem::exists(out_dir / "audit.json"));
}

// Compressed data read directly: the same model and row accounting as the plain file; the
// fingerprint and byte count are of the file as stored, and the audit says how it was stored.
TEST(DataReadingTest, GzipAndZstdFilesGiveTheSameModelAsThePlainFile) {
  TempDir dir;
  const std::string text = Listings(5000, 21);
  const auto plain = dir.Write("listings.csv", text);
  const auto plan = dir.Write("plan.json", kPlan);
  const auto gz = dir.path() / "listings.csv.gz";
  {
    gzFile file = gzopen(gz.c_str(), "wb");
    ASSERT_NE(file, nullptr);
    ASSERT_EQ(gzwrite(file, text.data(), static_cast<unsigned>(text.size())), static_cast<int>(text.size()));
    ASSERT_EQ(gzclose(file), Z_OK);
  }
  const auto zst = dir.path() / "listings.csv.zst";
  {
    std::string compressed(ZSTD_compressBound(text.size()), '\0');
    const std::size_t size = ZSTD_compress(compressed.data(), compressed.size(), text.data(), text.size(), 3);
    ASSERT_FALSE(ZSTD_isError(size));
    std::ofstream(zst, std::ios::binary) << compressed.substr(0, size);
  }
  const nlohmann::json expected = SelectAudit({"--threads", "1"}, plain, plan, dir.path() / "plain_out");
  EXPECT_EQ(expected["data"]["encoding"], "plain");
  for (const auto& [path, encoding] : {std::pair{gz, "gzip"}, std::pair{zst, "zstd"}}) {
    const nlohmann::json audit = SelectAudit({"--threads", "1"}, path, plan, dir.path() / (std::string(encoding) + "_out"));
    EXPECT_EQ(audit["data"]["encoding"], encoding);
    EXPECT_EQ(audit["data"]["bytes"], std::filesystem::file_size(path));
    EXPECT_NE(audit["data"]["sha256"], expected["data"]["sha256"]);
    for (const char* key : {"rows_read", "rows_used", "rows_dropped", "columns"}) {
      EXPECT_EQ(audit["data"][key], expected["data"][key]) << encoding << " data." << key;
    }
    EXPECT_EQ(audit["model"]["coefficients"], expected["model"]["coefficients"]) << encoding;
    EXPECT_EQ(audit["steps"].size(), expected["steps"].size()) << encoding;
    // verify --data replays the compressed file to the same route.
    const auto verify = RunStepledger({"verify", (dir.path() / (std::string(encoding) + "_out") / "audit.json").string(),
                                       "--data", path.string()});
    EXPECT_EQ(verify.status, 0) << verify.out << verify.err;
  }
}

}  // namespace
}  // namespace stepledger
