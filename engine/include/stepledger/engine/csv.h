#pragma once
// Streaming CSV reader: reads the file in fixed-size blocks, never the whole file.
// Accepts a header row, a configurable delimiter, quoted fields (embedded delimiters,
// doubled quotes, newlines), CRLF or LF line ends and a UTF-8 byte-order mark.
// Every error is an InputError naming file:line:column and the offending text.

#include <cstdint>
#include <filesystem>
#include <fstream>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/limits.h"

namespace stepledger {

/// Options of reading a CSV file.
struct CsvOptions {
  /// Field separator; one byte, not a quote, CR or LF. Default: comma.
  char delimiter = ',';
  /// Cell texts (after unquoting) that mean "missing". Default: empty and "NA".
  std::vector<std::string> missing_tokens = {"", "NA"};
  /// Bytes read from the file at a time; memory of the reader is O(this + longest record).
  std::size_t block_bytes = 1 << 20;
  /// Most columns a header may have (InputLimits::columns, >= 1): a wider header is refused with
  /// a LimitError naming the place where field max_columns + 1 starts, while the header is read,
  /// before its names are held. Default 10,000.
  std::uint64_t max_columns = InputLimits{}.columns;

  /// Throws InputError naming the field when an option is out of range.
  void Validate() const;
};

/// One field of a record. text stays valid until the next call of CsvReader::Next.
struct CsvField {
  std::string_view text;    ///< unquoted, with doubled quotes collapsed
  std::uint64_t line = 0;   ///< 1-based line on which the field starts
  std::uint64_t column = 0; ///< 1-based byte column at which the field starts
  bool quoted = false;
};

/// One data record (the header is not one).
struct CsvRecord {
  std::uint64_t line = 0;        ///< 1-based line on which the record starts
  std::uint64_t row_index = 0;   ///< 0-based index among data records
  std::uint64_t offset = 0;      ///< byte offset of the record's first byte in the (decoded) text
  std::vector<CsvField> fields;  ///< exactly header().size() of them
};

/// A part of a file read by one of several readers (parallel reading): the records that start
/// at or after `begin` and before `end`. begin must be the start of a record (the caller finds
/// candidates after a line end and checks them, see engine/table_scan.h); a record that starts
/// before end is read whole even when it runs past end. Lines, columns and row indices count
/// from the range's start (line 1, row 0): the caller adds the lines and rows before it.
struct CsvRange {
  std::uint64_t begin = 0;
  std::uint64_t end = UINT64_MAX;
  std::vector<std::string> header;  ///< the file's header, read once by the caller
};

/// How a cell parses as a number.
enum class CellKind { kNumber, kMissing, kText, kNonFinite };

/// Classifies a cell: missing token, finite number (std::from_chars, whole text, optional
/// leading '+'; surrounding spaces are not allowed), non-finite number ("nan", "inf", ...) or text.
CellKind ClassifyCell(std::string_view text, const std::vector<std::string>& missing_tokens,
                      double& value);

/// Index of `name` in a header (the first match), or -1.
std::ptrdiff_t HeaderIndex(const std::vector<std::string>& header, std::string_view name);

/// Line and column numbers: lines are 1-based and count every LF, including LFs inside
/// quoted fields. Columns are 1-based byte offsets from the start of the line (not
/// characters); a UTF-8 byte-order mark at the start of the file is skipped and not counted,
/// so the first header field is at 1:1 with or without one.
class CsvReader {
 public:
  /// Opens the file and reads the header. Throws InputError on an unreadable file,
  /// an empty file, and duplicate or empty header names, and LimitError on a header of more
  /// than CsvOptions::max_columns fields.
  CsvReader(std::filesystem::path path, CsvOptions options = {});
  /// A reader of bytes supplied by `read` (returns the bytes written into the buffer, 0 at the
  /// end; throws InputError on failure), e.g. a decompressing source; the header is read here.
  using ReadFunction = std::function<std::size_t(char* buffer, std::size_t capacity)>;
  CsvReader(std::filesystem::path path, ReadFunction read, CsvOptions options = {});
  /// A reader of one range of a seekable file open as `fd` (read with pread, so that readers of
  /// other ranges share the descriptor); the header is range.header and is not read again.
  CsvReader(std::filesystem::path path, int fd, CsvRange range, CsvOptions options = {});
  CsvReader(CsvReader&&) noexcept = default;
  CsvReader& operator=(CsvReader&&) noexcept = default;

  const std::filesystem::path& path() const { return path_; }
  const CsvOptions& options() const { return options_; }
  const std::vector<std::string>& header() const { return header_; }
  /// Index of a header name, or -1.
  std::ptrdiff_t ColumnIndex(std::string_view name) const;

  /// Reads the next data record; false at end of file. Lines that are entirely empty
  /// at the end of the file are not records (an empty line elsewhere is a record of one
  /// empty field, hence a ragged row unless the header has one column). Throws InputError on
  /// a ragged row (naming the expected and found field counts), an unterminated quote (naming
  /// where it opened), a quote inside an unquoted field or text after a closing quote.
  /// Cost: O(bytes of the record); no heap allocation once the buffers have grown, except for
  /// quoted fields holding doubled quotes (collapsed into storage owned by the reader).
  bool Next(CsvRecord& record);

  /// Bytes of the file parsed so far (through the last record returned, BOM included);
  /// equals the file size once Next() has returned false. For a range reader, the offset in
  /// the file: once Next() has returned false, where the first record after the range starts
  /// (or the file's end).
  std::uint64_t bytes_read() const { return bytes_read_; }
  /// Line ends consumed so far (header included for a whole-file reader).
  std::uint64_t line_ends_read() const { return line_ - 1; }

  /// Called with every block of raw bytes as it is read, in file order, including the header.
  /// Set it before the first Next() to see every byte (the constructor reads the header, so the
  /// reader replays the bytes already read to a newly set observer). Used for data fingerprints.
  /// Throws std::logic_error when called after the first Next() (bytes would be missed).
  void SetByteObserver(std::function<void(std::string_view)> observer);

  /// file:line:column of a field, for messages.
  std::string Where(const CsvField& field) const;
  /// The file's name as messages show it.
  const std::string& display_name() const { return display_name_; }
  /// Throws LocatedInputError "file:line:column: what".
  [[noreturn]] void Fail(std::uint64_t line, std::uint64_t column, const std::string& what) const;

 private:
  // Owns a POSIX file descriptor (read(2) straight into our buffer, no stream copies).
  class FileHandle {
   public:
    FileHandle() = default;
    explicit FileHandle(int fd) : fd_(fd) {}
    FileHandle(FileHandle&& other) noexcept : fd_(other.fd_) { other.fd_ = -1; }
    FileHandle& operator=(FileHandle&& other) noexcept;
    FileHandle(const FileHandle&) = delete;
    FileHandle& operator=(const FileHandle&) = delete;
    ~FileHandle();
    int get() const { return fd_; }

   private:
    int fd_ = -1;
  };
  // A field whose text lives in record_storage_; its view is made once the record is
  // complete, because appending to the storage may move it.
  struct StoredText {
    std::size_t field_index;
    std::size_t offset;
    std::size_t length;
  };

  // Reads more bytes (at least one block, and at least as many as are pending so that
  // re-parsing a long record costs amortised O(its length)); sets eof_ at end of file.
  void ReadMore();
  // Parses one record starting at cursor_ into fields. Returns false when the buffer ends
  // before the record does and the file has more bytes (nothing is consumed then).
  bool TryParseRecord(std::vector<CsvField>& fields, std::uint64_t& start_line);
  bool TryParseQuoted(std::vector<CsvField>& fields, std::uint64_t& start_line);
  // Parses the next record, reading as needed; false at end of file.
  bool ReadRecord(std::vector<CsvField>& fields, std::uint64_t& start_line);
  // True when only CR and LF bytes remain in the file.
  bool OnlyLineBreaksRemain();
  std::uint64_t ColumnAt(const char* position, std::uint64_t line_start) const;
  void ReadHeader();
  // Reads until the header's line end is in the buffer, counting its fields as bytes arrive.
  void CheckHeaderWidth();

  std::filesystem::path path_;
  std::string display_name_;
  CsvOptions options_;
  FileHandle file_;
  ReadFunction read_;                  // where bytes come from (set by every constructor)
  std::uint64_t range_end_ = UINT64_MAX;  // records starting here or later are not ours
  std::vector<std::string> header_;
  std::string buffer_;        // bytes not yet consumed start at cursor_
  std::size_t cursor_ = 0;
  std::string record_storage_;  // collapsed texts of quoted fields of the current record
  std::vector<StoredText> stored_texts_;
  bool eof_ = false;
  bool next_called_ = false;
  std::uint64_t line_ = 1;
  std::uint64_t line_start_offset_ = 0;  // absolute offset of current line start
  std::uint64_t buffer_offset_ = 0;      // absolute offset of buffer_[0]
  std::uint64_t bytes_read_ = 0;
  std::uint64_t next_row_index_ = 0;
  std::string header_bytes_;             // raw bytes read before an observer was set
  std::function<void(std::string_view)> observer_;
};

/// When a header was read as a single column whose name holds a tab, ';' or '|', the file is most
/// likely separated by that character rather than the delimiter in use: the hint to add to a
/// message ("the header was read as a single column '...'; if the fields are separated by tabs,
/// add --delimiter tab"). nullopt otherwise.
std::optional<std::string> SeparatorHint(std::size_t column_count, std::string_view first_name);

}  // namespace stepledger
