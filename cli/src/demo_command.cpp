// `stepledger demo [--out DIR]`: writes the invented demo scenario (a reseller of refurbished
// laptops; examples/laptop_listings.h holds its true model) into DIR and runs `select` on it.
//
// The demo is `select` and nothing else: after writing the data and the plan it calls RunCli
// with the very command line it prints, so there is no second copy of the pipeline and what a
// user sees is what they get when they type that command.

#include <filesystem>
#include <memory>
#include <sstream>
#include <string>
#include <vector>

#include "commands.h"
#include "laptop_listings.h"
#include "stepledger/io/atomic_file.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/cli/run_cli.h"
#include "stepledger/engine/errors.h"

namespace stepledger::cli {
namespace {

namespace fs = std::filesystem;

struct DemoArgs {
  std::string out_dir = "stepledger-demo";
};

/// What the demo writes itself (select adds audit.json and, when it renders one, report.html).
struct DemoFile {
  const char* name;
  std::string text;
};

std::vector<DemoFile> DemoFiles() {
  using namespace examples;
  return {
      {"laptops.csv", MakeLaptopListings(kLaptopListingsRows, kLaptopListingsSeed, 1)},
      {"plan.json", MakeLaptopPlan("stepwise", "bic")},
      {"laptops_month2.csv",
       MakeLaptopListings(kLaptopListingsRows, kLaptopListingsMonth2Seed, 2)},
      {"laptops_to_price.csv", MakeLaptopsToPrice()},
  };
}

/// Files that select writes into DIR: the demo refuses them too before writing anything, so a
/// refused demo leaves DIR as it was.
constexpr const char* kSelectOutputs[] = {"audit.json", "report.html"};

// A path for the command lines the demo prints: quoted when it holds a character a shell
// would split or expand.
std::string ShellWord(const std::string& text) {
  if (text.find_first_of(" \t\n'\"\\$`*?[]{}()<>|&;#~!") == std::string::npos && !text.empty()) {
    return text;
  }
  std::string quoted = "'";
  for (char c : text) quoted += c == '\'' ? std::string("'\\''") : std::string(1, c);
  return quoted + "'";
}

// A command line that runs as printed: the program as ProgramWord() names it (the path it was
// built at unless `stepledger` on PATH is this very program).
std::string Joined(const std::vector<std::string>& words) {
  std::string line = ShellWord(ProgramWord());
  for (const std::string& word : words) line += " " + ShellWord(word);
  return line;
}

int RunDemo(const DemoArgs& args, CommandContext& context) {
  const CommonOptions& common = context.common;
  if (args.out_dir.empty()) throw InputError("--out: the folder name is empty");
  const fs::path folder = args.out_dir;
  if (fs::exists(folder) && !fs::is_directory(folder)) {
    throw InputError("--out: '" + QuoteForMessage(folder.string(), 200) + "' exists and is not a folder");
  }

  const std::vector<DemoFile> files = DemoFiles();
  if (!common.force) {
    std::vector<std::string> existing;
    for (const DemoFile& file : files) {
      if (fs::exists(folder / file.name)) existing.push_back((folder / file.name).string());
    }
    for (const char* name : kSelectOutputs) {
      if (fs::exists(folder / name)) existing.push_back((folder / name).string());
    }
    if (!existing.empty()) {
      std::string list;
      for (const std::string& path : existing) list += (list.empty() ? "" : ", ") + path;
      throw InputError("demo: " + list + (existing.size() == 1 ? " exists" : " exist") +
                       "; use --force to overwrite");
    }
  }

  // The same command line that the user would type, forwarding the common options.
  const std::string data = (folder / "laptops.csv").string();
  const std::string plan = (folder / "plan.json").string();
  const std::string audit = (folder / std::string(kAuditFileName)).string();
  std::vector<std::string> select_args = {"select", data, "--plan", plan, "--out", folder.string()};
  if (common.force) select_args.push_back("--force");
  if (common.quiet) select_args.push_back("--quiet");
  if (common.json) select_args.push_back("--json");
  if (common.threads != 1) {
    select_args.push_back("--threads");
    select_args.push_back(std::to_string(common.threads));
  }
  if (common.log_level != "warn") {
    select_args.push_back("--log-level");
    select_args.push_back(common.log_level);
  }

  // With --json stdout carries select's JSON alone, so the demo's own lines go to stderr.
  std::ostream& notes = common.json ? context.err : context.out;
  const bool talk = !common.quiet;
  if (talk) {
    notes << "demo: " << examples::kLaptopListingsRows
          << " invented listings of a reseller of refurbished laptops (seed "
          << examples::kLaptopListingsSeed << "), true model: " << examples::kLaptopTrueModelLine
          << " (see examples/laptop_listings.h); plus no-signal columns listing_weekday, "
             "photo_count, seller_note_length\n"
          << "demo: running  " << Joined(select_args) << "\n\n";
  }

  std::error_code error;
  fs::create_directories(folder, error);
  if (error) {
    throw InputError("--out: cannot create folder '" + QuoteForMessage(folder.string(), 200) +
                     "': " + error.message());
  }
  for (const DemoFile& file : files) {
    WriteFileAtomically(folder / file.name, file.text, AtomicWriteOptions{.overwrite = common.force});
    if (context.log) context.log->info("wrote {}", (folder / file.name).string());
  }

  const int status = RunCli(select_args, context.out, context.err);
  if (status != static_cast<int>(ExitStatus::kDone) || !talk) return status;

  const std::string month2 = (folder / "laptops_month2.csv").string();
  const std::string to_price = (folder / "laptops_to_price.csv").string();
  notes << "\ndemo: files in " << folder.string() << ": laptops.csv (the data), plan.json (the plan), "
        << kAuditFileName << " (the audit)";
  if (fs::exists(folder / "report.html")) notes << ", report.html (the reviewer's report)";
  notes << ", laptops_month2.csv (next month's listings, prices drifted), laptops_to_price.csv "
           "(listings to price, some built to be flagged)\n"
        << "Next, try:\n"
        << "  " << Joined({"verify", audit, "--data", data}) << "\n"
        << "  " << Joined({"report", audit, "--text"}) << "\n"
        << "  " << Joined({"predict", audit, to_price, "--id", "listing_id"}) << "\n"
        << "  " << Joined({"rerun", audit, month2, "--out", (folder / "month2").string()}) << "\n";
  return status;
}

}  // namespace

void AddDemoCommand(CLI::App& app, CommandContext& context) {
  auto args = std::make_shared<DemoArgs>();
  CLI::App* command = app.add_subcommand(
      "demo", "Make the bundled invented data set and run a full selection on it");
  command->add_option("--out", args->out_dir,
                      "Folder for the data, the plan, the audit and the report (created when missing)")
      ->type_name("DIR");
  // The demo writes comma-separated files: no --delimiter.
  AddCommonOptions(*command, context.common, kAllCommonOptions & ~kDelimiterOption & ~kLimitOption);
  command->footer(
      "Writes DIR/laptops.csv (listings of an invented reseller of refurbished laptops, drawn "
      "from a documented true model with a fixed seed), DIR/plan.json (the true model's terms "
      "and three columns with no signal; stepwise selection by BIC), DIR/laptops_month2.csv and "
      "DIR/laptops_to_price.csv, then runs exactly\n"
      "  stepledger select DIR/laptops.csv --plan DIR/plan.json --out DIR\n"
      "and ends with the next commands to try. Refuses to overwrite existing files without "
      "--force. `bash scripts/demo.sh` builds the program and runs the demo into build/demo, the "
      "folder every other command's --help examples use.\n\n"
      "Examples run as printed from the repository root.\nExamples:\n  " + ProgramWord() + " demo --out build/demo --force\n  " +
      ProgramWord() + " report build/demo/audit.json --text");
  command->callback([args, &context] {
    context.action = [args, &context] { return RunDemo(*args, context); };
  });
}

}  // namespace stepledger::cli
