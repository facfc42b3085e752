// Writes the scale benchmark's data: a numeric CSV of a response y and 19 predictors x1..x19
// drawn from a known linear model with noise. Used by bench/scale_bench.sh.
//
//   scale_gen ROWS OUT.csv      writes ROWS data records (plus a header) to OUT.csv
//   scale_gen --truth           prints the true intercept and coefficients as JSON
//
// The model: x_j = j + 2 * z (z approximately standard normal, the sum of four uniforms
// centred and scaled), y = 5 + sum_j beta_j * x_j + 3 * z'. Predictors x1..x10 carry an
// effect, x11..x19 none, so a selection over the 19 terms has real work to do. Numbers have
// nine significant digits, so a record is about 220 bytes (10M rows ~ 2.2 GB). The generator
// (SplitMix64, fixed seed) and the arithmetic are deterministic: the same ROWS gives the same
// bytes on every machine, and the first N records of a bigger file equal a file of N records.

#include <cerrno>
#include <charconv>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <string>

namespace {

constexpr int kPredictors = 19;
constexpr std::uint64_t kSeed = 20261202;
constexpr double kIntercept = 5.0;
constexpr double kNoiseScale = 3.0;

// True coefficient of x_j (j = 1..19): alternating signs for x1..x10, zero for x11..x19.
double TrueBeta(int j) {
  if (j > 10) return 0.0;
  const double magnitude = 0.25 * j;
  return (j % 2 == 1) ? magnitude : -magnitude;
}

// SplitMix64: tiny, fast and fully specified, so the data does not depend on the standard
// library's distributions (whose algorithms are implementation-defined).
struct SplitMix64 {
  std::uint64_t state;
  std::uint64_t Next() {
    std::uint64_t z = (state += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
  }
  double Uniform() { return static_cast<double>(Next() >> 11) * 0x1.0p-53; }
  // Sum of four uniforms, centred, scaled to unit variance (each uniform has variance 1/12).
  double NearNormal() { return (Uniform() + Uniform() + Uniform() + Uniform() - 2.0) * 1.7320508075688772; }
};

void PrintTruth() {
  std::printf("{\"seed\": %llu, \"intercept\": %.17g, \"noise_sd\": %.17g, \"coefficients\": {",
              static_cast<unsigned long long>(kSeed), kIntercept, kNoiseScale);
  for (int j = 1; j <= kPredictors; ++j) {
    std::printf("%s\"x%d\": %.17g", j == 1 ? "" : ", ", j, TrueBeta(j));
  }
  std::printf("}}\n");
}

int Usage() {
  std::fprintf(stderr, "usage: scale_gen ROWS OUT.csv | scale_gen --truth\n");
  return 2;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc == 2 && std::strcmp(argv[1], "--truth") == 0) {
    PrintTruth();
    return 0;
  }
  if (argc != 3) return Usage();
  std::uint64_t rows = 0;
  const char* rows_text = argv[1];
  const auto parsed = std::from_chars(rows_text, rows_text + std::strlen(rows_text), rows);
  if (parsed.ec != std::errc() || *parsed.ptr != '\0' || rows == 0) {
    std::fprintf(stderr, "scale_gen: ROWS must be a positive whole number, got '%s'\n", rows_text);
    return 2;
  }
  const std::string path = argv[2];
  const std::string partial = path + ".partial";
  std::FILE* out = std::fopen(partial.c_str(), "wb");
  if (out == nullptr) {
    std::fprintf(stderr, "scale_gen: cannot write %s: %s\n", partial.c_str(), std::strerror(errno));
    return 2;
  }

  std::string buffer = "y";
  for (int j = 1; j <= kPredictors; ++j) buffer += ",x" + std::to_string(j);
  buffer += '\n';

  SplitMix64 random{kSeed};
  double x[kPredictors + 1];
  char number[40];
  auto append = [&](double value) {
    const auto result = std::to_chars(number, number + sizeof number, value, std::chars_format::general, 9);
    buffer.append(number, result.ptr);
  };
  bool ok = true;
  for (std::uint64_t row = 0; row < rows && ok; ++row) {
    double y = kIntercept;
    for (int j = 1; j <= kPredictors; ++j) {
      x[j] = j + 2.0 * random.NearNormal();
      y += TrueBeta(j) * x[j];
    }
    y += kNoiseScale * random.NearNormal();
    append(y);
    for (int j = 1; j <= kPredictors; ++j) {
      buffer += ',';
      append(x[j]);
    }
    buffer += '\n';
    if (buffer.size() >= (1u << 20)) {
      ok = std::fwrite(buffer.data(), 1, buffer.size(), out) == buffer.size();
      buffer.clear();
    }
  }
  if (ok && !buffer.empty()) ok = std::fwrite(buffer.data(), 1, buffer.size(), out) == buffer.size();
  ok = (std::fclose(out) == 0) && ok;
  // Nothing half-written: the file appears under its name only when complete.
  if (!ok || std::rename(partial.c_str(), path.c_str()) != 0) {
    std::fprintf(stderr, "scale_gen: writing %s failed: %s\n", path.c_str(), std::strerror(errno));
    std::remove(partial.c_str());
    return 3;
  }
  return 0;
}
