// The input limits on the command line (engine/limits.h, README "Limits"): each limit refuses an
// oversized input before the work that grows with it, exit 2 with one line that names the place,
// the limit, its value and `--limit NAME=N`; --limit raises a limit; the power degree cap holds
// for a plan and for a re-sealed audit's recorded plan; hopeless all-subsets searches and
// categorical products are refused before any pass over the rows. Times are bounds for a refusal
// that must come before the work (common practice: well under a second; the bounds leave room
// for a loaded machine).

#include <gtest/gtest.h>

#include <chrono>
#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "stepledger/audit/audit_document.h"
#include "stepledger/engine/number_format.h"
#include "support/audit_test_data.h"
#include "support/cli_run.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using testing::CliRun;
using testing::RunStepledger;

// Runs the command line and returns its outcome with the wall time it took.
struct TimedRun {
  CliRun run;
  double seconds = 0;
};
TimedRun Timed(const std::vector<std::string>& args) {
  const auto started = std::chrono::steady_clock::now();
  TimedRun timed{RunStepledger(args), 0};
  timed.seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  return timed;
}

bool Has(const std::string& text, const std::string& part) { return text.find(part) != std::string::npos; }

// A CSV with a response y and `columns` numeric columns x1.. (distinct names), `rows` rows of
// invented values (a fixed linear congruential sequence: the columns are not collinear).
std::string WideCsv(std::size_t columns, std::size_t rows) {
  std::string text = "y";
  for (std::size_t c = 1; c <= columns; ++c) text += ",x" + std::to_string(c);
  text += "\n";
  std::uint64_t state = 20261201;
  auto next = [&state] {
    state = state * 6364136223846793005ULL + 1442695040888963407ULL;
    return static_cast<int>((state >> 33) % 1000);
  };
  for (std::size_t r = 0; r < rows; ++r) {
    text += std::to_string(next());
    for (std::size_t c = 1; c <= columns; ++c) text += "," + std::to_string(next());
    text += "\n";
  }
  return text;
}

class LimitsOnTheCommandLine : public ::testing::Test {
 protected:
  testing::TempDir dir_;
};

TEST_F(LimitsOnTheCommandLine, QuickFormOnAHundredThousandColumnsIsRefusedWhileTheHeaderIsRead) {
  // The quick form once ran 81 s on such a file and then ran out of memory.
  const auto data = dir_.Write("wide.csv", WideCsv(99'999, 2));
  const TimedRun timed = Timed({"select", data.string(), "--response", "y"});
  EXPECT_EQ(timed.run.status, 2) << timed.run.err;
  ASSERT_EQ(timed.run.ErrLines().size(), 1u) << timed.run.err;
  EXPECT_TRUE(Has(timed.run.err, data.string() + ":1:")) << timed.run.err;
  EXPECT_TRUE(Has(timed.run.err, "the header has more than 10,000 columns (field 10,001 starts here); the columns "
                                 "limit is 10,000; to allow more, add --limit columns=N"))
      << timed.run.err;
  EXPECT_LT(timed.seconds, 5.0);

  // Past the columns limit, "all" meets the terms limit before any term is built.
  const TimedRun raised = Timed({"select", data.string(), "--response", "y", "--limit", "columns=100000"});
  EXPECT_EQ(raised.run.status, 2) << raised.run.err;
  EXPECT_TRUE(Has(raised.run.err, "plan key 'terms': \"all\" makes 99,999 terms")) << raised.run.err;
  EXPECT_TRUE(Has(raised.run.err, "the terms limit is 2,000; name the candidate terms in a plan instead; to allow "
                                  "more, add --limit terms=N"))
      << raised.run.err;
  EXPECT_LT(raised.seconds, 10.0);
}

TEST_F(LimitsOnTheCommandLine, LimitOptionRaisesAndLowersEachLimit) {
  const auto data = dir_.Write("small.csv", WideCsv(5, 30));
  EXPECT_EQ(RunStepledger({"select", data.string(), "--response", "y", "--json"}).status, 0);
  CliRun run = RunStepledger({"select", data.string(), "--response", "y", "--limit", "columns=5"});
  EXPECT_EQ(run.status, 2);
  EXPECT_TRUE(Has(run.err, data.string() + ":1:15: the header has more than 5 columns (field 6 starts here)"))
      << run.err;
  run = RunStepledger({"select", data.string(), "--response", "y", "--limit", "terms=4", "--limit", "columns=6"});
  EXPECT_EQ(run.status, 2);
  EXPECT_TRUE(Has(run.err, "\"all\" makes 5 terms")) << run.err;
  run = RunStepledger({"select", data.string(), "--response", "y", "--limit", "design-columns=5"});
  EXPECT_EQ(run.status, 2);
  EXPECT_TRUE(Has(run.err, "which brings the design to 6")) << run.err;
  EXPECT_TRUE(Has(run.err, "--limit design-columns=N")) << run.err;
  EXPECT_EQ(RunStepledger({"select", data.string(), "--response", "y", "--limit", "design-columns=6"}).status, 0);
}

TEST_F(LimitsOnTheCommandLine, LimitOptionSyntaxErrorsNameTheOption) {
  const auto data = dir_.Write("small.csv", WideCsv(3, 10));
  for (const char* bad : {"rows=5", "terms", "terms=0", "terms=-1", "terms=1e3", "terms=", "=5"}) {
    const CliRun run = RunStepledger({"select", data.string(), "--response", "y", "--limit", bad});
    EXPECT_EQ(run.status, 2) << bad;
    EXPECT_TRUE(Has(run.err, "--limit")) << bad << ": " << run.err;
    EXPECT_EQ(run.ErrLines().size(), 1u) << run.err;
  }
  const CliRun unknown = RunStepledger({"select", data.string(), "--response", "y", "--limit", "rows=5"});
  EXPECT_TRUE(Has(unknown.err, "columns, terms, design-columns, levels, plan-bytes")) << unknown.err;
  // Commands that read no data, plan or audit plan do not offer it.
  EXPECT_EQ(RunStepledger({"demo", "--limit", "terms=3"}).status, 2);
  // verify and report use it only with --data.
  EXPECT_EQ(RunStepledger({"verify", "audit.json", "--limit", "terms=3"}).status, 2);
}

TEST_F(LimitsOnTheCommandLine, PlanFileOverThePlanBytesLimitIsRefusedBeforeItIsRead) {
  const auto data = dir_.Write("laptops.csv", testing::LaptopCsv());
  const auto plan = dir_.Write("plan.json", testing::LaptopPlan());
  EXPECT_EQ(RunStepledger({"fit", data.string(), "--plan", plan.string()}).status, 0);
  const CliRun run = RunStepledger({"fit", data.string(), "--plan", plan.string(), "--limit", "plan-bytes=100"});
  EXPECT_EQ(run.status, 2) << run.err;
  EXPECT_TRUE(Has(run.err, "plan file '" + plan.string() + "': it holds " +
                               FormatCount(static_cast<std::int64_t>(std::filesystem::file_size(plan))) +
                               " bytes; the plan-bytes limit is 100; to allow more, add --limit plan-bytes=N"))
      << run.err;
}

TEST_F(LimitsOnTheCommandLine, PlanOverTheTermsLimitIsRefusedByFitAndSelect) {
  const auto data = dir_.Write("laptops.csv", testing::LaptopCsv());
  const auto plan = dir_.Write("plan.json", testing::LaptopPlan());  // 6 terms
  for (const std::string command : {"fit", "select"}) {
    const CliRun run = RunStepledger({command, data.string(), "--plan", plan.string(), "--limit", "terms=5"});
    EXPECT_EQ(run.status, 2) << command;
    EXPECT_TRUE(Has(run.err, "plan key 'terms': the plan lists 6 terms; the terms limit is 5; to allow more, add "
                             "--limit terms=N"))
        << command << ": " << run.err;
  }
}

TEST_F(LimitsOnTheCommandLine, CategoricalProductOf150By150LevelsIsRefusedBeforeAnyPassOverTheRows) {
  // The search over a 22,201-column product once started with no warning and never ended.
  std::string csv = "price,dealer,model\n";
  for (int row = 0; row < 3000; ++row) {
    csv += std::to_string(100 + row % 97) + ",D" + std::to_string(row % 150) + ",M" +
           std::to_string((row * 7 + row / 150) % 150) + "\n";
  }
  const auto data = dir_.Write("pairs.csv", csv);
  const auto plan = dir_.Write("plan.json", R"({"response": "price", "max_levels": 150, "terms": [
      {"name": "dealer", "categorical": "dealer"}, {"name": "model", "categorical": "model"},
      {"name": "dealer:model", "product": ["dealer", "model"]}]})");
  const TimedRun timed = Timed({"select", data.string(), "--plan", plan.string()});
  EXPECT_EQ(timed.run.status, 2) << timed.run.err;
  EXPECT_TRUE(Has(timed.run.err, "plan key 'terms[2]': term 'dealer:model' makes 22,201 design columns, which "
                                 "brings the design to 22,500"))
      << timed.run.err;
  EXPECT_TRUE(Has(timed.run.err, "the design-columns limit is 5,000")) << timed.run.err;
  EXPECT_TRUE(Has(timed.run.err, "to allow more, add --limit design-columns=N")) << timed.run.err;
  EXPECT_LT(timed.seconds, 5.0);
}

TEST_F(LimitsOnTheCommandLine, AllSubsetsOverFiftyFiveTermsIsRefusedNamingTheMethod) {
  // All-subsets over more candidates than it takes (50) is refused before the pass.
  const auto data = dir_.Write("wide.csv", WideCsv(55, 200));
  const TimedRun timed = Timed({"select", data.string(), "--response", "y", "--method", "all-subsets"});
  EXPECT_EQ(timed.run.status, 2) << timed.run.err;
  EXPECT_TRUE(Has(timed.run.err, "plan key 'method': all-subsets over 55 candidate terms")) << timed.run.err;
  EXPECT_TRUE(Has(timed.run.err, "use \"method\": \"stepwise\"")) << timed.run.err;
  EXPECT_LT(timed.seconds, 5.0);
}

TEST_F(LimitsOnTheCommandLine, ProfileNotesAStarterPlanOverTheTermsLimit) {
  const auto data = dir_.Write("small.csv", WideCsv(3, 10));
  const CliRun run = RunStepledger({"profile", data.string(), "--response", "y", "--limit", "terms=2"});
  EXPECT_EQ(run.status, 0) << run.err;
  EXPECT_TRUE(Has(run.out, "the starter plan has 3 terms, more than the terms limit (2)")) << run.out;
}

// An audit of a plan with a power term, made by the library.
class PowerAudit : public LimitsOnTheCommandLine {
 protected:
  void SetUp() override {
    data_ = dir_.Write("laptops.csv", testing::LaptopCsv());
    const std::string plan = R"({"response": "price", "method": "stepwise", "terms": [
        {"name": "age", "column": "age_months"},
        {"name": "age^2", "power": {"column": "age_months", "degree": 2}},
        {"name": "ram", "column": "ram_gb"}]})";
    audit_ = testing::WriteAuditWithLibrary(data_, plan, dir_.path() / "q3");
  }
  // The audit with the power's degree edited where `where` says and everything re-sealed (the
  // unkeyed seal catches accidental edits only, README "Audit file").
  std::filesystem::path Tampered(bool verbatim, bool normalised, long long degree) {
    json audit = testing::ReadJsonFile(audit_);
    if (verbatim) {
      json plan = json::parse(audit["plan"]["verbatim"].get<std::string>());
      plan["terms"][1]["power"]["degree"] = degree;
      audit["plan"]["verbatim"] = plan.dump(2);
    }
    if (normalised) audit["plan"]["normalised"]["terms"][1]["power"]["degree"] = degree;
    SealAuditDocument(audit);
    const auto path = dir_.path() / "tampered.json";
    testing::WriteJsonFile(path, audit);
    return path;
  }
  std::filesystem::path data_, audit_;
};

TEST_F(PowerAudit, ADegreeOfTwoToTheThirtyOneInAReplayedPlanIsRefusedNamingTheKey) {
  // Before the cap this replay computed 2^31 - 1 products per row and per pass.
  const auto tampered = Tampered(/*verbatim=*/true, /*normalised=*/false, 2147483647);
  const TimedRun rerun = Timed({"rerun", tampered.string(), data_.string(), "--out", (dir_.path() / "q4").string()});
  EXPECT_EQ(rerun.run.status, 2) << rerun.run.err;
  // The parent audit's check reads plan.verbatim first and names the key there.
  EXPECT_TRUE(Has(rerun.run.err, "key 'plan.verbatim.terms[1].power.degree': expected an integer from 2 to 12, "
                                 "found 2147483647"))
      << rerun.run.err;
  EXPECT_LT(rerun.seconds, 5.0);
  EXPECT_FALSE(std::filesystem::exists(dir_.path() / "q4"));
  // verify --data replays the same recorded plan: the audit does not hold (exit 1), and says why.
  const CliRun verify = RunStepledger({"verify", tampered.string(), "--data", data_.string()});
  EXPECT_EQ(verify.status, 1) << verify.err;
  EXPECT_TRUE(Has(verify.err, "terms[1].power.degree")) << verify.err;
}

TEST_F(PowerAudit, ADegreeAboveTwelveInTheNormalisedPlanIsRefusedByPredict) {
  const auto tampered = Tampered(/*verbatim=*/false, /*normalised=*/true, 2147483647);
  const auto rows = dir_.Write("rows.csv", "age_months,ram_gb\n12,8\n");
  const TimedRun predict = Timed({"predict", tampered.string(), rows.string()});
  EXPECT_EQ(predict.run.status, 2) << predict.run.err;
  EXPECT_TRUE(Has(predict.run.err, "plan.normalised.terms[1].power.degree")) << predict.run.err;
  EXPECT_TRUE(Has(predict.run.err, "expected an integer from 2 to 12, found 2147483647")) << predict.run.err;
  EXPECT_LT(predict.seconds, 5.0);
}

TEST_F(PowerAudit, AReplayOverALimitIsBadInputNotADifference) {
  // The replaying command's limits apply (an audit cannot lift them); over one, verify stops with
  // exit 2 and the advice, it does not report the audit as failing.
  CliRun run = RunStepledger({"verify", audit_.string(), "--data", data_.string(), "--limit", "terms=2"});
  EXPECT_EQ(run.status, 2) << run.out << run.err;
  EXPECT_TRUE(Has(run.err, "plan.verbatim: plan key 'terms'") || Has(run.err, "plan key 'terms'")) << run.err;
  EXPECT_TRUE(Has(run.err, "to allow more, add --limit terms=N")) << run.err;
  run = RunStepledger({"verify", audit_.string(), "--data", data_.string(), "--limit", "terms=3"});
  EXPECT_EQ(run.status, 0) << run.out << run.err;
  run = RunStepledger({"rerun", audit_.string(), data_.string(), "--out", (dir_.path() / "again").string(),
                       "--limit", "columns=6"});
  EXPECT_EQ(run.status, 2) << run.err;
  EXPECT_TRUE(Has(run.err, "the header has more than 6 columns")) << run.err;
  run = RunStepledger({"predict", audit_.string(), data_.string(), "--limit", "design-columns=3"});
  EXPECT_EQ(run.status, 2) << run.err;
  EXPECT_TRUE(Has(run.err, "--limit design-columns=N")) << run.err;
  run = RunStepledger({"report", audit_.string(), "--data", data_.string(), "--limit", "columns=3"});
  EXPECT_EQ(run.status, 2) << run.err;
  EXPECT_TRUE(Has(run.err, "the header has more than 3 columns")) << run.err;
}

}  // namespace
}  // namespace stepledger
