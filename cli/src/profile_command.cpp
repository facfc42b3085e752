// `stepledger profile DATA`: what each column holds, and a starter plan to edit.

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <memory>
#include <optional>
#include <sstream>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "commands.h"
#include "stepledger/engine/table_scan.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/engine/profile.h"
#include "stepledger/run/starter_plan.h"

namespace stepledger::cli {
namespace {

struct ProfileArgs {
  std::vector<std::string> data;  ///< one file, several files or one folder (engine/data_set.h)
  std::string response;
  std::string plan_out;
  /// Levels shown per categorical column.
  std::size_t shown_levels = 5;
};

std::string ColumnsTable(const DataProfile& profile, const ProfileArgs& args) {
  std::size_t name_width = 6;
  for (const ColumnProfile& column : profile.columns) {
    name_width = std::max(name_width, column.name.size());
  }
  std::ostringstream text;
  text << profile.path.string() << ": " << FormatCount(static_cast<std::int64_t>(profile.rows)) << " rows, "
       << FormatCount(static_cast<std::int64_t>(profile.columns.size())) << " columns\n\n";
  char line[256];
  std::snprintf(line, sizeof line, "%-*s  %-11s  %9s  %9s  %s\n", static_cast<int>(name_width),
                "column", "kind", "present", "missing", "values");
  text << line;
  for (const ColumnProfile& column : profile.columns) {
    std::string values;
    if (column.kind == ColumnKind::kNumeric) {
      values = "range " + FormatQuantity(column.min) + " .. " + FormatQuantity(column.max) +
               ", mean " + FormatQuantity(column.mean) + ", sd " + FormatQuantity(column.sd);
    } else if (column.kind == ColumnKind::kCategorical) {
      // Most frequent levels first, ties byte-wise, so the default baseline shows first.
      std::vector<LevelCount> levels = column.levels;
      std::stable_sort(levels.begin(), levels.end(),
                       [](const LevelCount& a, const LevelCount& b) { return a.count > b.count; });
      const std::size_t shown = std::min(levels.size(), args.shown_levels);
      for (std::size_t i = 0; i < shown; ++i) {
        if (i > 0) values += ", ";
        values += levels[i].level + " (" + FormatCount(static_cast<std::int64_t>(levels[i].count)) + ")";
      }
      if (levels.size() > shown) {
        values += ", and " + FormatCount(static_cast<std::int64_t>(levels.size() - shown)) +
                  (column.too_many_levels ? "+" : "") + " more";
      }
    }
    std::snprintf(line, sizeof line, "%-*s  %-11s  %9s  %9s  ", static_cast<int>(name_width),
                  column.name.c_str(), ToString(column.kind),
                  FormatCount(static_cast<std::int64_t>(column.present)).c_str(),
                  FormatCount(static_cast<std::int64_t>(column.missing)).c_str());
    text << line << values << "\n";
  }
  return text.str();
}

int RunProfile(const ProfileArgs& args, CommandContext& context) {
  const CsvOptions csv = MakeCsvOptions(context.common);
  context.log->info("profiling {}", DataInputsText(args.data));
  ScanOptions scan;
  scan.csv = csv;
  scan.threads = context.common.threads;
  scan.spill = false;  // the profile is all this command needs
  scan.profile.max_levels = static_cast<std::size_t>(context.common.limits.levels);
  const DataSet data = MakeDataSet(args.data);
  ScanResult scanned = ScanData(data, scan);
  const DataProfile profile = std::move(scanned.profile);
  // Several files or a folder: say which files were read, in their order.
  const bool is_set = data.inputs.size() > 1 || scanned.files.front().path != data.inputs.front();
  const std::vector<DataFileRecord> files = DataFileRecords(scanned);
  const StarterPlan starter = MakeStarterPlan(profile, args.response, context.common.limits);
  const bool has_plan = !starter.plan.is_null();
  const std::string plan_text = has_plan ? StarterPlanText(starter.plan) : std::string();

  if (!args.plan_out.empty()) WriteOutput(context, args.plan_out, plan_text);

  if (context.common.json) {
    nlohmann::ordered_json result;
    result["file"] = profile.path.string();
    result["rows"] = profile.rows;
    if (is_set) {
      nlohmann::ordered_json list = nlohmann::ordered_json::array();
      for (const DataFileRecord& file : files) {
        list.push_back({{"name", file.name}, {"bytes", file.bytes}, {"sha256", file.sha256},
                        {"encoding", file.encoding}, {"rows", file.rows}});
      }
      result["files"] = std::move(list);
    }
    nlohmann::ordered_json columns = nlohmann::ordered_json::array();
    for (const ColumnProfile& column : profile.columns) columns.push_back(ColumnProfileJson(column));
    result["columns"] = std::move(columns);
    result["starter_plan"] = starter.plan;
    result["notes"] = starter.notes;
    context.out << JsonText(result) << "\n";
    return 0;
  }

  context.out << DataSetFilesText(is_set, files) << ColumnsTable(profile, args);
  if (!context.common.quiet && !starter.notes.empty()) {
    context.out << "\nNotes:\n";
    for (const std::string& note : starter.notes) context.out << "  - " << note << "\n";
  }
  if (!has_plan) {
    // The note above says why; nothing more to show.
  } else if (args.plan_out.empty()) {
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
  command->add_option("DATA", args->data, kDataInputHelp)
      ->required()
      ->expected(1, -1)
      ->check(kExistingDataInput);
  CLI::Option* response = command->add_option("--response", args->response,
                                               "Response column of the starter plan (without it: no plan, "
                                               "only the column summary)")
                              ->type_name("COL");
  CLI::Option* plan_out = command->add_option("--plan-out", args->plan_out,
                                               "Write the starter plan to FILE (never overwrites without "
                                               "--force)")
                              ->type_name("FILE")
                              ->needs(response);
  AddCommonOptions(*command, context.common, kAllCommonOptions);
  command->remove_option(command->get_option("--work-dir"));  // a profile writes no spill
  command->get_option("--force")->needs(plan_out);
  command->footer(
      std::string(kDataSetHelp) +
      "Reads the data file once and shows each column's kind, present and missing cells, "
      "range, mean and standard deviation (numeric columns) or most frequent levels "
      "(categorical columns). With --response COL it then proposes a starter plan: numeric "
      "columns as terms, categorical columns as categorical terms against their most frequent "
      "level (ties: the byte-wise first); columns that cannot be terms are left out with a note "
      "(the rule of \"terms\": \"all\": empty, a single level, every value distinct, more than "
      "100 levels). The response is never guessed: without --response there is no plan. Notes "
      "also point at a text cell such as 'n/a' in a column of numbers (add it to the plan's "
      "\"missing\" list) and at a header read as one column that holds ';' or a tab (use "
      "--delimiter).\n\n"
      "Examples run as printed from the repository root after `bash scripts/demo.sh` made build/demo.\nExample:\n  " +
      ProgramWord() + " profile build/demo/laptops.csv --response resale_price "
      "--plan-out build/demo/my_plan.json --force");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunProfile(*args, context); };
  });
}

}  // namespace stepledger::cli
