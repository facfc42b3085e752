// Fuzz target: reading the rows `predict` prices (engine/csv.h CsvReader, engine/prediction.h
// PredictionRowEvaluator and Predictor), against one fixed model.
//
// The model is made once at start-up by the real pipeline, as `select` then `predict` would:
// RunPlan on a small invented data set of a laptop reseller (the rows below), the audit built,
// sealed, written and read back, checked, and the model rebuilt from it (FittedModelFromAudit,
// MakePricingModel). Its plan uses every kind of term a row must be evaluated for: a logged
// response, precision weights, numeric, power, log and categorical terms and a product.
//
// Each input is the bytes of a rows file. Checked: reading ends in rows or an InputError
// (a bad header, a broken record); every row is priced exactly when it has no problem (a
// problem is a per-row outcome, never an exception); a priced row has a finite prediction and
// leverage and ordered intervals; flags are distinct and in their listing order.

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <cstring>
#include <memory>
#include <string>

#include "csv_read_text.h"
#include "fuzz_support.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/engine/csv.h"
#include "stepledger/engine/prediction.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/run/run_plan.h"

namespace stepledger::fuzz {
namespace {

constexpr const char* kPlan = R"({
  "response": "resale_price",
  "response_transform": "log",
  "weights": "units",
  "terms": [
    {"name": "age", "column": "age_months"},
    {"name": "age^2", "power": {"column": "age_months", "degree": 2}},
    {"name": "memory", "column": "memory_gb"},
    {"name": "log_storage", "log": "storage_gb"},
    {"name": "grade", "categorical": "grade", "baseline": "C"},
    {"name": "age:grade", "product": ["age", "grade"]}
  ],
  "method": "none"
}
)";

// Invented listings: price falls with age, rises with memory and log storage, by grade; the
// noise is a fixed pattern, so the fit is the same on every run.
std::string FixtureData() {
  std::string csv = "listing_id,age_months,memory_gb,storage_gb,grade,units,resale_price\n";
  const int memories[] = {4, 8, 16, 32};
  const int storages[] = {128, 256, 512, 1024};
  const char* grades[] = {"A", "B", "C"};
  for (int row = 0; row < 48; ++row) {
    const int age = 3 + (row * 7) % 58;
    const int memory = memories[(row * 3) % 4];
    const int storage = storages[(row * 5 + row / 4) % 4];
    const int grade = (row + row / 3) % 3;
    const int units = 1 + row % 4;
    const double noise = 0.04 * (((row * 37) % 11) - 5) / 5.0;
    const double log_price = 6.6 - 0.012 * age + 0.00004 * age * age + 0.015 * memory +
                             0.08 * std::log(storage) + (grade == 0 ? 0.15 : grade == 1 ? 0.07 : 0.0) -
                             (grade == 0 ? 0.002 * age : 0.0) + noise;
    char line[160];
    std::snprintf(line, sizeof line, "LT-%03d,%d,%d,%d,%s,%d,%.2f\n", row + 1, age, memory, storage,
                  grades[grade], units, std::exp(log_price));
    csv += line;
  }
  return csv;
}

struct Fixture {
  FittedModel fitted;
  std::unique_ptr<Predictor> predictor;
};

Fixture* MakeFixture() {
  auto fixture = std::make_unique<Fixture>();
  try {
    const std::filesystem::path data = PrivateTempDir() / "listings.csv";
    WriteFileOrDie(data, FixtureData());
    RunOptions options;
    options.work_dir = PrivateTempDir();
    const RunResult run = RunPlan(data, ParsePlanText(kPlan, "plan.json"), options);
    AuditDocumentOptions document_options;
    document_options.created_at = "2026-12-01T09:30:00Z";
    const std::filesystem::path audit_path = PrivateTempDir() / "audit.json";
    WriteFileOrDie(audit_path, SerializeAudit(BuildSealedAudit(run, document_options)));
    const nlohmann::json audit = ReadAuditFile(audit_path);
    const VerifyReport integrity = CheckAuditIntegrity(audit);
    if (!integrity.Holds()) Finding("the fixture audit does not verify", integrity.FullReport());
    fixture->fitted = FittedModelFromAudit(audit, "audit.json");
    fixture->predictor = std::make_unique<Predictor>(MakePricingModel(fixture->fitted));
  } catch (const std::exception& error) {
    Finding("cannot make the fixture model", error.what());
  }
  return fixture.release();
}

const Fixture& TheFixture() {
  static const Fixture* fixture = MakeFixture();  // lives to the end of the process
  return *fixture;
}

void CheckRow(const EvaluatedRow& evaluated, const PredictedRow& row, const Design& design) {
  if (evaluated.ok() && evaluated.x.size() != design.column_count()) Finding("a row without problems has no design row");
  if (row.priced() && !evaluated.ok()) Finding("a row is priced although it has problems");
  if (!row.priced()) {
    // A row that evaluates cleanly may still go unpriced, but only as too far outside the
    // fitted data (an invalid-value problem the Predictor adds when a number would overflow).
    const bool only_too_far_out =
        !row.problems.empty() && std::all_of(row.problems.begin(), row.problems.end(), [](const RowProblem& problem) {
          return problem.flag == PredictionFlag::kInvalidValue;
        });
    if (evaluated.ok() && !only_too_far_out) Finding("a row without problems is not priced");
  }
  if (row.priced() != row.problems.empty()) Finding("a priced row lists problems");
  for (std::size_t i = 0; i < row.flags.size(); ++i) {
    for (std::size_t j = i + 1; j < row.flags.size(); ++j) {
      if (static_cast<int>(row.flags[j]) <= static_cast<int>(row.flags[i])) {
        Finding("flags are repeated or out of their listing order");
      }
    }
  }
  if (!row.priced()) return;
  std::string detail = "row " + std::to_string(row.row_index + 1) + ": prediction ";
  AppendNumber(detail, *row.prediction);
  detail += ", leverage ";
  if (row.leverage) AppendNumber(detail, *row.leverage);
  detail += "; " + row.Detail();
  if (!std::isfinite(*row.prediction) || !row.leverage || !std::isfinite(*row.leverage)) {
    Finding("a row counted as priced has no finite prediction or leverage", detail);
  }
  for (const auto& interval : {row.ci, row.pi}) {
    if (interval && !(interval->low <= interval->high)) Finding("an interval's bounds are not ordered", detail);
  }
}

void CheckRows(std::string_view bytes) {
  const Fixture& fixture = TheFixture();
  const Predictor& predictor = *fixture.predictor;
  std::size_t position = 0;
  CsvReader::ReadFunction read = [&](char* buffer, std::size_t capacity) {
    const std::size_t count = std::min(capacity, bytes.size() - position);
    std::memcpy(buffer, bytes.data() + position, count);
    position += count;
    return count;
  };
  CsvOptions csv;
  csv.missing_tokens = fixture.fitted.missing_tokens;
  // Larger than any input the fuzzer makes; not the default 1 MiB, whose allocation and zeroing
  // per input would dominate the time under the sanitizers.
  csv.block_bytes = std::size_t{1} << 16;
  CsvReader reader("rows.csv", read, csv);
  const PredictionRowEvaluator evaluator(predictor.design(), reader);
  CsvRecord record;
  while (reader.Next(record)) {
    const EvaluatedRow evaluated = evaluator.Evaluate(record);
    const PredictedRow row = predictor.Predict(evaluated);
    CheckRow(evaluated, row, predictor.design());
    (void)row.Detail();
    for (const RowProblem& problem : row.problems) (void)problem.Describe();
    for (const OutsideRange& outside : row.outside_range) (void)outside.Describe();
  }
}

}  // namespace
}  // namespace stepledger::fuzz

extern "C" int LLVMFuzzerInitialize(int*, char***) {
  (void)stepledger::fuzz::TheFixture();
  return 0;
}

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace stepledger::fuzz;
  ExpectOnlyInputErrors("predict rows", [&] { CheckRows(AsText(data, size)); });
  return 0;
}
