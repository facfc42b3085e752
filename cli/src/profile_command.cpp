// `stepledger profile DATA`: what each column holds, and a starter plan to edit.

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/profile.h"

namespace stepledger::cli {
namespace {

struct ProfileArgs {
  std::string data;
  std::string response;
  std::string plan_out;
  /// Levels shown per categorical column.
  std::size_t shown_levels = 5;
  /// A categorical column with more levels than this is left out of the starter plan.
  std::size_t max_plan_levels = 50;
};

std::string FormatNumber(double value) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.6g", value);
  return buffer;
}

// Default baseline of a categorical term: its most frequent level, ties broken byte-wise
// (the same rule as BuildDesign; levels arrive sorted byte-wise, so the first maximum wins).
const LevelCount* MostFrequentLevel(const ColumnProfile& column) {
  const LevelCount* best = nullptr;
  for (const LevelCount& level : column.levels) {
    if (best == nullptr || level.count > best->count) best = &level;
  }
  return best;
}

struct StarterPlan {
  nlohmann::ordered_json plan;
  std::vector<std::string> notes;
};

// Why a column cannot be a term of a starter plan, or empty when it can.
std::string ReasonToLeaveOut(const ColumnProfile& column, const ProfileArgs& args) {
  if (column.kind == ColumnKind::kEmpty) return "every cell is missing";
  if (column.kind != ColumnKind::kCategorical) return {};
  if (column.too_many_levels) return "too many distinct levels to be a categorical term";
  if (column.levels.size() < 2) return "a single level carries no information";
  if (column.levels.size() == column.present) {
    return "looks like an identifier (every value distinct)";
  }
  if (column.levels.size() > args.max_plan_levels) {
    return std::to_string(column.levels.size()) + " levels (more than " +
           std::to_string(args.max_plan_levels) + ") would make too many columns";
  }
  return {};
}

StarterPlan MakeStarterPlan(const DataProfile& profile, const ProfileArgs& args) {
  StarterPlan starter;
  std::string response = args.response;
  if (response.empty()) {
    for (const ColumnProfile& column : profile.columns) {
      if (column.kind == ColumnKind::kNumeric) {
        response = column.name;
        break;
      }
    }
    if (response.empty()) {
      throw InputError(profile.path.string() +
                       ": no numeric column to serve as the response; name one with --response");
    }
    starter.notes.push_back("response '" + response +
                            "' is the first numeric column; choose another with --response");
  } else {
    const ColumnProfile* column = profile.Find(response);
    if (column == nullptr) {
      throw InputError("--response: no column '" + QuoteForMessage(response) + "' in " +
                       profile.path.string());
    }
    if (column->kind != ColumnKind::kNumeric) {
      std::string message = "--response: column '" + response + "' is " + ToString(column->kind) +
                            ", not numeric";
      if (column->first_text) {
        message += " (text '" + QuoteForMessage(column->first_text->text) + "' at " +
                   FormatLocation(profile.path.string(), column->first_text->line,
                                  column->first_text->column) +
                   ")";
      }
      throw InputError(message);
    }
  }

  nlohmann::ordered_json terms = nlohmann::ordered_json::array();
  for (const ColumnProfile& column : profile.columns) {
    if (column.name == response) continue;
    const std::string reason = ReasonToLeaveOut(column, args);
    if (!reason.empty()) {
      starter.notes.push_back("column '" + column.name + "' left out: " + reason);
      continue;
    }
    if (column.kind == ColumnKind::kNumeric) {
      terms.push_back({{"name", column.name}, {"column", column.name}});
    } else {
      const LevelCount* baseline = MostFrequentLevel(column);
      terms.push_back({{"name", column.name},
                       {"categorical", column.name},
                       {"baseline", baseline != nullptr ? baseline->level : std::string()}});
    }
  }
  if (terms.empty()) starter.notes.push_back("no column qualifies as a term");
  starter.plan["response"] = response;
  starter.plan["intercept"] = true;
  starter.plan["terms"] = std::move(terms);
  return starter;
}

// The plan as a file a person edits: one term per line.
std::string PlanText(const nlohmann::ordered_json& plan) {
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

nlohmann::ordered_json ColumnToJson(const ColumnProfile& column) {
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

std::string ColumnsTable(const DataProfile& profile, const ProfileArgs& args) {
  std::size_t name_width = 6;
  for (const ColumnProfile& column : profile.columns) {
    name_width = std::max(name_width, column.name.size());
  }
  std::ostringstream text;
  text << profile.path.string() << ": " << profile.rows << " rows, " << profile.columns.size()
       << " columns\n\n";
  char line[256];
  std::snprintf(line, sizeof line, "%-*s  %-11s  %9s  %9s  %s\n", static_cast<int>(name_width),
                "column", "kind", "present", "missing", "values");
  text << line;
  for (const ColumnProfile& column : profile.columns) {
    std::string values;
    if (column.kind == ColumnKind::kNumeric) {
      values = "range " + FormatNumber(column.min) + " .. " + FormatNumber(column.max) +
               ", mean " + FormatNumber(column.mean) + ", sd " + FormatNumber(column.sd);
    } else if (column.kind == ColumnKind::kCategorical) {
      // Most frequent levels first, ties byte-wise, so the default baseline shows first.
      std::vector<LevelCount> levels = column.levels;
      std::stable_sort(levels.begin(), levels.end(),
                       [](const LevelCount& a, const LevelCount& b) { return a.count > b.count; });
      const std::size_t shown = std::min(levels.size(), args.shown_levels);
      for (std::size_t i = 0; i < shown; ++i) {
        if (i > 0) values += ", ";
        values += levels[i].level + " (" + std::to_string(levels[i].count) + ")";
      }
      if (levels.size() > shown) {
        values += ", and " + std::to_string(levels.size() - shown) +
                  (column.too_many_levels ? "+" : "") + " more";
      }
    }
    std::snprintf(line, sizeof line, "%-*s  %-11s  %9llu  %9llu  ", static_cast<int>(name_width),
                  column.name.c_str(), ToString(column.kind),
                  static_cast<unsigned long long>(column.present),
                  static_cast<unsigned long long>(column.missing));
    text << line << values << "\n";
  }
  return text.str();
}

int RunProfile(const ProfileArgs& args, CommandContext& context) {
  const CsvOptions csv = MakeCsvOptions(context.common);
  context.log->info("profiling {}", args.data);
  const DataProfile profile = ProfileCsv(args.data, csv);
  const StarterPlan starter = MakeStarterPlan(profile, args);
  const std::string plan_text = PlanText(starter.plan);

  if (!args.plan_out.empty()) WriteOutput(context, args.plan_out, plan_text);

  if (context.common.json) {
    nlohmann::ordered_json result;
    result["file"] = profile.path.string();
    result["rows"] = profile.rows;
    nlohmann::ordered_json columns = nlohmann::ordered_json::array();
    for (const ColumnProfile& column : profile.columns) columns.push_back(ColumnToJson(column));
    result["columns"] = std::move(columns);
    result["starter_plan"] = starter.plan;
    result["notes"] = starter.notes;
    context.out << result.dump(2) << "\n";
    return 0;
  }

  context.out << ColumnsTable(profile, args);
  if (!context.common.quiet && !starter.notes.empty()) {
    context.out << "\nNotes:\n";
    for (const std::string& note : starter.notes) context.out << "  - " << note << "\n";
  }
  if (args.plan_out.empty()) {
    context.out << "\nStarter plan (save it with --plan-out FILE, then edit):\n" << plan_text;
  } else if (!context.common.quiet) {
    context.out << "\nStarter plan written to " << args.plan_out << "\n";
  }
  return 0;
}

}  // namespace

void AddProfileCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<ProfileArgs>();
  CLI::App* command = app.add_subcommand(
      "profile", "Summarise each column of a data file and propose a starter plan");
  command->add_option("DATA", args->data, "CSV data file (header row first)")
      ->required()
      ->check(CLI::ExistingFile);
  command->add_option("--response", args->response,
                      "Response column of the starter plan (default: the first numeric column)")
      ->type_name("COL");
  command->add_option("--plan-out", args->plan_out,
                      "Write the starter plan to FILE (never overwrites without --force)")
      ->type_name("FILE");
  AddCommonOptions(*command, context.common);
  command->footer(
      "Reads the data file once and shows each column's kind, present and missing cells, "
      "range, mean and standard deviation (numeric columns) or most frequent levels "
      "(categorical columns). Then proposes a starter plan: numeric columns as terms, "
      "categorical columns as categorical terms against their most frequent level (ties: the "
      "byte-wise first), identifier-like columns (every value distinct, or too many levels) "
      "left out with a note. The response is --response, else the first numeric column.\n\n"
      "Example:\n  stepledger profile examples/data/laptops.csv --response resale_price "
      "--plan-out my_plan.json");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunProfile(*args, context); };
  });
}

}  // namespace stepledger::cli
