// The JSON back end: the report model as it is, every value with its text for people and its
// number at full precision (`report --json`).

#include <cmath>

#include "report_internal.h"

namespace stepledger {
namespace {

using json = nlohmann::json;

json Number(std::optional<double> value) {
  // JSON has no NaN or infinity: an undefined or non-finite number is null.
  if (!value || !std::isfinite(*value)) return nullptr;
  return *value;
}

json Value(const ReportValue& value) {
  json out{{"kind", ToString(value.kind)}, {"text", value.text}};
  if (value.kind != ValueKind::kText || value.number) {
    if (value.kind == ValueKind::kCount && value.number) {
      out["number"] = static_cast<std::int64_t>(*value.number);
    } else {
      out["number"] = Number(value.number);
    }
  }
  return out;
}

const char* ToString(ChartKind kind) {
  switch (kind) {
    case ChartKind::kLine: return "line";
    case ChartKind::kDotRows: return "dot-rows";
    case ChartKind::kIntervals: return "intervals";
    case ChartKind::kScatter: return "scatter";
    case ChartKind::kDensity: return "density";
    case ChartKind::kHistogram: return "histogram";
    case ChartKind::kBars: return "bars";
  }
  return "line";
}

struct JsonBlock {
  json operator()(const ReportParagraph& paragraph) const {
    return {{"type", "paragraph"}, {"text", paragraph.text}, {"style", paragraph.style}};
  }
  json operator()(const ReportList& list) const {
    json items = json::array();
    for (const ReportList::Item& item : list.items) {
      json entry{{"text", item.text}};
      if (!item.tag.empty()) entry["tag"] = item.tag;
      items.push_back(std::move(entry));
    }
    return {{"type", "list"}, {"style", list.style}, {"items", std::move(items)}};
  }
  json operator()(const ReportFacts& facts) const {
    json list = json::array();
    for (const ReportFact& fact : facts.facts) list.push_back({{"label", fact.label}, {"value", Value(fact.value)}});
    return {{"type", "facts"}, {"facts", std::move(list)}};
  }
  json operator()(const ReportTable& table) const {
    json columns = json::array(), rows = json::array();
    for (const ReportColumn& column : table.columns) {
      columns.push_back({{"heading", column.heading}, {"kind", ToString(column.kind)}});
    }
    for (std::size_t index = 0; index < table.rows.size(); ++index) {
      json cells = json::array();
      for (const ReportValue& value : table.rows[index]) cells.push_back(Value(value));
      json row{{"cells", std::move(cells)}};
      if (index < table.row_styles.size() && !table.row_styles[index].empty()) row["style"] = table.row_styles[index];
      rows.push_back(std::move(row));
    }
    return {{"type", "table"},         {"caption", table.caption}, {"columns", std::move(columns)},
            {"rows", std::move(rows)}, {"rows_not_listed", table.rows_not_listed}};
  }
  json operator()(const ReportChart& chart) const {
    json series = json::array();
    for (const ChartSeries& entry : chart.series) {
      json points = json::array();
      for (const ChartPoint& point : entry.points) {
        json out{{"x", Number(point.x)}, {"y", Number(point.defined ? std::optional<double>(point.y) : std::nullopt)},
                 {"class", point.css_class}};
        if (point.title) out["title"] = *point.title;
        if (!point.label.empty()) out["label"] = point.label;
        if (point.low) out["low"] = Number(point.low);
        if (point.high) out["high"] = Number(point.high);
        points.push_back(std::move(out));
      }
      series.push_back({{"name", entry.name}, {"points", std::move(points)}});
    }
    json references = json::array();
    for (const ReferenceLine& line : chart.references) {
      references.push_back({{"axis", line.vertical ? "x" : "y"}, {"value", Number(line.value)}, {"label", line.label}});
    }
    json out{{"type", "chart"},
             {"id", chart.id},
             {"kind", ToString(chart.kind)},
             {"title", chart.title},
             {"x_label", chart.x_label},
             {"y_label", chart.y_label},
             {"caption", chart.caption},
             {"series", std::move(series)},
             {"references", std::move(references)}};
    if (chart.grid) {
      out["grid"] = {{"x_lo", Number(chart.grid->x_lo)}, {"x_hi", Number(chart.grid->x_hi)},
                     {"y_lo", Number(chart.grid->y_lo)}, {"y_hi", Number(chart.grid->y_hi)},
                     {"columns", chart.grid->columns},   {"rows", chart.grid->rows},
                     {"counts", chart.grid->counts}};
    }
    return out;
  }
};

}  // namespace

nlohmann::json RenderJsonReport(const ReportModel& model) {
  json sections = json::array();
  for (const ReportSection& section : model.sections) {
    json blocks = json::array();
    for (const ReportBlock& block : section.blocks) blocks.push_back(std::visit(JsonBlock{}, block));
    sections.push_back({{"id", section.id}, {"title", section.title}, {"blocks", std::move(blocks)}});
  }
  json out{{"format", "stepledger-report"}, {"title", model.title}, {"subtitle", model.subtitle},
           {"verified", model.verified}};
  if (!model.verified) out["warning"] = model.integrity_warning;
  out["diagnostics"] = model.has_diagnostics;
  out["sections"] = std::move(sections);
  return out;
}

}  // namespace stepledger
