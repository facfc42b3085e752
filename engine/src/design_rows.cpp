// The design applied to rows: the cells a row is read from, the row expanded into design
// values, and the design's small queries. Kept apart from design.cpp, which builds the design
// from a plan and a profile once; this code runs on every row.
#include "stepledger/engine/design.h"

#include <algorithm>
#include <cmath>
#include <span>
#include <string>
#include <vector>

#include "design_expand.h"
#include "design_quote.h"
#include "stepledger/engine/errors.h"

namespace stepledger {
namespace {

using design_detail::Quote;
using design_detail::QuotePath;

}  // namespace

std::size_t Design::FindTerm(std::string_view name) const {
  for (std::size_t i = 0; i < terms.size(); ++i) {
    if (terms[i].name == name) return i;
  }
  return kNoTerm;
}

std::vector<std::size_t> Design::TermColumns(std::size_t term) const {
  std::vector<std::size_t> indices;
  if (term >= terms.size()) return indices;
  for (std::size_t c = 0; c < terms[term].column_count; ++c) {
    indices.push_back(terms[term].first_column + c);
  }
  return indices;
}

std::vector<double> Design::scales() const {
  std::vector<double> result;
  result.reserve(columns.size() + 1);
  for (const auto& column : columns) result.push_back(column.scale);
  result.push_back(response_scale);
  return result;
}

void Design::CheckHeader(const CsvReader& reader) const {
  CheckHeader(reader.header(), reader.path().string());
}

void Design::CheckHeader(const std::vector<std::string>& header, const std::string& file_name) const {
  for (const auto& cell : source.cells) {
    const auto at = std::find(header.begin(), header.end(), cell.column_name);
    const std::ptrdiff_t found = at == header.end() ? -1 : at - header.begin();
    if (found != cell.header_index) {
      const std::string now = found < 0 ? std::string("is missing from the header")
                                        : "is now column " + std::to_string(found + 1);
      throw InputError(file_name + ": column " + Quote(cell.column_name) + " " + now +
                       ", but it was column " + std::to_string(cell.header_index + 1) +
                       " when the design was built from " + QuotePath(source.file_name) +
                       "; the data changed since they were profiled");
    }
  }
}

bool Design::HasLowOrderParts() const {
  return std::any_of(terms.begin(), terms.end(),
                     [](const DesignTerm& term) { return term.kind == TermKind::kPower; });
}

namespace {

// The cells of one CSV record, for design_detail::ExpandRow.
class RecordCells {
 public:
  RecordCells(const Design& design, const CsvReader& reader, const CsvRecord& record)
      : design_(design), reader_(reader), record_(record) {}
  const CsvField& Field(std::size_t cell) const {
    return record_.fields[static_cast<std::size_t>(design_.source.cells[cell].header_index)];
  }
  CellKind Classify(std::size_t cell, double& value) const {
    return ClassifyCell(Field(cell).text, reader_.options().missing_tokens, value);
  }
  bool Level(std::size_t cell, std::size_t& offset) const {
    const auto& levels = design_.source.level_index[design_.source.cells[cell].term];
    const auto level = levels.find(Field(cell).text);
    if (level == levels.end()) return false;
    offset = level->second;
    return true;
  }
  template <typename Detail>
  [[noreturn]] void Fail(std::size_t cell, const Detail& detail) const {
    const CsvField& field = Field(cell);
    reader_.Fail(field.line, field.column, detail(field.text));
  }
  std::uint64_t RowIndex() const { return record_.row_index; }

 private:
  const Design& design_;
  const CsvReader& reader_;
  const CsvRecord& record_;
};

}  // namespace

RowOutcome Design::Expand(const CsvReader& reader, const CsvRecord& record, std::span<double> x,
                          double& y, double& w, std::span<double> x_low) const {
  RecordCells cells(*this, reader, record);
  return design_detail::ExpandRow(*this, cells, x, y, w, x_low);
}

std::size_t Design::EvaluateTerms(std::span<const double> cell_values,
                                  std::span<const std::size_t> cell_levels, std::span<double> x,
                                  std::span<double> x_low) const {
  if (!x_low.empty()) std::fill(x_low.begin(), x_low.end(), 0.0);
  if (intercept) x[0] = 1.0;
  for (const std::size_t t : source.evaluation_order) {
    const DesignTerm& term = terms[t];
    double* out = x.data() + term.first_column;
    const std::ptrdiff_t cell = source.term_cell[t];
    switch (term.kind) {
      case TermKind::kNumeric:
        out[0] = cell_values[static_cast<std::size_t>(cell)];
        break;
      case TermKind::kPower: {
        // Repeated products in long double, rounded once to double.
        const long double base = cell_values[static_cast<std::size_t>(cell)];
        long double power = base;
        for (int d = 1; d < term.degree; ++d) power *= base;
        out[0] = static_cast<double>(power);
        if (!x_low.empty()) {
          x_low[term.first_column] = static_cast<double>(power - static_cast<long double>(out[0]));
        }
        break;
      }
      case TermKind::kLog: {
        const double value = cell_values[static_cast<std::size_t>(cell)];
        if (!(value > 0)) return t;
        out[0] = std::log(value);
        break;
      }
      case TermKind::kCategorical: {
        std::fill(out, out + term.column_count, 0.0);
        const std::size_t offset = cell_levels[static_cast<std::size_t>(cell)];
        if (offset != kNoTerm) out[offset] = 1.0;
        break;
      }
      case TermKind::kProduct: {
        const DesignTerm& first = terms[term.parts[0]];
        const DesignTerm& second = terms[term.parts[1]];
        const double* a = x.data() + first.first_column;
        const double* b = x.data() + second.first_column;
        for (std::size_t i = 0; i < first.column_count; ++i) {
          for (std::size_t j = 0; j < second.column_count; ++j) {
            out[i * second.column_count + j] = a[i] * b[j];
          }
        }
        break;
      }
    }
  }
  return kNoTerm;
}

}  // namespace stepledger
