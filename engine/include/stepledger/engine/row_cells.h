#pragma once
// The cells of one row as pricing reads them (engine/prediction.h), whatever holds the rows: a
// record of a CSV file (CsvRowCells) or columns held in memory (ColumnRows, over a ColumnSource,
// engine/column_source.h). The prediction's row evaluator reads every row through RowCells, so
// that a file and a data frame are priced by the same code; `rerun` compares the old model's
// prices on new rows the same way.
//
// A cell is classified once, by its source's rules:
//   CSV field      ClassifyCell (engine/csv.h) with the reader's missing tokens; its text is
//                  the field as written.
//   number column  NaN is missing; ±infinity is kNonFinite; any other value is kNumber, and its
//                  text is the shortest text that reads back as the same double ("16" for
//                  16.0), the level text the scan of columns keeps for a number column, so that
//                  a number column can be a categorical term.
//   text column    a missing cell is missing; any other is kText, even when it looks like a
//                  number (engine/column_source.h: a text column is always categorical).
// Places: a CSV field's 1-based line and byte column; a column's 1-based row and column number
// (the "memory:ROW:COLUMN" of messages about columns).

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/csv.h"

namespace stepledger {

class ColumnSource;  // engine/column_source.h

/// Where a cell of a record is (as CsvField: 1-based line and byte column; for columns in memory
/// the 1-based row and column).
struct CellPlace {
  std::uint64_t line = 0;
  std::uint64_t column = 0;
};

/// One cell, classified.
struct RowCell {
  CellKind kind = CellKind::kMissing;
  double number = 0;      ///< kNumber: the value
  std::string_view text;  ///< the cell as text (above); empty when missing. Valid until the next Cell call
  CellPlace place;
};

/// The current row of some rows, one cell at a time by header index.
class RowCells {
 public:
  virtual ~RowCells() = default;
  virtual std::uint64_t row_index() const = 0;  ///< 0-based data record index
  virtual std::uint64_t line() const = 0;       ///< 1-based line of the record (columns: its row)
  /// Cell `column` (an index into the header) of the current row.
  virtual RowCell Cell(std::size_t column) const = 0;
};

/// A CSV record as RowCells (the reader gives the missing tokens).
class CsvRowCells final : public RowCells {
 public:
  CsvRowCells(const CsvReader& reader, const CsvRecord& record) : reader_(reader), record_(record) {}
  std::uint64_t row_index() const override { return record_.row_index; }
  std::uint64_t line() const override { return record_.line; }
  RowCell Cell(std::size_t column) const override;

 private:
  const CsvReader& reader_;
  const CsvRecord& record_;
};

/// The rows of a ColumnSource one at a time, a chunk of rows at a time (kChunkRows): a column's
/// chunk is read on the first Cell of a chunk's row that asks for it, so that columns no cell
/// asks for are never read. Memory: one chunk of each column read, whatever the rows. The
/// source's OnRowsRead is called before each chunk after the first (and after the last), so that
/// its owner can report progress or stop the reading by throwing. Use from one thread.
class ColumnRows final : public RowCells {
 public:
  static constexpr std::size_t kChunkRows = 4096;
  explicit ColumnRows(ColumnSource& source);
  ~ColumnRows() override;

  /// The column names (the source's), in order.
  const std::vector<std::string>& header() const { return header_; }
  std::ptrdiff_t ColumnIndex(std::string_view name) const;
  /// How messages name the rows (the source's description, "memory").
  const std::string& display_name() const { return display_name_; }
  /// Moves to the next row; false after the last.
  bool Next();

  std::uint64_t row_index() const override { return row_; }
  std::uint64_t line() const override { return row_ + 1; }
  RowCell Cell(std::size_t column) const override;

 private:
  struct Chunk;
  ColumnSource& source_;
  std::vector<std::string> header_;
  std::string display_name_;
  std::uint64_t rows_ = 0;
  std::uint64_t row_ = 0;
  bool started_ = false;
  std::uint64_t chunk_first_ = 0;  ///< first row of the current chunk
  std::size_t chunk_count_ = 0;    ///< rows in the current chunk
  mutable std::vector<Chunk> chunks_;  ///< per column: its cells of the current chunk, when read
  mutable std::string text_;           ///< a number's text (Cell)
};

}  // namespace stepledger
