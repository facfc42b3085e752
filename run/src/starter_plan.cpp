#include "stepledger/run/starter_plan.h"

#include <cmath>
#include <cstdint>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"

namespace stepledger {
namespace {

// Default baseline of a categorical term: its most frequent level, ties broken byte-wise
// (the same rule as BuildDesign; levels arrive sorted byte-wise, so the first maximum wins).
const LevelCount* MostFrequentLevel(const ColumnProfile& column) {
  const LevelCount* best = nullptr;
  for (const LevelCount& level : column.levels) {
    if (best == nullptr || level.count > best->count) best = &level;
  }
  return best;
}

// A column of numbers spoilt by a few text cells ("n/a", "unknown"): the text most likely
// means missing. The hint names the first such cell and the plan key that fixes it.
std::optional<std::string> MissingTokenHint(const DataProfile& profile, const ColumnProfile& column) {
  if (column.kind != ColumnKind::kCategorical || !column.first_text || column.numeric_cells == 0) {
    return std::nullopt;
  }
  const std::uint64_t text_cells = column.present - column.numeric_cells;
  // Mostly numbers: at most one cell in ten is text.
  if (text_cells == 0 || text_cells * 10 > column.present) return std::nullopt;
  const CellLocation& cell = *column.first_text;
  return "column '" + column.name + "' holds numbers but for " +
         FormatCount(static_cast<std::int64_t>(text_cells)) + (text_cells == 1 ? " text cell" : " text cells") +
         ", the first '" + QuoteForMessage(cell.text) + "' at " +
         FormatLocation(LocationFile(profile, cell), cell.line, cell.column) +
         "; if that text means a missing value, add it to the plan's \"missing\" list (\"missing\": [\"\", "
         "\"NA\", " + nlohmann::json(cell.text).dump() + "]) so that the column is read as numeric";
}

}  // namespace

StarterPlan MakeStarterPlan(const DataProfile& profile, const std::string& response, const InputLimits& limits,
                            const std::string& option_name) {
  StarterPlan starter;
  const std::optional<std::string> delimiter_hint =
      SeparatorHint(profile.columns.size(), profile.columns.empty() ? "" : profile.columns.front().name);
  for (const ColumnProfile& column : profile.columns) {
    if (auto hint = MissingTokenHint(profile, column)) starter.notes.push_back(*hint);
  }
  if (response.empty()) {
    // No guessing: the first numeric column is as often an identifier or a count as the price.
    if (delimiter_hint) starter.notes.push_back(*delimiter_hint);
    starter.notes.push_back("no starter plan: name the response (the column to explain) with " + option_name +
                            (option_name == "--response" ? " COL" : ""));
    return starter;
  }
  const ColumnProfile* column = profile.Find(response);
  if (column == nullptr) {
    throw InputError(option_name + ": no column '" + QuoteForMessage(response) + "' in " + profile.path.string() +
                     (delimiter_hint ? "; " + *delimiter_hint : std::string()));
  }
  if (column->kind != ColumnKind::kNumeric) {
    std::string message = option_name + ": column '" + response + "' is " + ToString(column->kind) + ", not numeric";
    if (auto hint = MissingTokenHint(profile, *column)) {
      message += "; " + *hint;
    } else if (column->first_text) {
      message += " (text '" + QuoteForMessage(column->first_text->text) + "' at " +
                 FormatLocation(LocationFile(profile, *column->first_text), column->first_text->line, column->first_text->column) + ")";
    }
    throw InputError(message);
  }

  nlohmann::ordered_json terms = nlohmann::ordered_json::array();
  for (const ColumnProfile& candidate : profile.columns) {
    if (candidate.name == response) continue;
    // The rule of "terms": "all" (engine/profile.h), at the plan's default level limit.
    if (const auto reason = ReasonNotACandidateTerm(candidate, kDefaultMaxLevels)) {
      starter.notes.push_back("column '" + candidate.name + "' left out: " + *reason);
      continue;
    }
    if (candidate.kind == ColumnKind::kNumeric) {
      terms.push_back({{"name", candidate.name}, {"column", candidate.name}});
    } else {
      const LevelCount* baseline = MostFrequentLevel(candidate);
      terms.push_back({{"name", candidate.name},
                       {"categorical", candidate.name},
                       {"baseline", baseline != nullptr ? baseline->level : std::string()}});
    }
  }
  if (terms.empty()) starter.notes.push_back("no column qualifies as a term");
  if (terms.size() > limits.terms) {
    starter.notes.push_back("the starter plan has " + FormatCount(static_cast<std::int64_t>(terms.size())) +
                            " terms, more than the terms limit (" +
                            FormatCount(static_cast<std::int64_t>(limits.terms)) +
                            "): keep the ones worth trying, or run select and fit with --limit terms=N");
  }
  starter.plan["response"] = response;
  starter.plan["intercept"] = true;
  starter.plan["terms"] = std::move(terms);
  return starter;
}

// The plan as a file a person edits: one term per line.
std::string StarterPlanText(const nlohmann::ordered_json& plan) {
  std::string text = "{\n";
  bool first = true;
  for (const auto& [key, value] : plan.items()) {
    text += first ? "" : ",\n";
    first = false;
    text += "  " + nlohmann::ordered_json(key).dump() + ": ";
    if (key == "terms" && value.is_array() && !value.empty()) {
      text += "[\n";
      for (std::size_t i = 0; i < value.size(); ++i) {
        text += "    " + value[i].dump() + (i + 1 < value.size() ? ",\n" : "\n");
      }
      text += "  ]";
    } else {
      text += value.dump();
    }
  }
  return text + "\n}\n";
}

nlohmann::ordered_json ColumnProfileJson(const ColumnProfile& column) {
  nlohmann::ordered_json json = {{"name", column.name},
                                 {"kind", ToString(column.kind)},
                                 {"present", column.present},
                                 {"missing", column.missing}};
  if (column.kind == ColumnKind::kNumeric) {
    json["min"] = column.min;
    json["max"] = column.max;
    json["mean"] = column.mean;
    json["sd"] = std::isfinite(column.sd) ? nlohmann::ordered_json(column.sd) : nullptr;
  } else if (column.kind == ColumnKind::kCategorical) {
    nlohmann::ordered_json levels = nlohmann::ordered_json::array();
    for (const LevelCount& level : column.levels) {
      levels.push_back({{"level", level.level}, {"count", level.count}});
    }
    json["levels"] = std::move(levels);
    json["too_many_levels"] = column.too_many_levels;
  }
  return json;
}

}  // namespace stepledger
