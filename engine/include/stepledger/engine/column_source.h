#pragma once
// Data held in memory by the caller (a data frame of the Python module, or any program's
// columns), read as a data set without a text round trip: the scan (engine/table_scan.h) reads
// the columns in chunks of rows, profiles them with the rules of a CSV file, fingerprints their
// canonical binary form and writes the same typed spill (engine/spill.h) every later pass reads.
// Nothing the scan keeps grows with the rows: a chunk's cells at a time.
//
// Column kinds. A number column holds doubles: NaN is missing, ±infinity is refused (as a CSV
// cell "inf" is). A text column holds strings (UTF-8, no NUL byte) or missing cells; it is always
// categorical, even when a text looks like a number. A number column keeps its distinct values as
// levels (their shortest round-trip text, "16" for 16.0) while they are few, as a numeric CSV
// column keeps its texts, so that it can be a categorical term.
//
// Canonical binary form and fingerprint (README "Data in memory"; tested against Python's
// hashlib computing it independently):
//
//   column digest d_c = SHA-256 over the column's cells in row order, each cell
//       number column: the value as 8 bytes IEEE 754 little-endian; a missing cell (any NaN) as
//                      the bytes of the quiet NaN 0x7FF8000000000000;
//       text column:   u64 little-endian byte length, then the UTF-8 bytes; a missing cell as the
//                      length 0xFFFFFFFFFFFFFFFF and no bytes;
//   fingerprint = SHA-256( "stepledger-columns-1\n" | u64 rows | u64 columns |
//                          for each column: u64 name length | name bytes | kind byte
//                          ('n' number, 't' text) | d_c (32 raw bytes) )
//
// with every u64 little-endian. Names, kinds, order and every value count; nothing else does.
// Messages name a cell as "<description>:ROW:COLUMN" with 1-based row and column numbers.

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

namespace stepledger {

enum class MemoryColumnKind { kNumber, kText };

struct MemoryColumn {
  std::string name;
  MemoryColumnKind kind = MemoryColumnKind::kNumber;
};

/// The fixed first bytes of the canonical form (above).
inline constexpr std::string_view kColumnFingerprintTag = "stepledger-columns-1\n";
/// The bits a missing number is hashed as (a quiet NaN).
inline constexpr std::uint64_t kCanonicalMissingBits = 0x7FF8000000000000ULL;
/// The length a missing text is hashed as.
inline constexpr std::uint64_t kCanonicalMissingText = 0xFFFFFFFFFFFFFFFFULL;

/// Columns in memory, read again for every scan (a replay by verify scans them once more). The
/// reads come from the thread that called ScanData, in row order, a chunk at a time.
class ColumnSource {
 public:
  virtual ~ColumnSource() = default;
  /// The columns in order (their names are the header).
  virtual const std::vector<MemoryColumn>& columns() const = 0;
  virtual std::uint64_t rows() const = 0;
  /// Number column `column`, rows [first, first + count) into out[0..count): NaN for missing.
  virtual void ReadNumbers(std::size_t column, std::uint64_t first, std::size_t count, double* out) = 0;
  /// Text column `column`, rows [first, first + count): texts[i] and missing[i] (1: missing).
  virtual void ReadTexts(std::size_t column, std::uint64_t first, std::size_t count,
                         std::vector<std::string>& texts, std::vector<char>& missing) = 0;
  /// Called after each chunk with the rows read so far (a caller can report progress or stop the
  /// scan by throwing; the scan then removes its spill).
  virtual void OnRowsRead(std::uint64_t /*rows_done*/, std::uint64_t /*rows_total*/) {}
  /// How messages and the audit name the data. Default "memory".
  virtual std::string description() const { return "memory"; }
};

}  // namespace stepledger
