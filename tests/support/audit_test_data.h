#pragma once
// Invented data and helpers for the audit tests: a reseller of refurbished laptops pricing its
// stock. The true model is known to the tests (invented data for simulations, as the project's
// rules allow): price = 600 - 9 age_months + 12 ram_gb + 0.25 disk_gb + 140 [grade A]
// - 90 [grade C] + noise (sd 25); battery_cycles and screen_in carry no effect.

#include <sys/wait.h>

#include <cmath>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <random>
#include <sstream>
#include <string>

#include <nlohmann/json.hpp>

#include "stepledger/audit/audit_document.h"
#include "support/test_paths.h"

namespace stepledger::testing {

struct LaptopDataOptions {
  std::uint64_t seed = 20261201;
  int rows = 200;
  /// Effect of ram_gb on price (per GB). Default 12; 0 removes the term's effect (drift).
  double ram_effect = 12;
  /// Adds a column warranty_months (no effect) after the others.
  bool add_warranty_column = false;
};

/// CSV text of the invented laptop stock. Deterministic for a given options value.
inline std::string LaptopCsv(const LaptopDataOptions& options = {}) {
  std::mt19937_64 generator(options.seed);
  std::uniform_int_distribution<int> age(3, 60);
  std::uniform_int_distribution<int> ram_index(0, 3);
  std::uniform_int_distribution<int> disk_index(0, 2);
  std::uniform_int_distribution<int> grade_index(0, 2);
  std::uniform_int_distribution<int> cycles(20, 900);
  std::uniform_int_distribution<int> screen_index(0, 2);
  std::uniform_int_distribution<int> warranty(0, 24);
  std::normal_distribution<double> noise(0.0, 25.0);
  const int rams[] = {4, 8, 16, 32};
  const int disks[] = {128, 256, 512};
  const char* grades[] = {"A", "B", "C"};
  const double screens[] = {13.3, 14.0, 15.6};
  std::ostringstream csv;
  csv << "age_months,ram_gb,disk_gb,grade,battery_cycles,screen_in,price";
  if (options.add_warranty_column) csv << ",warranty_months";
  csv << "\n";
  for (int row = 0; row < options.rows; ++row) {
    const int age_months = age(generator);
    const int ram = rams[ram_index(generator)];
    const int disk = disks[disk_index(generator)];
    const int grade = grade_index(generator);
    const int battery = cycles(generator);
    const double screen = screens[screen_index(generator)];
    const int warranty_months = warranty(generator);
    double price = 600 - 9.0 * age_months + options.ram_effect * ram + 0.25 * disk +
                   (grade == 0 ? 140.0 : 0.0) - (grade == 2 ? 90.0 : 0.0) + noise(generator);
    char price_text[32];
    std::snprintf(price_text, sizeof price_text, "%.2f", price);
    csv << age_months << "," << ram << "," << disk << "," << grades[grade] << "," << battery << ","
        << screen << "," << price_text;
    if (options.add_warranty_column) csv << "," << warranty_months;
    csv << "\n";
  }
  return csv.str();
}

/// A stepwise BIC plan over the laptop columns (explicit terms).
inline std::string LaptopPlan(const std::string& method = "stepwise", const std::string& criterion = "bic") {
  nlohmann::ordered_json plan = {
      {"response", "price"},
      {"terms",
       {{{"name", "age"}, {"column", "age_months"}},
        {{"name", "ram"}, {"column", "ram_gb"}},
        {{"name", "disk"}, {"column", "disk_gb"}},
        {{"name", "grade"}, {"categorical", "grade"}, {"baseline", "B"}},
        {{"name", "battery"}, {"column", "battery_cycles"}},
        {{"name", "screen"}, {"column", "screen_in"}}}},
      {"method", method},
      {"criterion", criterion}};
  return plan.dump(2) + "\n";
}

inline nlohmann::json ReadJsonFile(const std::filesystem::path& path) {
  std::ifstream in(path);
  return nlohmann::json::parse(in);
}

inline std::string ReadText(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

inline void WriteJsonFile(const std::filesystem::path& path, const nlohmann::json& value, int indent = 2) {
  std::ofstream out(path, std::ios::binary | std::ios::trunc);
  out << value.dump(indent) << "\n";
}

/// The audit schema shipped in the repository.
inline std::filesystem::path AuditSchemaPath() {
  return SourceDir() / "audit" / "schema" / "audit.schema.json";
}

/// Validates a file against the audit schema with Debian's python3-jsonschema
/// (Draft202012Validator). Returns "" when valid, else the validator's messages.
/// Returns "skip" when python3-jsonschema is missing.
inline std::string ValidateAuditAgainstSchema(const std::filesystem::path& audit,
                                              const std::filesystem::path& schema = AuditSchemaPath()) {
  if (!PythonHasModules("jsonschema")) return "skip";
  const std::string script =
      "import json,sys,jsonschema\n"
      "schema=json.load(open(sys.argv[1])); doc=json.load(open(sys.argv[2]))\n"
      "v=jsonschema.Draft202012Validator(schema)\n"
      "errors=sorted(v.iter_errors(doc), key=lambda e: list(e.path))\n"
      "for e in errors[:20]: print('/'.join(str(p) for p in e.path)+': '+e.message[:200])\n"
      "sys.exit(1 if errors else 0)\n";
  TempDir scratch;
  const auto script_path = scratch.Write("validate.py", script);
  std::string output;
  const int status = RunCommand(ReferencePython() + " '" + script_path.string() + "' '" +
                                    schema.string() + "' '" + audit.string() + "' 2>&1",
                                &output);
  if (status == 0) return "";
  return output.empty() ? "validator failed with status " + std::to_string(status) : output;
}

/// Runs a plan on a data file and writes folder/audit.json through the library (what
/// `select --out` does); returns the audit's path.
inline std::filesystem::path WriteAuditWithLibrary(const std::filesystem::path& data,
                                                   const std::string& plan_text,
                                                   const std::filesystem::path& folder,
                                                   const std::filesystem::path& sign_key = {}) {
  const RunResult run = RunPlan(data, ParsePlanText(plan_text), RunOptions{});
  AuditOutputOptions output;
  output.folder = folder;
  output.sign_key = sign_key;
  WriteAuditDocument(run, {}, output);
  return folder / "audit.json";
}

/// Makes an Ed25519 key pair with openssl; false when openssl cannot.
inline bool MakeEd25519KeyPair(const std::filesystem::path& private_key, const std::filesystem::path& public_key) {
  return RunCommand("openssl genpkey -algorithm ed25519 -out '" + private_key.string() +
                    "' 2>/dev/null && openssl pkey -in '" + private_key.string() + "' -pubout -out '" +
                    public_key.string() + "' 2>/dev/null") == 0;
}

}  // namespace stepledger::testing
