#pragma once
// The invented demo data set: listings of a reseller of refurbished laptops.
// Header-only so that the generator program and the regeneration test share one definition.
//
// TRUE MODEL (known exactly, so demos and simulations can check what a selection finds):
//
//   resale_price = 120
//                  - 6.0   * age_months + 0.035 * age_months^2
//                  + 2.2   * battery_health_pct
//                  + 9.0   * memory_gb
//                  + 55.0  * ln(storage_gb)
//                  + 8.0   * screen_in
//                  + 0.030 * cpu_score
//                  + 90 [grade A] + 40 [grade B]            (grade C is the reference)
//                  - 1.0 * age_months [grade A] - 0.4 * age_months [grade B]
//                  + 4.0   * warranty_months
//                  + e,    e ~ Normal(0, 35^2), independent
//
// listing_weekday, photo_count and seller_note_length carry no signal (their true
// coefficients are 0); listing_id is an identifier. cpu_score rises with memory_gb and falls
// with age_months, and battery_health_pct falls with age_months, so these predictors are
// correlated, as in real stock. About 1% of battery_health_pct and cpu_score cells and 2% of
// seller_note_length cells are missing ("NA" or empty).
//
// SECOND MONTH (drift, for `stepledger rerun`): MakeLaptopListings(rows, seed, month) with
// month >= 2 draws the listings the same way from its own seed but prices them with a steeper
// age slope: every listing loses a further kAgeDriftPerMonth * (month - 1) * age_months, i.e. the
// true age coefficient is -6.0 - 0.8 = -6.8 in month 2 (older stock has become harder to sell).
// Everything else in the true model is unchanged; listing ids start at LT-(month*100000 + 1).
// The bundled examples/data/laptops_month2.csv is month 2 with kLaptopListingsMonth2Seed.
//
// Reproducibility: every random number comes from std::mt19937_64 (whose output sequence the
// C++ standard fixes) through hand-written transforms: integers by multiply-shift of the top
// 32 bits, uniforms from the top 53 bits, normals by Box-Muller. The std:: distributions are
// not used because their algorithms differ between standard libraries. Values are printed
// rounded (at most 2 decimals), so the last-bit differences that libm's log/cos/sqrt may show
// between platforms do not reach the file.

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <numbers>
#include <random>
#include <string>

namespace stepledger::examples {

/// Seed of the bundled examples/data/laptops.csv.
inline constexpr std::uint64_t kLaptopListingsSeed = 20261201;
/// Rows of the bundled examples/data/laptops.csv (and of laptops_month2.csv).
inline constexpr int kLaptopListingsRows = 2000;
/// Seed of the bundled examples/data/laptops_month2.csv (month 2).
inline constexpr std::uint64_t kLaptopListingsMonth2Seed = 20270101;
/// Further price fall per month of age for each month after the first (see SECOND MONTH).
inline constexpr double kAgeDriftPerMonth = 0.8;

/// The terms of the TRUE MODEL, named as the example plans name them (MakeLaptopPlan), in the
/// order of the model above. Any selection on these data should end with this set.
inline constexpr const char* kLaptopTrueTerms[] = {
    "age", "age^2", "battery", "memory", "log_storage", "screen", "cpu", "grade", "age:grade",
    "warranty"};
/// The TRUE MODEL in one line, for messages.
inline constexpr const char* kLaptopTrueModelLine =
    "resale_price = 120 - 6 age + 0.035 age^2 + 2.2 battery + 9 memory + 55 ln(storage) + "
    "8 screen + 0.03 cpu + grade (A +90, B +40) + age:grade (A -1, B -0.4) + 4 warranty + "
    "Normal(0, 35^2) noise";

class ListingRandom {
 public:
  explicit ListingRandom(std::uint64_t seed) : engine_(seed) {}
  /// Uniform in [0, 1) with 53 random bits.
  double Uniform() { return static_cast<double>(engine_() >> 11) * 0x1.0p-53; }
  /// Uniform integer in [0, count): multiply-shift of the top 32 bits (bias below 2^-32 * count).
  std::uint64_t Below(std::uint64_t count) { return ((engine_() >> 32) * count) >> 32; }
  /// Standard normal by Box-Muller (one value per call; the cosine branch only).
  double Normal() {
    const double u1 = 1.0 - Uniform();  // in (0, 1]: the log is finite
    const double u2 = Uniform();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
  }

 private:
  std::mt19937_64 engine_;
};

/// The CSV text (header, then rows lines ending in LF). month 1 is the TRUE MODEL; a later
/// month adds the drift documented under SECOND MONTH. A pure function of its arguments.
inline std::string MakeLaptopListings(int rows = kLaptopListingsRows,
                                      std::uint64_t seed = kLaptopListingsSeed, int month = 1) {
  static constexpr const char* kWeekdays[] = {"Mon", "Tue", "Wed", "Thu", "Fri", "Sat", "Sun"};
  static constexpr int kMemory[] = {4, 8, 16, 32};
  static constexpr int kStorage[] = {128, 256, 512, 1024};
  static constexpr double kScreen[] = {13.3, 14.0, 15.6, 17.3};
  static constexpr int kWarranty[] = {0, 3, 6, 12};

  ListingRandom random(seed);
  std::string text =
      "listing_id,age_months,battery_health_pct,memory_gb,storage_gb,screen_in,cpu_score,grade,"
      "warranty_months,listing_weekday,photo_count,seller_note_length,resale_price\n";
  char line[512];
  for (int row = 0; row < rows; ++row) {
    const int age_months = 6 + static_cast<int>(random.Below(67));  // 6..72
    double battery = 100.0 - 0.45 * age_months + 5.0 * random.Normal();
    battery = std::round(std::fmin(100.0, std::fmax(50.0, battery)));
    // Larger memory is likelier in newer machines.
    const std::uint64_t memory_draw = random.Below(100);
    const int memory_index = memory_draw < 15 ? 0 : memory_draw < 55 ? 1 : memory_draw < 88 ? 2 : 3;
    const int memory_gb = kMemory[memory_index];
    const int storage_gb = kStorage[std::min<std::uint64_t>(3, random.Below(3) + (memory_index >= 2 ? 1 : 0))];
    const double screen_in = kScreen[random.Below(4)];
    double cpu = 2500.0 + 900.0 * std::log2(static_cast<double>(memory_gb)) +
                 60.0 * (72 - age_months) + 900.0 * random.Normal();
    cpu = std::round(std::fmax(1500.0, cpu));
    const std::uint64_t grade_draw = random.Below(100);
    const char grade = grade_draw < 35 ? 'A' : grade_draw < 80 ? 'B' : 'C';
    const int warranty_months =
        kWarranty[std::min<std::uint64_t>(3, random.Below(3) + (grade == 'A' ? 1 : 0))];
    const char* weekday = kWeekdays[random.Below(7)];
    const int photo_count = 1 + static_cast<int>(random.Below(12));
    const int note_length = static_cast<int>(random.Below(601));

    const double grade_shift = grade == 'A' ? 90.0 - 1.0 * age_months
                               : grade == 'B' ? 40.0 - 0.4 * age_months
                                              : 0.0;
    const double price = 120.0 - 6.0 * age_months + 0.035 * age_months * age_months +
                         2.2 * battery + 9.0 * memory_gb + 55.0 * std::log(storage_gb) +
                         8.0 * screen_in + 0.030 * cpu + grade_shift + 4.0 * warranty_months +
                         35.0 * random.Normal() -
                         kAgeDriftPerMonth * (month - 1) * age_months;  // exactly 0 in month 1

    // Missing cells: drawn after the values so that they do not shift the other draws.
    const std::uint64_t missing_draw = random.Below(1000);
    const bool battery_missing = missing_draw < 10;
    const bool cpu_missing = missing_draw >= 10 && missing_draw < 20;
    const bool note_missing = missing_draw >= 20 && missing_draw < 40;
    char battery_text[16], cpu_text[16], note_text[16];
    std::snprintf(battery_text, sizeof battery_text, "%.0f", battery);
    std::snprintf(cpu_text, sizeof cpu_text, "%.0f", cpu);
    std::snprintf(note_text, sizeof note_text, "%d", note_length);

    std::snprintf(line, sizeof line, "LT-%06d,%d,%s,%d,%d,%.1f,%s,%c,%d,%s,%d,%s,%.2f\n",
                  month * 100000 + 1 + row, age_months, battery_missing ? "NA" : battery_text, memory_gb,
                  storage_gb, screen_in, cpu_missing ? "" : cpu_text, grade, warranty_months,
                  weekday, photo_count, note_missing ? (missing_draw % 2 ? "NA" : "") : note_text,
                  price);
    text += line;
  }
  return text;
}

/// A plan for these data (the text of examples/plans/METHOD_CRITERION.json): the TRUE MODEL's
/// terms (kLaptopTrueTerms) and three candidates with no signal (weekday, photos, note_length),
/// with the given method ("forward", "backward", "stepwise", "all-subsets", "none") and
/// criterion ("adj-r2", "aic", "aicc", "bic", "cp", "partial-f", "cv"). Other settings keep their
/// defaults (entry_p 0.05, exit_p 0.10, folds 10, seed 1, hierarchy on: age:grade may enter only
/// after age and grade).
inline std::string MakeLaptopPlan(const std::string& method = "stepwise",
                                  const std::string& criterion = "bic") {
  return "{\n"
         "  \"response\": \"resale_price\",\n"
         "  \"intercept\": true,\n"
         "  \"terms\": [\n"
         "    {\"name\": \"age\",         \"column\": \"age_months\"},\n"
         "    {\"name\": \"age^2\",       \"power\": {\"column\": \"age_months\", \"degree\": 2}},\n"
         "    {\"name\": \"battery\",     \"column\": \"battery_health_pct\"},\n"
         "    {\"name\": \"memory\",      \"column\": \"memory_gb\"},\n"
         "    {\"name\": \"log_storage\", \"log\": \"storage_gb\"},\n"
         "    {\"name\": \"screen\",      \"column\": \"screen_in\"},\n"
         "    {\"name\": \"cpu\",         \"column\": \"cpu_score\"},\n"
         "    {\"name\": \"grade\",       \"categorical\": \"grade\", \"baseline\": \"C\"},\n"
         "    {\"name\": \"age:grade\",   \"product\": [\"age\", \"grade\"]},\n"
         "    {\"name\": \"warranty\",    \"column\": \"warranty_months\"},\n"
         "    {\"name\": \"weekday\",     \"categorical\": \"listing_weekday\", \"baseline\": \"Mon\"},\n"
         "    {\"name\": \"photos\",      \"column\": \"photo_count\"},\n"
         "    {\"name\": \"note_length\", \"column\": \"seller_note_length\"}\n"
         "  ],\n"
         "  \"method\": \"" + method + "\",\n"
         "  \"criterion\": \"" + criterion + "\"\n"
         "}\n";
}

/// Rows to price with a model of these data (the text of examples/data/laptops_to_price.csv):
/// the data's columns without resale_price. TP-001..TP-004 are ordinary listings and must get
/// no flag (TP-003's empty seller_note_length is a column no model of the TRUE MODEL's terms
/// reads). Each other row is built to trip one flag of `stepledger predict`:
///   TP-005 outside-range         age_months 120 (the data span 6..72 months)
///   TP-006 hidden-extrapolation  every column inside its range, but the oldest age with full
///                                battery, the least memory and a top processor score: its
///                                leverage under the TRUE MODEL's terms fitted on laptops.csv
///                                is 0.074, 3.9 times the largest fitted leverage (0.019)
///   TP-007 unknown-level         grade "D" (the data have A, B, C)
///   TP-008 missing               battery_health_pct "NA"
///   TP-009 invalid-value         storage_gb 0 (log_storage needs a value > 0)
inline std::string MakeLaptopsToPrice() {
  return "listing_id,age_months,battery_health_pct,memory_gb,storage_gb,screen_in,cpu_score,grade,"
         "warranty_months,listing_weekday,photo_count,seller_note_length\n"
         "TP-001,24,88,16,512,14.0,8200,A,6,Tue,6,120\n"
         "TP-002,40,80,8,256,15.6,6000,B,3,Wed,4,75\n"
         "TP-003,60,70,8,256,15.6,4500,C,0,Fri,2,\n"
         "TP-004,12,95,32,1024,13.3,11000,A,12,Sat,9,310\n"
         "TP-005,120,60,8,256,15.6,3500,C,0,Mon,3,40\n"
         "TP-006,72,100,4,128,13.3,12600,A,12,Thu,5,200\n"
         "TP-007,30,85,16,512,14.0,8000,D,3,Sun,7,90\n"
         "TP-008,36,NA,8,256,15.6,6500,B,3,Tue,5,60\n"
         "TP-009,24,88,16,0,14.0,8200,A,6,Wed,6,150\n";
}

}  // namespace stepledger::examples
