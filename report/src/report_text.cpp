// The text back end: the report model as terminal tables, for a quick look and for diffs.
// Charts are named with their caption; the numbers they draw are in the tables beside them.

#include <algorithm>
#include <sstream>

#include "report_internal.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {
namespace {

using namespace report_detail;

void Heading(std::ostringstream& out, const std::string& title) {
  out << "\n" << title << "\n" << std::string(std::max<std::size_t>(1, title.size()), '-') << "\n";
}

// Display width in code points (UTF-8 continuation bytes do not count), for alignment.
std::size_t DisplayWidth(std::string_view text) {
  std::size_t width = 0;
  for (const char character : text) width += (static_cast<unsigned char>(character) & 0xC0) != 0x80 ? 1 : 0;
  return width;
}

bool RightAligned(ValueKind kind) { return kind != ValueKind::kText; }

struct TextBlock {
  std::ostringstream& out;

  void operator()(const ReportParagraph& paragraph) const { out << "  " << paragraph.text << "\n"; }

  void operator()(const ReportList& list) const {
    for (const ReportList::Item& item : list.items) {
      if (list.style == "cautions") {
        out << "  ! " << (item.tag.empty() ? "" : "[" + item.tag + "] ") << item.text << "\n";
      } else {
        out << "  - " << item.text << "\n";
      }
    }
  }

  void operator()(const ReportFacts& facts) const {
    std::size_t width = 0;
    for (const ReportFact& fact : facts.facts) width = std::max(width, DisplayWidth(fact.label));
    for (const ReportFact& fact : facts.facts) {
      out << "  " << fact.label << ":" << std::string(width - DisplayWidth(fact.label) + 1, ' ') << fact.value.text
          << "\n";
    }
  }

  void operator()(const ReportTable& table) const {
    if (!table.caption.empty()) out << "  " << table.caption << ":\n";
    std::vector<std::string> headers;
    std::vector<bool> right;
    for (const ReportColumn& column : table.columns) {
      headers.push_back(column.heading);
      right.push_back(RightAligned(column.kind));
    }
    std::vector<std::vector<std::string>> rows;
    for (const auto& row : table.rows) {
      std::vector<std::string> cells;
      for (const ReportValue& value : row) cells.push_back(value.text);
      rows.push_back(std::move(cells));
    }
    out << TextTable(headers, rows, right, "    ");
    if (table.rows_not_listed > 0) {
      out << "    ... and " << FormatCount(static_cast<std::int64_t>(table.rows_not_listed)) << " more\n";
    }
  }

  void operator()(const ReportChart& chart) const {
    // A step's candidate chart draws the table that follows it: naming it would only repeat.
    // A bar chart of shares draws the table beside it too.
    if (chart.kind == ChartKind::kDotRows || chart.kind == ChartKind::kBars) return;
    out << "  [chart in the HTML report] " << chart.title << ". " << chart.caption << "\n";
  }
};

}  // namespace

std::string RenderTextReport(const ReportModel& model) {
  std::ostringstream out;
  // The warning comes before anything else: a reader must not take the numbers at face value.
  for (const std::string& line : model.integrity_warning) out << "!! " << line << "\n";
  if (!model.integrity_warning.empty()) out << "\n";
  out << model.title << "\n" << std::string(DisplayWidth(model.title), '=') << "\n" << model.subtitle << "\n";
  for (const ReportSection& section : model.sections) {
    Heading(out, section.title);
    for (const ReportBlock& block : section.blocks) std::visit(TextBlock{out}, block);
  }
  return out.str();
}

}  // namespace stepledger
