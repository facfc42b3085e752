#pragma once
// A test suite base for the audit tests of the validation section: one run of the stepwise BIC
// laptop plan (support/audit_test_data.h: invented data whose true model is known) shared by the
// suite's tests, and the sealed audit of that run with a chosen validation result.

#include <filesystem>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "stepledger/audit/audit_document.h"
#include "support/audit_test_data.h"
#include "support/test_paths.h"

namespace stepledger::testing {

class LaptopRunSuite : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    folder_ = new TempDir();
    data_ = folder_->Write("laptops.csv", LaptopCsv());
    run_ = new RunResult(RunPlan(data_, ParsePlanText(LaptopPlan()), {}));
  }
  static void TearDownTestSuite() {
    delete run_;
    delete folder_;
  }
  /// The sealed audit of the shared run with this validation result.
  static nlohmann::json SealedAudit(const ValidationResult& validation) {
    RunResult run = *run_;
    run.validation = validation;
    nlohmann::json document = BuildAuditDocument(run);
    SealAuditDocument(document);
    return document;
  }
  static inline TempDir* folder_ = nullptr;
  static inline std::filesystem::path data_;
  static inline RunResult* run_ = nullptr;
};

}  // namespace stepledger::testing
