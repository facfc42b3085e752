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
/// Rows of the bundled examples/data/laptops.csv.
inline constexpr int kLaptopListingsRows = 2000;

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

/// The CSV text (header, then rows lines ending in LF).
inline std::string MakeLaptopListings(int rows = kLaptopListingsRows,
                                      std::uint64_t seed = kLaptopListingsSeed) {
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
                         35.0 * random.Normal();

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
                  100001 + row, age_months, battery_missing ? "NA" : battery_text, memory_gb,
                  storage_gb, screen_in, cpu_missing ? "" : cpu_text, grade, warranty_months,
                  weekday, photo_count, note_missing ? (missing_draw % 2 ? "NA" : "") : note_text,
                  price);
    text += line;
  }
  return text;
}

}  // namespace stepledger::examples
