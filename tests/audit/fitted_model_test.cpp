// The final model rebuilt from an audit (audit/fitted_model.h): the `prediction` section is
// written by every run, read back exactly, and what it records (ranges over the rows used,
// the largest unit leverage, the smearing factor) is checked against values computed here
// from the rows. Data: invented laptop stock whose true model the test knows.

#include "stepledger/audit/fitted_model.h"

#include <algorithm>
#include <cmath>
#include <random>
#include <sstream>

#include <gtest/gtest.h>

#include "stepledger/audit/audit_document.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/engine/errors.h"
#include "support/row_diagnostics.h"
#include "support/test_paths.h"

namespace stepledger {
namespace {

using nlohmann::json;
using testing::TempDir;

struct Listing {
  int age_months;
  int memory_gb;
  double storage_gb;
  char grade;
  double weight;
  double price;
  bool storage_missing;
};

/// Invented stock: price = exp(6.5 - 0.012 age + 0.02 memory + 0.08 ln storage + grade shift
/// + noise sd 0.05). One row misses storage and holds the oldest age (75 months), so the
/// ranges over the rows used (age up to 60) differ from the column's profile (75).
std::vector<Listing> MakeListings(int rows, std::uint64_t seed) {
  std::mt19937_64 random(seed);
  std::uniform_int_distribution<int> age(6, 60);
  std::uniform_int_distribution<int> memory_index(0, 3);
  std::uniform_int_distribution<int> storage_index(0, 2);
  std::uniform_int_distribution<int> grade_index(0, 2);
  std::uniform_real_distribution<double> weight(0.5, 2.0);
  std::normal_distribution<double> noise(0.0, 0.05);
  const int memories[] = {4, 8, 16, 32};
  const double storages[] = {128, 256, 512};
  std::vector<Listing> listings;
  for (int row = 0; row < rows; ++row) {
    Listing listing{};
    listing.age_months = age(random);
    listing.memory_gb = memories[memory_index(random)];
    listing.storage_gb = storages[storage_index(random)];
    listing.grade = "ABC"[grade_index(random)];
    listing.weight = std::round(weight(random) * 100) / 100;
    const double shift = listing.grade == 'A' ? 0.15 : listing.grade == 'C' ? -0.1 : 0.0;
    listing.price = std::round(std::exp(6.5 - 0.012 * listing.age_months + 0.02 * listing.memory_gb +
                                        0.08 * std::log(listing.storage_gb) + shift + noise(random)) *
                               100) / 100;
    listings.push_back(listing);
  }
  listings[7].age_months = 75;
  listings[7].storage_missing = true;
  return listings;
}

std::string ListingsCsv(const std::vector<Listing>& listings) {
  std::ostringstream csv;
  csv << "age_months,memory_gb,storage_gb,grade,units,price\n";
  for (const Listing& l : listings) {
    csv << l.age_months << "," << l.memory_gb << ",";
    if (l.storage_missing) {
      csv << "NA";
    } else {
      csv << l.storage_gb;
    }
    csv << "," << l.grade << "," << l.weight << "," << l.price << "\n";
  }
  return csv.str();
}

std::string LogPricePlan(bool weighted, bool hierarchy = true) {
  json plan = {{"response", "price"},
               {"response_transform", "log"},
               {"terms",
                {{{"name", "age"}, {"column", "age_months"}},
                 {{"name", "memory"}, {"column", "memory_gb"}},
                 {{"name", "log_storage"}, {"log", "storage_gb"}},
                 {{"name", "grade"}, {"categorical", "grade"}, {"baseline", "B"}},
                 {{"name", "age:grade"}, {"product", {"age", "grade"}}}}},
               {"method", "none"},
               {"hierarchy", hierarchy}};
  if (weighted) plan["weights"] = "units";
  return plan.dump();
}

struct Recorded {
  RunResult run;
  json audit;  ///< as a reader sees it: serialised and parsed again
  std::filesystem::path data;
};

Recorded RunAndRecord(const TempDir& dir, const std::string& plan_text,
                      const std::vector<Listing>& listings) {
  Recorded recorded;
  recorded.data = dir.Write("stock.csv", ListingsCsv(listings));
  recorded.run = RunPlan(recorded.data, ParsePlanText(plan_text), RunOptions{});
  json document = BuildAuditDocument(recorded.run);
  SealAuditDocument(document);
  recorded.audit = json::parse(SerializeAudit(document));
  return recorded;
}

TEST(FittedModel, RebuildsTheFinalModelExactly) {
  TempDir dir;
  const Recorded recorded = RunAndRecord(dir, LogPricePlan(/*weighted=*/true), MakeListings(120, 11));
  const FittedModel model = FittedModelFromAudit(recorded.audit, "audit.json");
  const FitResult& fit = recorded.run.fit;

  ASSERT_EQ(model.design.column_count(), recorded.run.design.column_count());
  for (std::size_t c = 0; c < model.design.column_count(); ++c) {
    EXPECT_EQ(model.design.columns[c].name, recorded.run.design.columns[c].name);
    EXPECT_EQ(model.design.columns[c].scale, recorded.run.design.columns[c].scale) << c;
  }
  EXPECT_EQ(model.fit.terms, fit.terms);
  EXPECT_EQ(model.fit.term_indices, fit.term_indices);
  EXPECT_EQ(model.fit.columns, fit.columns);
  ASSERT_EQ(model.fit.beta.n_elem, fit.beta.n_elem);
  for (arma::uword j = 0; j < fit.beta.n_elem; ++j) EXPECT_EQ(model.fit.beta(j), fit.beta(j)) << j;
  // JSON numbers round-trip doubles exactly, so the triangle comes back bit for bit.
  ASSERT_EQ(model.fit.model_triangle.n_rows, fit.model_triangle.n_rows);
  for (arma::uword i = 0; i < fit.model_triangle.n_rows; ++i) {
    for (arma::uword j = i; j < fit.model_triangle.n_cols; ++j) {
      EXPECT_EQ(model.fit.model_triangle(i, j), fit.model_triangle(i, j)) << i << "," << j;
    }
  }
  EXPECT_EQ(model.fit.model_scales, fit.model_scales);
  EXPECT_EQ(model.fit.criteria.sigma, fit.criteria.sigma);
  EXPECT_EQ(model.fit.df_residual, fit.df_residual);
  EXPECT_EQ(model.fit.n, fit.n);
  EXPECT_EQ(model.fit.k, fit.k);
  EXPECT_EQ(model.data_sha256, recorded.run.data_sha256);
  EXPECT_EQ(model.missing_tokens, (std::vector<std::string>{"", "NA"}));

  // The rebuilt model diagnoses the rows exactly as the run did.
  CsvOptions csv;
  csv.missing_tokens = model.missing_tokens;
  const std::vector<RowDiagnostic> original = testing::DiagnoseEveryRow(
      fit, recorded.run.design, FileRowReplay(recorded.data, recorded.run.design, csv));
  const std::vector<RowDiagnostic> rebuilt =
      testing::DiagnoseEveryRow(model.fit, model.design, FileRowReplay(recorded.data, model.design, csv));
  ASSERT_EQ(rebuilt.size(), original.size());
  for (std::size_t r = 0; r < original.size(); ++r) {
    EXPECT_EQ(rebuilt[r].line, original[r].line);
    EXPECT_EQ(rebuilt[r].leverage, original[r].leverage) << r;
    EXPECT_EQ(rebuilt[r].residual, original[r].residual) << r;
  }
}

TEST(FittedModel, RangesLeverageAndSmearingComeFromTheRowsUsed) {
  TempDir dir;
  const std::vector<Listing> listings = MakeListings(150, 12);
  const Recorded recorded = RunAndRecord(dir, LogPricePlan(/*weighted=*/true), listings);
  const FittedModel model = FittedModelFromAudit(recorded.audit, "audit.json");

  // Ranges over the rows used, computed here from the rows (the dropped row holds age 75).
  int age_low = 1000, age_high = -1;
  double log_storage_low = 1e300, log_storage_high = -1e300;
  for (const Listing& l : listings) {
    if (l.storage_missing) continue;
    age_low = std::min(age_low, l.age_months);
    age_high = std::max(age_high, l.age_months);
    log_storage_low = std::min(log_storage_low, std::log(l.storage_gb));
    log_storage_high = std::max(log_storage_high, std::log(l.storage_gb));
  }
  ASSERT_EQ(age_high, 60) << "the fixture's ages run from 6 to 60 on the rows used";
  EXPECT_EQ(recorded.audit["data"]["columns"][0]["max"], 75) << "the profile sees the dropped row";
  std::map<std::string, TermRange> ranges;
  for (const TermRange& range : model.support.ranges) ranges[range.term] = range;
  ASSERT_EQ(ranges.size(), 3u) << "age, memory and log_storage; grade and the product have no range";
  EXPECT_EQ(ranges["age"].min, age_low);
  EXPECT_EQ(ranges["age"].max, age_high);
  EXPECT_EQ(ranges["age"].column, "age_months");
  EXPECT_EQ(ranges["log_storage"].kind, TermKind::kLog);
  EXPECT_EQ(ranges["log_storage"].min, log_storage_low);
  EXPECT_EQ(ranges["log_storage"].max, log_storage_high);

  // The extrapolation caution quotes the same ranges as predict checks (rows used), not the
  // profile's: age runs to 60, not to the dropped row's 75; storage is back on its own scale.
  json extrapolation;
  for (const json& caution : recorded.audit["cautions"]) {
    if (caution["kind"] == "extrapolation") extrapolation = caution;
  }
  ASSERT_TRUE(extrapolation.is_object());
  std::map<std::string, json> quoted;
  for (const json& range : extrapolation["ranges"]) quoted[range["column"].get<std::string>()] = range;
  ASSERT_TRUE(quoted.contains("age_months"));
  EXPECT_EQ(quoted["age_months"]["max"], 60);
  EXPECT_EQ(quoted["age_months"]["over"], "rows used");
  EXPECT_NEAR(quoted["storage_gb"]["max"].get<double>(), 512, 1e-9);
  EXPECT_NE(extrapolation["message"].get<std::string>().find("age_months 6 to 60"), std::string::npos)
      << extrapolation["message"];

  // Largest unit leverage and the smearing factor, recomputed from the diagnostics and weights.
  CsvOptions csv;
  csv.missing_tokens = model.missing_tokens;
  const std::vector<RowDiagnostic> rows = testing::DiagnoseEveryRow(
      recorded.run.fit, recorded.run.design, FileRowReplay(recorded.data, recorded.run.design, csv));
  std::vector<double> weights;
  for (const Listing& l : listings) {
    if (!l.storage_missing) weights.push_back(l.weight);
  }
  ASSERT_EQ(weights.size(), rows.size());
  double max_unit = 0, smearing = 0;
  std::uint64_t max_line = 0;
  for (std::size_t r = 0; r < weights.size(); ++r) {
    const double unit = rows[r].leverage / weights[r];
    if (unit > max_unit) {
      max_unit = unit;
      max_line = rows[r].line;
    }
    smearing += std::exp(std::sqrt(weights[r]) * rows[r].residual);
  }
  smearing /= static_cast<double>(weights.size());
  ASSERT_TRUE(model.support.max_unit_leverage.has_value());
  EXPECT_DOUBLE_EQ(*model.support.max_unit_leverage, max_unit);
  EXPECT_EQ(model.support.max_unit_leverage_line, max_line);
  ASSERT_TRUE(model.support.smearing_factor.has_value());
  EXPECT_NEAR(*model.support.smearing_factor, smearing, 1e-14);
  // exp of N(0, 0.05^2) errors averages about exp(0.05^2 / 2) = 1.00125 (common practice).
  EXPECT_NEAR(*model.support.smearing_factor, 1.00125, 0.01);
}

TEST(FittedModel, WithoutALogResponseThereIsNoSmearingFactor) {
  TempDir dir;
  json plan = json::parse(LogPricePlan(false));
  plan.erase("response_transform");
  const Recorded recorded = RunAndRecord(dir, plan.dump(), MakeListings(80, 13));
  EXPECT_TRUE(recorded.audit["prediction"]["smearing_factor"].is_null());
  const FittedModel model = FittedModelFromAudit(recorded.audit, "audit.json");
  EXPECT_FALSE(model.support.smearing_factor.has_value());
  // Unweighted: the largest unit leverage is the largest leverage of the extrapolation caution.
  ASSERT_TRUE(recorded.run.max_leverage.has_value());
  EXPECT_DOUBLE_EQ(*model.support.max_unit_leverage, *recorded.run.max_leverage);
}

TEST(FittedModel, AProductNeedsItsPartsEvenWhenTheyAreNotInTheModel) {
  TempDir dir;
  json plan = json::parse(LogPricePlan(false, /*hierarchy=*/false));
  plan["method"] = "forward";
  plan["keep"] = {"age:grade"};
  plan["never"] = {"age", "grade"};
  const Recorded recorded = RunAndRecord(dir, plan.dump(), MakeListings(90, 14));
  const FittedModel model = FittedModelFromAudit(recorded.audit, "audit.json");
  ASSERT_NE(std::find(model.fit.terms.begin(), model.fit.terms.end(), "age:grade"), model.fit.terms.end());
  ASSERT_EQ(std::find(model.fit.terms.begin(), model.fit.terms.end(), "age"), model.fit.terms.end());
  std::vector<std::string> needed;
  for (std::size_t term : TermsNeededByModel(model.design, model.fit)) needed.push_back(model.design.terms[term].name);
  EXPECT_NE(std::find(needed.begin(), needed.end(), "age"), needed.end());
  EXPECT_NE(std::find(needed.begin(), needed.end(), "grade"), needed.end());
  // The product's numeric part has its range recorded, though it is not a model term.
  bool age_range = false;
  for (const TermRange& range : model.support.ranges) age_range = age_range || range.term == "age";
  EXPECT_TRUE(age_range);
}

TEST(FittedModel, ReadsWhyRefinementStoppedAndAuditsWrittenBeforeItWasRecorded) {
  TempDir dir;
  const Recorded recorded = RunAndRecord(dir, LogPricePlan(false), MakeListings(100, 16));
  const FitResult& fit = recorded.run.fit;
  EXPECT_EQ(recorded.audit["model"]["refinement_stop"], ToString(fit.refinement_stop));
  EXPECT_EQ(recorded.audit["numerics"]["refinement_stop"], ToString(fit.refinement_stop));
  EXPECT_EQ(FittedModelFromAudit(recorded.audit, "audit.json").fit.refinement_stop, fit.refinement_stop);
  // A format_version 2 audit from before the field: passes made read as converged.
  json older = recorded.audit;
  older["model"].erase("refinement_stop");
  older["numerics"].erase("refinement_stop");
  const FittedModel model = FittedModelFromAudit(older, "audit.json");
  EXPECT_EQ(model.fit.refinement_passes, fit.refinement_passes);
  EXPECT_EQ(model.fit.refinement_stop,
            fit.refinement_passes > 0 ? RefinementStop::kConverged : RefinementStop::kNotRefined);
}

void ExpectFailureNaming(const json& audit, const std::string& expected) {
  try {
    (void)FittedModelFromAudit(audit, "old/audit.json");
    FAIL() << "expected an InputError naming " << expected;
  } catch (const InputError& error) {
    EXPECT_NE(std::string(error.what()).find(expected), std::string::npos) << error.what();
    EXPECT_EQ(std::string(error.what()).rfind("old/audit.json: ", 0), 0u) << error.what();
  }
}

TEST(FittedModel, ErrorsNameTheKey) {
  TempDir dir;
  const Recorded recorded = RunAndRecord(dir, LogPricePlan(false), MakeListings(60, 15));

  json without = recorded.audit;
  without.erase("prediction");
  ExpectFailureNaming(without, "key 'prediction': missing: this audit was written before");

  json short_row = recorded.audit;
  short_row["prediction"]["triangle"][1].erase(0);
  ExpectFailureNaming(short_row, "key 'prediction.triangle[1]': expected");

  json text_cell = recorded.audit;
  text_cell["prediction"]["triangle"][0][0] = "x";
  ExpectFailureNaming(text_cell, "key 'prediction.triangle[0][0]': expected a number");

  json renamed = recorded.audit;
  renamed["design"]["columns"][1]["name"] = "elsewhere";
  ExpectFailureNaming(renamed, "key 'design.columns'");

  json unknown_stop = recorded.audit;
  unknown_stop["model"]["refinement_stop"] = "finished";
  ExpectFailureNaming(unknown_stop, "key 'model.refinement_stop': 'finished' is not one of");

  json unknown_column = recorded.audit;
  unknown_column["prediction"]["columns"][1] = "no_such_column";
  ExpectFailureNaming(unknown_column, "key 'prediction.columns[1]': no design column");

  json bad_plan = recorded.audit;
  bad_plan["plan"]["normalised"]["method"] = "sideways";
  ExpectFailureNaming(bad_plan, "key 'plan.normalised.method'");

  json no_sigma_type = recorded.audit;
  no_sigma_type["model"]["sigma"] = "large";
  ExpectFailureNaming(no_sigma_type, "key 'model.sigma': expected a number or null");
}

// Wrong types and out-of-range integers in a (re-sealed) audit are bad input naming the key;
// each of these ended in a JSON library exception (exit 3, "internal error"), and 2^64 - 1
// was read as -1.
TEST(FittedModel, WrongTypesAndOutOfRangeIntegersNameTheKey) {
  TempDir dir;
  const Recorded recorded = RunAndRecord(dir, LogPricePlan(false), MakeListings(60, 15));
  struct Edit {
    const char* section;
    const char* key;
    json value;
    const char* expected;
  };
  const std::vector<Edit> edits = {
      {"model", "intercept", "yes", "key 'model.intercept': expected true or false, found string"},
      {"model", "refinement_passes", "x", "key 'model.refinement_passes': expected an integer from 0 to 1000, found \"x\""},
      {"model", "n", -1, "key 'model.n': expected an integer >= 0, found -1"},
      {"model", "k", 18446744073709551615u, "key 'model.k': expected an integer >= 0, found 18446744073709551615"},
      {"prediction", "max_unit_leverage_line", "x",
       "key 'prediction.max_unit_leverage_line': expected an integer >= 0, found \"x\""},
      {"prediction", "ranges", json::array({5}), "key 'prediction.ranges[0]': expected an object, found number"},
      {"model", "coefficients", json::array({"c"}), "key 'model.coefficients[0]': expected an object, found string"},
  };
  for (const Edit& edit : edits) {
    json edited = recorded.audit;
    edited[edit.section][edit.key] = edit.value;
    ExpectFailureNaming(edited, edit.expected);
  }
  json levels = recorded.audit;
  levels["data"]["columns"][0]["too_many_levels"] = "x";
  ExpectFailureNaming(levels, "key 'data.columns[0].too_many_levels': expected true or false, found string");
  json column = recorded.audit;
  column["data"]["columns"][1] = 7;
  ExpectFailureNaming(column, "key 'data.columns[1]': expected an object, found number");
}

}  // namespace
}  // namespace stepledger
