// Data sets at the command line: several files or a folder read as one data set give what the
// concatenated file gives (route, model, cross-validated and holdout errors, row accounting);
// the audit lists the files and verify, rerun and report read them back; a reordered set fails
// verify with a message saying so; errors name the file and its own line.

#include <zlib.h>
#include <zstd.h>

#include <algorithm>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <sstream>
#include <string>
#include <vector>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "stepledger/engine/data_set.h"
#include "stepledger/run/run_plan.h"
#include "support/audit_test_data.h"
#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using testing::RunStepledger;
using testing::SourceDir;
using testing::TempDir;

// Agreement of the set's numbers with the whole file's: the set folds the same rows in the same
// order, only cut into chunks at other places, so the factors differ by rounding alone
// (common practice: 1e-12 relative for a merge order that differs). Partial F statistics and
// p-values are compared to verify's replay tolerance, 1e-9: the F of a candidate that adds almost
// nothing is a difference of two nearly equal residual sums (F of 0.03 loses about four digits
// to that cancellation), and a p-value of 1e-295 magnifies the relative error of its F.
constexpr double kRelative = 1e-12;
constexpr double kConditionedRelative = 1e-9;
// Not compared: step digests (they chain from the data's fingerprint, which differs) and the size
// of the last refinement correction (a rounding-level quantity by design).
const std::vector<std::string> kNotCompared = {"digest", "refinement_correction"};

double ToleranceOf(const std::string& key) {
  return key == "f" || key == "p" || key == "f_p" ? kConditionedRelative : kRelative;
}

std::string ReadText(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

nlohmann::json ReadJson(const std::filesystem::path& path) { return nlohmann::json::parse(ReadText(path)); }

// Every number within ToleranceOf(its key), everything else equal; keys in skip are not compared.
void ExpectClose(const nlohmann::json& expected, const nlohmann::json& actual, const std::string& where,
                 const std::vector<std::string>& skip = kNotCompared, const std::string& key = "") {
  if (expected.is_number() && actual.is_number()) {
    const double a = expected.get<double>(), b = actual.get<double>();
    EXPECT_LE(std::abs(a - b), ToleranceOf(key) * std::max(std::abs(a), std::abs(b)))
        << where << ": " << a << " vs " << b;
    return;
  }
  ASSERT_EQ(expected.type(), actual.type()) << where;
  if (expected.is_object()) {
    ASSERT_EQ(expected.size(), actual.size()) << where;
    for (auto it = expected.begin(); it != expected.end(); ++it) {
      if (std::find(skip.begin(), skip.end(), it.key()) != skip.end()) continue;
      ASSERT_TRUE(actual.contains(it.key())) << where << "." << it.key();
      ExpectClose(it.value(), actual[it.key()], where + "." + it.key(), skip, it.key());
    }
  } else if (expected.is_array()) {
    ASSERT_EQ(expected.size(), actual.size()) << where;
    for (std::size_t i = 0; i < expected.size(); ++i) {
      ExpectClose(expected[i], actual[i], where + "[" + std::to_string(i) + "]", skip, key);
    }
  } else {
    EXPECT_EQ(expected, actual) << where;
  }
}

// The demo's invented listings (examples/data/laptops.csv, 2,000 rows) as one file and as three
// files of 700, 700 and 600 rows in a folder, and the stepwise plan by cross-validated error with
// 5 folds and a 20% holdout (fold and holdout draws hang on the record index across the set).
struct SplitData {
  TempDir dir;
  std::filesystem::path whole, folder, plan;
  std::vector<std::filesystem::path> parts;

  SplitData() {
    const std::string text = ReadText(SourceDir() / "examples" / "data" / "laptops.csv");
    whole = dir.Write("laptops.csv", text);
    folder = dir.path() / "parts";
    std::filesystem::create_directory(folder);
    std::istringstream lines(text);
    std::string header, line;
    std::getline(lines, header);
    std::vector<std::string> bodies(3);
    for (std::size_t row = 0; std::getline(lines, line); ++row) bodies[std::min<std::size_t>(row / 700, 2)] += line + "\n";
    for (std::size_t part = 0; part < 3; ++part) {
      parts.push_back(dir.Write("parts/part-" + std::to_string(part + 1) + ".csv", header + "\n" + bodies[part]));
    }
    nlohmann::json plan_json = ReadJson(SourceDir() / "examples" / "plans" / "stepwise_cv.json");
    plan_json["folds"] = 5;
    plan_json["holdout"] = {{"fraction", 0.2}, {"seed", 7}};
    plan = dir.Write("plan.json", plan_json.dump(2));
  }

  std::vector<std::string> PartArgs() const {
    std::vector<std::string> args;
    for (const auto& part : parts) args.push_back(part.string());
    return args;
  }
};

// select --out on data (one or more inputs); returns the audit.
nlohmann::json Select(const std::vector<std::string>& data, const SplitData& split, const std::string& out,
                      const std::string& threads = "1") {
  std::vector<std::string> args = {"select"};
  args.insert(args.end(), data.begin(), data.end());
  for (const std::string& extra : {std::string("--plan"), split.plan.string(), std::string("--out"),
                                   (split.dir.path() / out).string(), std::string("--threads"), threads,
                                   std::string("--quiet")}) {
    args.push_back(extra);
  }
  const auto run = RunStepledger(args);
  EXPECT_EQ(run.status, 0) << run.err;
  return ReadJson(split.dir.path() / out / "audit.json");
}

TEST(DataSetCommandTest, ThreeFilesGiveTheRouteModelAndErrorsOfTheConcatenatedFile) {
  SplitData split;
  const nlohmann::json whole = Select({split.whole.string()}, split, "whole");
  ASSERT_TRUE(whole["data"].is_object());
  EXPECT_FALSE(whole["data"].contains("files")) << "a single file's audit keeps its shape";
  const nlohmann::json listed = Select(split.PartArgs(), split, "listed");
  const nlohmann::json folder = Select({split.folder.string()}, split, "folder");
  const nlohmann::json threaded = Select({split.folder.string()}, split, "threaded", "2");
  ASSERT_GE(whole["steps"].size(), 3u);
  ASSERT_TRUE(whole["validation"].contains("holdout"));
  for (const auto* set : {&listed, &folder, &threaded}) {
    // Steps (their digests chain from the data's fingerprint, which differs), model, validation.
    ExpectClose(whole["steps"], (*set)["steps"], "steps");
    ExpectClose(whole["model"], (*set)["model"], "model");
    ExpectClose(whole["validation"], (*set)["validation"], "validation");
    for (const char* key : {"rows_read", "rows_used", "rows_held_out", "rows_dropped", "missing"}) {
      EXPECT_EQ(whole["data"][key], (*set)["data"][key]) << "data." << key;
    }
    ExpectClose(whole["data"]["columns"], (*set)["data"]["columns"], "data.columns");
    EXPECT_EQ((*set)["data"]["bytes"].get<std::uint64_t>(), whole["data"]["bytes"].get<std::uint64_t>() + 2 *
              ReadText(split.parts[0]).find('\n') + 2);
  }
  // The audit lists each file: name, bytes, its own fingerprint, encoding, rows; the set's
  // fingerprint is the documented combination of theirs (engine/data_set.h, README).
  const nlohmann::json& files = folder["data"]["files"];
  ASSERT_EQ(files.size(), 3u);
  std::vector<std::string> fingerprints;
  for (std::size_t i = 0; i < 3; ++i) {
    EXPECT_EQ(files[i]["name"], "part-" + std::to_string(i + 1) + ".csv");
    EXPECT_EQ(files[i]["bytes"], std::filesystem::file_size(split.parts[i]));
    EXPECT_EQ(files[i]["sha256"], FingerprintFile(split.parts[i]));
    EXPECT_EQ(files[i]["encoding"], "plain");
    EXPECT_EQ(files[i]["rows"], i < 2 ? 700 : 600);
    fingerprints.push_back(files[i]["sha256"].get<std::string>());
  }
  EXPECT_EQ(folder["data"]["sha256"], CombineMemberFingerprints(fingerprints));
  EXPECT_EQ(listed["data"]["sha256"], folder["data"]["sha256"]);
  EXPECT_EQ(folder["data"]["file"], "parts");
  EXPECT_EQ(listed["data"]["file"], "part-1.csv, part-2.csv, part-3.csv");
  const std::string problems = testing::ValidateAuditAgainstSchema(split.dir.path() / "folder" / "audit.json");
  if (problems != "skip") {
    EXPECT_EQ(problems, "") << "schema (Draft 2020-12, Debian python3-jsonschema)";
  }
}

TEST(DataSetCommandTest, VerifyReadsTheSetBackAndRefusesAnotherOrder) {
  SplitData split;
  Select({split.folder.string()}, split, "out");
  const std::string audit = (split.dir.path() / "out" / "audit.json").string();
  const auto by_folder = RunStepledger({"verify", audit, "--data", split.folder.string(), "--threads", "1"});
  EXPECT_EQ(by_folder.status, 0) << by_folder.out << by_folder.err;
  std::vector<std::string> args = {"verify", audit, "--data"};
  for (const auto& part : split.PartArgs()) args.push_back(part);
  const auto by_files = RunStepledger(args);
  EXPECT_EQ(by_files.status, 0) << by_files.out << by_files.err;
  std::swap(args[3], args[4]);
  const auto reordered = RunStepledger(args);
  EXPECT_EQ(reordered.status, 1) << reordered.out << reordered.err;
  EXPECT_NE(reordered.err.find("fingerprint mismatch"), std::string::npos) << reordered.err;
  EXPECT_NE(reordered.err.find("the data files are the recorded ones in another order (the audit read "
                               "part-1.csv, part-2.csv, part-3.csv; given in the order part-2.csv, part-1.csv, "
                               "part-3.csv)"),
            std::string::npos)
      << reordered.err;
  // A changed file is named by its place in the set.
  std::ofstream(split.parts[2], std::ios::app) << ReadText(split.parts[2]).substr(ReadText(split.parts[2]).find('\n') + 1, 60)
                                               << "\n";
  const auto changed = RunStepledger({"verify", audit, "--data", split.folder.string()});
  EXPECT_EQ(changed.status, 1);
  EXPECT_NE(changed.err.find("data file 3 (part-3.csv"), std::string::npos) << changed.err;
}

TEST(DataSetCommandTest, FitAndProfileStateTheFilesInReadingOrder) {
  SplitData split;
  const auto whole = RunStepledger({"fit", split.whole.string(), "--plan", split.plan.string(), "--json",
                                    "--threads", "1"});
  const auto set = RunStepledger({"fit", split.folder.string(), "--plan", split.plan.string(), "--json",
                                  "--threads", "1"});
  ASSERT_EQ(whole.status, 0) << whole.err;
  ASSERT_EQ(set.status, 0) << set.err;
  const nlohmann::json a = nlohmann::json::parse(whole.out), b = nlohmann::json::parse(set.out);
  ExpectClose(a["coefficients"], b["coefficients"], "coefficients");
  ExpectClose(a["validation"], b["validation"], "validation");
  ASSERT_EQ(b["data"]["files"].size(), 3u);
  EXPECT_EQ(b["data"]["files"][2]["name"], "part-3.csv");

  const auto text = RunStepledger({"fit", split.folder.string(), "--plan", split.plan.string(), "--threads", "1"});
  ASSERT_EQ(text.status, 0) << text.err;
  EXPECT_EQ(text.out.rfind("Data set: 3 files, read in this order: part-1.csv (700 rows), part-2.csv (700 rows), "
                           "part-3.csv (600 rows)\n",
                           0),
            0u)
      << text.out.substr(0, 200);

  const auto profile = RunStepledger({"profile", split.folder.string(), "--json"});
  ASSERT_EQ(profile.status, 0) << profile.err;
  const nlohmann::json profiled = nlohmann::json::parse(profile.out);
  EXPECT_EQ(profiled["rows"], 2000);
  ASSERT_EQ(profiled["files"].size(), 3u);
  EXPECT_EQ(profiled["files"][0]["name"], "part-1.csv");
  const auto single = RunStepledger({"profile", split.whole.string(), "--json"});
  EXPECT_FALSE(nlohmann::json::parse(single.out).contains("files"));
}

TEST(DataSetCommandTest, ABadCellInTheSecondFileNamesThatFileAndItsOwnLine) {
  SplitData split;
  std::string second = ReadText(split.parts[1]);
  // Line 5 of part-2.csv (its 4th record): the age cell becomes text that is not a number.
  std::size_t at = 0;
  for (int line = 1; line < 5; ++line) at = second.find('\n', at) + 1;
  const std::size_t comma = second.find(',', at);
  second.replace(comma + 1, second.find(',', comma + 1) - comma - 1, "inf");
  std::ofstream(split.parts[1], std::ios::binary | std::ios::trunc) << second;
  const auto run = RunStepledger({"select", split.folder.string(), "--plan", split.plan.string(), "--threads", "2"});
  EXPECT_EQ(run.status, 2);
  ASSERT_EQ(run.ErrLines().size(), 1u) << run.err;
  EXPECT_NE(run.err.find(split.parts[1].string() + ":5:"), std::string::npos) << run.err;
  EXPECT_NE(run.err.find("age_months"), std::string::npos) << run.err;
}

TEST(DataSetCommandTest, CompressedMembersRerunAndReportLikeThePlainSet) {
  SplitData split;
  const nlohmann::json plain = Select({split.folder.string()}, split, "plain");
  // The same set with the second file gzip'd and the third zstd'd, in another folder.
  const auto packed = split.dir.path() / "packed";
  std::filesystem::create_directory(packed);
  std::filesystem::copy_file(split.parts[0], packed / "part-1.csv");
  const std::string second = ReadText(split.parts[1]), third = ReadText(split.parts[2]);
  {
    gzFile file = gzopen((packed / "part-2.csv.gz").c_str(), "wb");
    ASSERT_NE(file, nullptr);
    ASSERT_EQ(gzwrite(file, second.data(), static_cast<unsigned>(second.size())), static_cast<int>(second.size()));
    ASSERT_EQ(gzclose(file), Z_OK);
  }
  {
    std::string compressed(ZSTD_compressBound(third.size()), '\0');
    const std::size_t size = ZSTD_compress(compressed.data(), compressed.size(), third.data(), third.size(), 3);
    ASSERT_FALSE(ZSTD_isError(size));
    std::ofstream(packed / "part-3.csv.zst", std::ios::binary) << compressed.substr(0, size);
  }
  const std::string parent = (split.dir.path() / "plain" / "audit.json").string();
  const auto rerun = RunStepledger({"rerun", parent, packed.string(), "--out", (split.dir.path() / "rerun").string(),
                                    "--threads", "1", "--json"});
  ASSERT_EQ(rerun.status, 0) << rerun.err;
  EXPECT_EQ(nlohmann::json::parse(rerun.out)["verdict"], "same model");
  const nlohmann::json again = ReadJson(split.dir.path() / "rerun" / "audit.json");
  ExpectClose(plain["model"], again["model"], "model");
  EXPECT_EQ(again["data"]["encoding"], "mixed");
  const nlohmann::json& files = again["data"]["files"];
  ASSERT_EQ(files.size(), 3u);
  EXPECT_EQ(files[1]["name"], "part-2.csv.gz");
  EXPECT_EQ(files[1]["encoding"], "gzip");
  EXPECT_EQ(files[2]["encoding"], "zstd");
  EXPECT_EQ(files[2]["rows"], 600);
  EXPECT_TRUE(again["comparison"]["prediction"]["available"]) << again["comparison"]["prediction"].dump();
  EXPECT_EQ(again["comparison"]["prediction"]["rows_read"], 2000);
  const std::string problems = testing::ValidateAuditAgainstSchema(split.dir.path() / "rerun" / "audit.json");
  if (problems != "skip") {
    EXPECT_EQ(problems, "") << "schema (Draft 2020-12, Debian python3-jsonschema)";
  }
  // report --data reads the set back (its fingerprint first).
  const auto report = RunStepledger({"report", parent, "--data", split.folder.string(), "--json"});
  EXPECT_EQ(report.status, 0) << report.err;
  const auto wrong = RunStepledger({"report", parent, "--data", packed.string(), "--json"});
  EXPECT_EQ(wrong.status, 2);
  EXPECT_NE(wrong.err.find("not the data of"), std::string::npos) << wrong.err;
}

// Where the row of the whole file's line `line` is in the set of files of 700, 700 and 600 rows:
// {file index, its own line} (laptops.csv has one line per record after its header).
std::pair<std::size_t, std::uint64_t> PlaceInSet(std::uint64_t line) {
  const std::uint64_t record = line - 2;
  const std::size_t file = static_cast<std::size_t>(std::min<std::uint64_t>(record / 700, 2));
  return {file, record - 700 * file + 2};
}

TEST(DataSetCommandTest, RowsNamedByLineAlsoNameTheirFile) {
  SplitData split;
  const auto whole = RunStepledger({"fit", split.whole.string(), "--plan", split.plan.string(), "--json",
                                    "--threads", "1"});
  const auto set = RunStepledger({"fit", split.folder.string(), "--plan", split.plan.string(), "--json",
                                  "--threads", "1"});
  ASSERT_EQ(whole.status, 0) << whole.err;
  ASSERT_EQ(set.status, 0) << set.err;
  const nlohmann::json a = nlohmann::json::parse(whole.out)["diagnostics"];
  const nlohmann::json b = nlohmann::json::parse(set.out)["diagnostics"];
  for (const char* measure : {"max_leverage", "max_cooks_distance"}) {
    ASSERT_TRUE(a[measure].is_object()) << a.dump();
    EXPECT_FALSE(a[measure].contains("file")) << "one file: its line alone";
    const auto [file, line] = PlaceInSet(a[measure]["line"].get<std::uint64_t>());
    EXPECT_EQ(b[measure]["file"], "part-" + std::to_string(file + 1) + ".csv") << measure;
    EXPECT_EQ(b[measure]["line"], line) << measure;
  }
  const auto [file, line] = PlaceInSet(a["max_leverage"]["line"].get<std::uint64_t>());
  const std::string place = "line " + std::to_string(line) + " of part-" + std::to_string(file + 1) + ".csv";
  const auto text = RunStepledger({"fit", split.folder.string(), "--plan", split.plan.string(), "--threads", "1"});
  ASSERT_EQ(text.status, 0) << text.err;
  EXPECT_NE(text.out.find("(" + place + "; average k/n"), std::string::npos) << text.out;

  // The audit's prediction section and the extrapolation caution name the file too.
  const std::string out = (split.dir.path() / "set-audit").string();
  const auto selected = RunStepledger({"select", split.folder.string(), "--plan", split.plan.string(), "--out", out,
                                       "--threads", "1"});
  ASSERT_EQ(selected.status, 0) << selected.err;
  const nlohmann::json audit = ReadJson(std::filesystem::path(out) / "audit.json");
  const std::string& leverage_file = audit["prediction"]["max_unit_leverage_file"].get_ref<const std::string&>();
  EXPECT_EQ(leverage_file.rfind("part-", 0), 0u) << leverage_file;
  EXPECT_NE(audit.dump().find(" of part-"), std::string::npos) << "the extrapolation caution names the file";
  const std::string problems = testing::ValidateAuditAgainstSchema(std::filesystem::path(out) / "audit.json");
  if (problems != "skip") {
    EXPECT_EQ(problems, "") << "schema (Draft 2020-12, Debian python3-jsonschema)";
  }

  // report --rows-out: the file's name comes first; the rows are the whole file's, placed.
  const std::filesystem::path whole_rows = split.dir.path() / "whole-rows.csv", set_rows = split.dir.path() / "set-rows.csv";
  const std::string whole_out = (split.dir.path() / "whole-audit").string();
  ASSERT_EQ(RunStepledger({"select", split.whole.string(), "--plan", split.plan.string(), "--out", whole_out,
                           "--threads", "1"}).status, 0);
  const auto whole_report = RunStepledger({"report", (std::filesystem::path(whole_out) / "audit.json").string(),
                                           "--data", split.whole.string(), "--rows-out", whole_rows.string()});
  ASSERT_EQ(whole_report.status, 0) << whole_report.err;
  const auto set_report = RunStepledger({"report", (std::filesystem::path(out) / "audit.json").string(), "--data",
                                         split.folder.string(), "--rows-out", set_rows.string(), "--json"});
  ASSERT_EQ(set_report.status, 0) << set_report.err;
  EXPECT_NE(set_report.out.find("record number across the data set's files"), std::string::npos);
  std::istringstream whole_lines(ReadText(whole_rows)), set_lines(ReadText(set_rows));
  std::string whole_line, set_line;
  std::getline(whole_lines, whole_line);
  std::getline(set_lines, set_line);
  EXPECT_EQ(whole_line.rfind("line,fitted,", 0), 0u) << whole_line;
  EXPECT_EQ(set_line.rfind("file,line,fitted,", 0), 0u) << set_line;
  std::size_t rows = 0;
  while (std::getline(whole_lines, whole_line)) {
    ASSERT_TRUE(std::getline(set_lines, set_line)) << "the set lists as many rows";
    const auto [row_file, row_line] = PlaceInSet(std::stoull(whole_line.substr(0, whole_line.find(','))));
    EXPECT_EQ(set_line.rfind("part-" + std::to_string(row_file + 1) + ".csv," + std::to_string(row_line) + ",", 0), 0u)
        << set_line << " for " << whole_line;
    ++rows;
  }
  EXPECT_GT(rows, 0u);
}

}  // namespace
}  // namespace stepledger
