#pragma once
// A data set: the data of a run given as one file, several files, or one folder, and read as one
// table (the files one after the other, in a fixed order). This header decides which files a set
// holds and in what order, and how its fingerprint is taken; engine/table_scan.h reads them.
//
// Which files. The inputs are either files (read in the order given) or exactly one folder. A
// folder's members are the entries directly in it (no subfolders are searched) whose names end
// in .csv, .csv.gz, .csv.zst, .tsv, .tsv.gz or .tsv.zst (any case), in byte order of their names
// (memcmp, as `LC_ALL=C ls` sorts). Names that begin with "." (hidden files, editors' locks) are
// not members. Any other entry — a file with another ending, a subfolder, a FIFO or device — is
// an error that names it: a data folder holds the data alone, so that nothing is left out
// silently. A folder with no member, a missing input, a folder among files, and one file given
// twice (the same device and inode) are errors too. The name's ending only chooses members: how a
// member is stored (plain, gzip, zstd) is told by its first bytes (engine/byte_source.h), and
// every member is read with the one --delimiter.
//
// Reading. Every member must start with the same header as the first (the first difference is an
// error naming both files and the column). A member of zero bytes is an error naming it; one
// with a header and no records adds no rows. Record indices (folds, holdouts, bootstrap draws)
// count across the whole set in reading order, as in one file holding every member's records;
// line numbers in messages are the member's own and name the member.
//
// Fingerprint. One file: its own fingerprint (engine/fingerprint.h), unchanged. Several files:
//
//   set fingerprint = SHA-256( fp_1 "\n" fp_2 "\n" ... fp_n "\n" )
//
// where fp_i is the fingerprint of member i alone as 64 lower-case hex digits, in reading order:
// every member's bytes count, and so does their order; the names do not (the audit lists each
// member's name, size and fingerprint beside it). Each member's fingerprint is over its own
// 1 MiB blocks, so readers of whole files or of block-aligned byte ranges of files (threads, MPI
// ranks) all arrive at it.

#include <cstdint>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

namespace stepledger {

class ColumnSource;  // engine/column_source.h

/// The inputs of a data set as given (command line or API); converts implicitly from one path,
/// so that every single-file call reads as before.
struct DataSet {
  DataSet() = default;
  DataSet(std::filesystem::path path) : inputs{std::move(path)} {}  // NOLINT: one file or folder
  DataSet(const std::string& path) : inputs{path} {}                // NOLINT
  DataSet(const char* path) : inputs{path} {}                       // NOLINT
  explicit DataSet(std::vector<std::filesystem::path> paths) : inputs(std::move(paths)) {}

  /// Columns held in memory (engine/column_source.h) instead of files: then inputs is empty,
  /// the scan reads the columns, and the set has no files (DataSetFiles refuses it).
  explicit DataSet(std::shared_ptr<ColumnSource> in_memory) : columns(std::move(in_memory)) {}

  /// Files in reading order, or one folder.
  std::vector<std::filesystem::path> inputs;
  /// Data in memory, or null.
  std::shared_ptr<ColumnSource> columns;
};

/// Which files a folder may hold as members (name endings, compared in any case).
inline constexpr const char* kDataSetFileEndings[] = {".csv", ".csv.gz", ".csv.zst",
                                                       ".tsv", ".tsv.gz", ".tsv.zst"};

/// The members of a data set in reading order (see above), as paths to open. Throws InputError
/// naming the input: no input, a missing input, a folder among several inputs, a stray entry of a
/// folder, a folder without members, a file given twice. Reads only folder listings and file
/// status, never a file's content. A FIFO or /dev/stdin given as a single input passes.
std::vector<std::filesystem::path> DataSetFiles(const DataSet& data);

/// How people see a set in messages and output: one input as given; several files as their
/// names joined by ", " (up to three, then "and N more").
std::string DescribeDataSet(const DataSet& data);

/// What the audit's data.file records: the input's file name without its folder (a folder's own
/// name for a folder); several files by DescribeDataSet's rule over their file names.
std::string DataSetFileName(const DataSet& data);

/// The fingerprint of a set of several files from the members' fingerprints in reading order
/// (the formula above). A single fingerprint is returned as it is.
std::string CombineMemberFingerprints(const std::vector<std::string>& member_fingerprints);

/// How people see where a row is: "line 12" for one file; for a data set of several files (its
/// lines restart in every file) "line 12 of b.csv". set_files: the set's file names in reading
/// order (UsedRow::file indexes it), empty for one file.
std::string RowPlaceText(std::uint64_t line, std::size_t file, const std::vector<std::string>& set_files);

}  // namespace stepledger
