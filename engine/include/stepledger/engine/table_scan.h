#pragma once
// The first and only pass over a data file's text: it profiles every column, takes the data
// fingerprint over the bytes as stored, and (unless asked not to) writes the typed spill
// (engine/spill.h) that every later pass of the run reads instead of the text.
//
// Parallel reading. With threads > 1 and a plain regular file, the text after the header is cut
// into `threads` byte ranges at record boundaries and each thread parses, profiles and spills
// its own range; the profiles merge in range order. A cut is first placed just after the first
// line end at or after an even share of the bytes — a guess, since that line end may lie inside
// a quoted field. The guess is then checked exactly: the reader of the range before parses
// whole records from a known record start and reports where its last record ends; when that is
// not the guessed cut, the next range is read again from the true boundary (on the calling
// thread). So quoted fields with embedded line ends never corrupt a split, and the records,
// line numbers, row indices and messages are those of a single reader; only the guess can cost
// time. Errors are reported for the first range, in file order, that holds one, with lines
// counted from the file's start. Compressed files, pipes and FIFOs are read by one thread.
// The fingerprint's 1 MiB blocks (engine/fingerprint.h) are hashed by the same threads.
//
// Data sets. Several files or a folder (engine/data_set.h) are read file after file, each as
// above (its own byte ranges, its own fingerprint), into one profile and one spill whose ranges
// follow the files' order; nothing kept grows with the number of files but the list of files and
// their ranges. Every file must repeat the first file's header.

#include <cstdint>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/data_set.h"
#include "stepledger/engine/profile.h"
#include "stepledger/engine/share_exchange.h"
#include "stepledger/engine/spill.h"

namespace stepledger {

/// The resources a command gives to reading its data (the command line's --threads, --work-dir
/// and --limit); none changes a result beyond rounding (a limit can only refuse one).
struct DataReadOptions {
  /// Threads reading and folding (>= 1). Default 1.
  int threads = 1;
  /// Where the typed spill goes; empty: the system temporary folder.
  std::filesystem::path work_dir;
  /// How wide the data and how large the design may be (engine/limits.h).
  InputLimits limits;
};

struct ScanOptions {
  /// Delimiter, missing tokens and block size of the reader.
  CsvOptions csv;
  ProfileOptions profile;
  /// Threads reading byte ranges (>= 1). Default 1.
  int threads = 1;
  /// A range is at least this many bytes (so that a small file is not cut into many pieces);
  /// tests set 1 to cut tiny files. Default 1 MiB.
  std::uint64_t min_range_bytes = 1 << 20;
  /// Where to guess the cuts between ranges, as byte offsets (each cut moves to just after the
  /// first line end at or after it, then is checked as usual); empty: even shares of the bytes
  /// (threads - 1 cuts). Tests use it to cut a file at every possible place.
  std::vector<std::uint64_t> range_cuts;
  /// Write the typed spill. Default: yes; `profile` alone says no.
  bool spill = true;
  /// Where the spill's private folder is made; empty: the system temporary folder.
  std::filesystem::path work_dir;
  /// Several processes reading the data, each its share (a cluster run; null: this process reads
  /// everything). See "Shares" below.
  ShareExchange* shares = nullptr;
  /// Throws InputError naming the field when a value is out of range.
  void Validate() const;
};

// Shares. With ScanOptions::shares of K > 1 processes, every process calls ScanData at once.
// A plain regular file is cut into K x T byte ranges (T: the threads, fewer for a small file),
// process p reading ranges p T to (p + 1) T - 1 and the fingerprint blocks under them; a
// compressed file is read whole by process (file index mod K), a pipe or FIFO by process 0.
// The processes then exchange what each range holds (rows, line ends, where it stopped, its
// column tallies or its error) and every process checks the guessed cuts in file order as one
// process does: a range whose guessed start is not where the range before stopped is read again
// by its owner and its summary sent to all. Every process ends with the same profile, header,
// fingerprint and file list (the bits of one process's scan: the tallies merge in range order),
// and a spill holding its own ranges only, with the record indices and line counts of the whole
// data set; an error in any range reaches every process, the first in reading order.

/// One file of the data as read.
struct ScannedFile {
  std::filesystem::path path;
  std::uint64_t stored_bytes = 0;  ///< the file as stored
  std::string sha256;              ///< DataFingerprint of this file alone
  std::string encoding = "plain";  ///< plain, gzip, zstd
  std::uint64_t rows = 0;          ///< data records it holds
};

struct ScanResult {
  DataProfile profile;
  std::vector<std::string> header;
  /// The fingerprint of the data: of the file (DataFingerprint over its bytes as stored), or of
  /// the set (CombineMemberFingerprints over files[i].sha256).
  std::string sha256;
  std::uint64_t stored_bytes = 0;  ///< every file's bytes as stored
  std::string encoding = "plain";  ///< how the files are stored: plain, gzip, zstd, or "mixed"
  int ranges = 1;              ///< byte ranges read (in parallel within a file), over all files
  /// The files in reading order (one for a single file; none for data in memory).
  std::vector<ScannedFile> files;
  /// The data were columns in memory (DataSet::columns): sha256 is the fingerprint of their
  /// canonical binary form and stored_bytes its length (engine/column_source.h).
  bool in_memory = false;
  /// The rows, for every later pass; null when ScanOptions::spill is false.
  std::shared_ptr<const Spill> spill;
};

/// Reads the file, or every file of the set in order, once (see above). Throws InputError naming
/// file:line:column for any cell that parses as a non-finite number and for the reader's errors,
/// naming both files for a header that differs from the first file's, naming the input for a set
/// that cannot be formed (DataSetFiles), and naming the folder for a spill that cannot be
/// written; nothing is left in the working folder then.
/// Data in memory (DataSet::columns) are read by the columns' own rules (engine/column_source.h)
/// on the calling thread, into the same profile and spill; a message names the cell as
/// "memory:ROW:COLUMN".
ScanResult ScanData(const DataSet& data, const ScanOptions& options);

}  // namespace stepledger
