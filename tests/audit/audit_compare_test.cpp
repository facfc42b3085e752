#include "stepledger/audit/audit_compare.h"

#include <functional>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

using json = nlohmann::json;

// Two hand-written audit records (only the sections a comparison reads). They carry no
// statistical claim: the estimates are chosen so that each comparison rule has an exact answer.
json SmallAudit(const std::string& second_term, double age_estimate, double price_mean, std::int64_t rows_used) {
  return {{"seal", "sha256:" + std::string(64, second_term == "ram" ? 'a' : 'b')},
          {"data",
           {{"sha256", second_term == "ram" ? "old-bytes" : "new-bytes"},
            {"rows_used", rows_used},
            {"columns",
             {{{"name", "price"}, {"type", "numeric"}, {"min", 50.0}, {"max", 150.0}, {"mean", price_mean}, {"sd", 10.0}},
              {{"name", "grade"}, {"type", "categorical"}}}}}},
          {"plan", {{"normalised", {{"method", "forward"}, {"criterion", "bic"}}}}},
          {"steps", {{{"action", "add"}, {"term", "age"}}, {{"action", "add"}, {"term", second_term}}}},
          {"model",
           {{"terms", {"age", second_term}},
            {"coefficients",
             {{{"name", "(intercept)"}, {"estimate", 500.0}, {"se", 20.0}},
              {{"name", "age"}, {"estimate", age_estimate}, {"se", 1.0}},
              {{"name", second_term}, {"estimate", 7.0}, {"se", 0.5}}}}}}};
}

TEST(AuditComparison, NotRunValueIsTheCautiousVerdictWithNothingCompared) {
  const AuditComparison comparison;
  EXPECT_EQ(comparison.verdict, ComparisonVerdict::kDifferentTerms);
  EXPECT_TRUE(comparison.ModelsDiffer());
  EXPECT_FALSE(comparison.plan.compared);
  EXPECT_TRUE(comparison.final_terms.entered.empty());
  EXPECT_FALSE(comparison.prediction.value("available", true));
}

TEST(AuditComparison, TypedFieldsNameTheTermsThatEnteredAndLeft) {
  const json old_audit = SmallAudit("ram", 10.0, 100.0, 100);
  const json new_audit = SmallAudit("ssd", 13.0, 103.0, 120);
  const AuditComparison comparison = CompareAudits(old_audit, new_audit);

  EXPECT_EQ(comparison.verdict, ComparisonVerdict::kDifferentTerms);
  EXPECT_EQ(comparison.final_terms.entered, std::vector<std::string>{"ssd"});
  EXPECT_EQ(comparison.final_terms.left, std::vector<std::string>{"ram"});
  EXPECT_EQ(comparison.final_terms.kept, std::vector<std::string>{"age"});
  EXPECT_EQ(comparison.coefficients_only_old, std::vector<std::string>{"ram"});
  EXPECT_EQ(comparison.coefficients_only_new, std::vector<std::string>{"ssd"});
  EXPECT_FALSE(comparison.same_data);
  ASSERT_TRUE(comparison.old_seal.has_value());
  EXPECT_EQ(*comparison.old_seal, old_audit["seal"].get<std::string>());
  EXPECT_EQ(comparison.rows.old_rows_used, std::optional<std::int64_t>(100));
  EXPECT_EQ(comparison.rows.new_rows_used, std::optional<std::int64_t>(120));
  EXPECT_TRUE(comparison.plan.compared);
  EXPECT_TRUE(comparison.plan.differences.empty());

  // The routes part at step 1 (the second add).
  EXPECT_FALSE(comparison.route.same);
  EXPECT_EQ(comparison.route.first_difference_step, std::optional<std::size_t>(1));
  ASSERT_TRUE(comparison.route.old_move && comparison.route.new_move);
  EXPECT_EQ(comparison.route.old_move->term, std::optional<std::string>("ram"));
  EXPECT_EQ(comparison.route.new_move->term, std::optional<std::string>("ssd"));

  // The shared coefficients in the old model's order; age moved 3 old SEs, beyond the mark of 2.
  ASSERT_EQ(comparison.coefficients.size(), 2u);
  EXPECT_EQ(comparison.coefficients[0].name, "(intercept)");
  EXPECT_FALSE(comparison.coefficients[0].beyond_mark);
  EXPECT_EQ(comparison.coefficients[1].name, "age");
  ASSERT_TRUE(comparison.coefficients[1].change_in_old_se.has_value());
  EXPECT_DOUBLE_EQ(*comparison.coefficients[1].change_in_old_se, 3.0);
  EXPECT_TRUE(comparison.coefficients[1].beyond_mark);

  // price's mean moved 0.3 old SD, beyond the 0.1 threshold; the categorical column is not measured.
  EXPECT_EQ(comparison.columns.numeric_compared, 1u);
  ASSERT_EQ(comparison.columns.moved.size(), 1u);
  EXPECT_EQ(comparison.columns.moved[0].column, "price");
  ASSERT_TRUE(comparison.columns.moved[0].mean_shift_in_old_sd.has_value());
  EXPECT_NEAR(*comparison.columns.moved[0].mean_shift_in_old_sd, 0.3, 1e-12);

  // The JSON section and the text say the same as the typed fields.
  const json section = comparison.ToJson();
  EXPECT_EQ(section["verdict"], "different terms");
  EXPECT_EQ(section["models_differ"], true);
  EXPECT_EQ(section["final_terms"]["entered"], json::array({"ssd"}));
  EXPECT_EQ(section["route"]["first_difference_step"], 1);
  EXPECT_EQ(section["rows"]["new_rows_used"], 120);
  EXPECT_EQ(comparison.BriefReport(), "Verdict: different terms (a term entered or left the final model).");
  EXPECT_EQ(comparison.FullReport().rfind(comparison.BriefReport() + "\n", 0), 0u) << comparison.FullReport();
}

TEST(AuditComparison, AnAuditComparedWithItselfIsTheSameModel) {
  const json audit = SmallAudit("ram", 10.0, 100.0, 100);
  const AuditComparison comparison = CompareAudits(audit, audit);
  EXPECT_EQ(comparison.verdict, ComparisonVerdict::kSameModel);
  EXPECT_FALSE(comparison.ModelsDiffer());
  EXPECT_TRUE(comparison.same_data);
  EXPECT_TRUE(comparison.route.same);
  EXPECT_FALSE(comparison.route.first_difference_step.has_value());
  EXPECT_TRUE(comparison.final_terms.entered.empty());
  EXPECT_EQ(comparison.final_terms.kept, (std::vector<std::string>{"age", "ram"}));
  EXPECT_TRUE(comparison.columns.moved.empty());
  EXPECT_EQ(comparison.ToJson()["route"]["old"], nullptr);
}

// A section of the wrong type is bad input naming the audit and the key (each of these was a
// JSON library exception: exit 3, "internal error").
TEST(AuditComparison, WrongTypesNameTheAuditAndTheKey) {
  const json audit = SmallAudit("ram", 10.0, 100.0, 100);
  CompareOptions options;
  options.old_name = "a.json";
  options.new_name = "b.json";
  auto message_of = [&](const json& edited) {
    try {
      CompareAudits(audit, edited, options);
    } catch (const InputError& error) {
      return std::string(error.what());
    }
    return std::string("(no error)");
  };
  auto edited = [&](const std::function<void(json&)>& edit) {
    json copy = audit;
    edit(copy);
    return copy;
  };
  EXPECT_EQ(message_of(edited([](json& a) { a["model"] = json::array(); })),
            "b.json: key 'model': expected an object, found array");
  EXPECT_EQ(message_of(edited([](json& a) { a["data"]["columns"] = {{"a", 1}}; })),
            "b.json: key 'data.columns': expected an array, found object");
  EXPECT_EQ(message_of(edited([](json& a) { a["steps"] = {{"a", 1}}; })), "b.json: key 'steps': expected an array, found object");
  EXPECT_EQ(message_of(edited([](json& a) { a["model"]["coefficients"][0]["name"] = 5; })),
            "b.json: key 'model.coefficients[0].name': expected a string, found number");
  EXPECT_EQ(message_of(edited([](json& a) { a["model"]["coefficients"][1]["se"] = "small"; })),
            "b.json: key 'model.coefficients[1].se': expected a number or null, found string");
  EXPECT_EQ(message_of(edited([](json& a) { a["model"]["terms"] = "age"; })),
            "b.json: key 'model.terms': expected an array, found string");
  EXPECT_EQ(message_of(edited([](json& a) { a["data"]["columns"][0]["mean"] = "high"; })),
            "b.json: key 'data.columns[0].mean': expected a number or null, found string");
  EXPECT_EQ(message_of(edited([](json& a) { a["data"]["rows_used"] = -3; })),
            "b.json: key 'data.rows_used': expected an integer >= 0, found -3");
  EXPECT_EQ(message_of(edited([](json& a) { a["plan"]["normalised"] = "x"; })),
            "b.json: key 'plan.normalised': expected an object, found string");
  EXPECT_EQ(message_of(edited([](json& a) { a["steps"][1]["term"] = 3; })),
            "b.json: key 'steps[1].term': expected a string or null, found number");
  // A recorded comparison with the old audit: its prediction part is checked before it is shown.
  EXPECT_EQ(message_of(edited([&](json& a) { a["comparison"] = {{"old_seal", audit["seal"]}, {"prediction", 3}}; })),
            "b.json: key 'comparison.prediction': expected an object, found number");
  EXPECT_EQ(message_of(edited([&](json& a) {
              a["comparison"] = {{"old_seal", audit["seal"]}, {"prediction", {{"available", true}, {"rows", "many"}}}};
            })),
            "b.json: key 'comparison.prediction.rows': expected an integer >= 0, found \"many\"");
  // The old audit is named as the old one.
  try {
    CompareAudits(edited([](json& a) { a["data"] = 1; }), audit, options);
    FAIL() << "expected InputError";
  } catch (const InputError& error) {
    EXPECT_EQ(std::string(error.what()), "a.json: key 'data': expected an object, found number");
  }
  // Control: a well-formed recorded prediction is shown.
  const json rerun = edited([&](json& a) {
    a["comparison"] = {{"old_seal", audit["seal"]},
                       {"prediction", {{"available", true}, {"rows", 12}, {"old_model_rmse", 2.5},
                                       {"old_model_mean_error", 0.5}, {"new_model_rmse", nullptr}}}};
  });
  EXPECT_NE(CompareAudits(audit, rerun, options).FullReport().find("RMSE 2.5"), std::string::npos)
      << CompareAudits(audit, rerun, options).FullReport();
}

}  // namespace
}  // namespace stepledger
