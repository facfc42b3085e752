#include "stepledger/engine/row_cells.h"

#include <algorithm>
#include <charconv>
#include <cmath>

#include "stepledger/engine/column_source.h"

namespace stepledger {

RowCell CsvRowCells::Cell(std::size_t column) const {
  const CsvField& field = record_.fields[column];
  RowCell cell;
  cell.kind = ClassifyCell(field.text, reader_.options().missing_tokens, cell.number);
  if (cell.kind != CellKind::kMissing) cell.text = field.text;
  cell.place = CellPlace{field.line, field.column};
  return cell;
}

struct ColumnRows::Chunk {
  bool read = false;
  std::vector<double> numbers;
  std::vector<std::string> texts;
  std::vector<char> missing;
};

ColumnRows::ColumnRows(ColumnSource& source)
    : source_(source), display_name_(source.description()), rows_(source.rows()) {
  for (const MemoryColumn& column : source.columns()) header_.push_back(column.name);
  chunks_.resize(header_.size());
}

ColumnRows::~ColumnRows() = default;

std::ptrdiff_t ColumnRows::ColumnIndex(std::string_view name) const { return HeaderIndex(header_, name); }

bool ColumnRows::Next() {
  const std::uint64_t next = started_ ? row_ + 1 : 0;
  if (next >= rows_) {
    if (started_ && row_ < rows_) source_.OnRowsRead(rows_, rows_);
    row_ = rows_;
    started_ = true;
    return false;
  }
  if (!started_ || next >= chunk_first_ + chunk_count_) {
    if (started_) source_.OnRowsRead(next, rows_);
    chunk_first_ = next;
    chunk_count_ = static_cast<std::size_t>(std::min<std::uint64_t>(kChunkRows, rows_ - next));
    for (Chunk& chunk : chunks_) chunk.read = false;
  }
  started_ = true;
  row_ = next;
  return true;
}

RowCell ColumnRows::Cell(std::size_t column) const {
  Chunk& chunk = chunks_.at(column);
  const bool number_column = source_.columns()[column].kind == MemoryColumnKind::kNumber;
  if (!chunk.read) {
    if (number_column) {
      chunk.numbers.resize(chunk_count_);
      source_.ReadNumbers(column, chunk_first_, chunk_count_, chunk.numbers.data());
    } else {
      chunk.texts.assign(chunk_count_, std::string());
      chunk.missing.assign(chunk_count_, 0);
      source_.ReadTexts(column, chunk_first_, chunk_count_, chunk.texts, chunk.missing);
    }
    chunk.read = true;
  }
  const auto i = static_cast<std::size_t>(row_ - chunk_first_);
  RowCell cell;
  cell.place = CellPlace{row_ + 1, column + 1};
  if (number_column) {
    const double value = chunk.numbers[i];
    if (std::isnan(value)) return cell;  // kMissing
    char text[32];
    const auto written = std::to_chars(text, text + sizeof text, value);
    text_.assign(text, static_cast<std::size_t>(written.ptr - text));
    cell.kind = std::isfinite(value) ? CellKind::kNumber : CellKind::kNonFinite;
    cell.number = value;
    cell.text = text_;
    return cell;
  }
  if (chunk.missing[i] != 0) return cell;
  cell.kind = CellKind::kText;
  cell.text = chunk.texts[i];
  return cell;
}

}  // namespace stepledger
