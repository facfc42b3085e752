// The cost of one level of the reduction tree of a cluster run (run/src/shared_run.h): a factor
// of m design columns written to bytes, read back and merged into another (WriteFactor,
// ReadFactor, MergeFactors), for m = 50, 200, 800. A run of K processes has ceil(log2 K) levels
// on its critical path; the table gives that product for K = 2, 3, 4 and 64. Moving the bytes
// between processes is not in it (bench/mpi_bench.sh reports the whole run under mpirun).
//
//   reduce_bench [REPEAT]       prints one Markdown table (REPEAT merges per size, default 5)

#include <chrono>
#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <random>
#include <string>
#include <vector>

#include "stepledger/engine/factor.h"
#include "stepledger/engine/share_exchange.h"

namespace {

stepledger::Factor RandomFactor(std::size_t columns, std::uint64_t seed) {
  std::vector<double> scales(columns + 1, 1.0);
  stepledger::FactorBuilder builder(scales);
  std::mt19937_64 random(seed);
  std::normal_distribution<double> normal;
  std::vector<double> x(columns);
  for (std::size_t row = 0; row < columns + 64; ++row) {
    for (double& value : x) value = normal(random);
    builder.AddRow(x, normal(random), 1.0);
  }
  return builder.Finish();
}

int Levels(int processes) { return static_cast<int>(std::ceil(std::log2(static_cast<double>(processes)))); }

}  // namespace

int main(int argc, char** argv) {
  const int repeat = argc > 1 ? std::max(1, std::atoi(argv[1])) : 5;
  std::printf("| m (design columns) | factor bytes | one tree level (write + read + merge) | 2 ranks | 3 ranks | 4 ranks | 64 ranks |\n");
  std::printf("| ---: | ---: | ---: | ---: | ---: | ---: | ---: |\n");
  for (std::size_t columns : {50u, 200u, 800u}) {
    const stepledger::Factor a = RandomFactor(columns, 1);
    const stepledger::Factor b = RandomFactor(columns, 2);
    double best = 1e300;
    std::size_t bytes = 0;
    for (int r = 0; r < repeat; ++r) {
      const auto start = std::chrono::steady_clock::now();
      stepledger::ByteWriter out;
      stepledger::WriteFactor(out, b);
      bytes = out.bytes().size();
      stepledger::ByteReader in(out.bytes());
      const stepledger::Factor back = stepledger::ReadFactor(in);
      const stepledger::Factor merged = stepledger::MergeFactors(a, back);
      const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      if (merged.rows != a.rows + b.rows) return 1;
      best = std::min(best, seconds);
    }
    const double ms = best * 1e3;
    std::printf("| %zu | %.2f MB | %.2f ms | %.2f ms | %.2f ms | %.2f ms | %.2f ms |\n", columns, bytes / 1e6, ms,
                ms * Levels(2), ms * Levels(3), ms * Levels(4), ms * Levels(64));
  }
  return 0;
}
