// Runs a selection through stepledger's public API, the way a program of one's own would:
// read a plan file, run it on a CSV file, print the route and the final model.
//
//   select_with_library DATA.csv PLAN.json
//
// RunPlan is the whole pipeline of `stepledger select` (profile the columns, build the
// design, one streaming pass folding the factor, the search, the refined fit of the final
// model); the lower-level steps (ProfileCsv, BuildDesign, RunFactorPass, RunSearch, FitModel)
// are public too, for programs that need to stop in between.
//
// Exit status: 0 done, 2 bad input (the message names the file and place), 3 numerical failure.

#include <exception>
#include <iostream>

#include "stepledger/audit/audit_document.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/engine/errors.h"

int main(int argc, char** argv) {
  if (argc != 3) {
    std::cerr << "usage: select_with_library DATA.csv PLAN.json\n";
    return 2;
  }
  try {
    const stepledger::LoadedPlan plan = stepledger::LoadPlanFile(argv[2]);

    stepledger::RunOptions options;
    options.threads = 1;
    // No diagnostics pass: this program prints the model, it does not price new rows.
    options.diagnostics = false;
    const stepledger::RunResult run = stepledger::RunPlan(argv[1], plan, options);

    std::cout << "rows read " << run.accounting.rows_read << ", used " << run.accounting.rows_used
              << "\n\n"
              << run.search.FullReport() << "\nFinal model\n"
              << run.fit.FullReport();
    // One line a script can read: the chosen terms in the order they entered.
    std::cout << "\nchosen terms:";
    for (const std::string& term : run.search.final_terms) std::cout << " " << term;
    std::cout << "\n";
    return run.search.IsModelUsable() ? 0 : 3;
  } catch (const stepledger::InputError& error) {  // PlanError is an InputError
    std::cerr << "select_with_library: " << error.what() << "\n";
    return 2;
  } catch (const stepledger::NumericalError& error) {
    std::cerr << "select_with_library: numerical failure: " << error.what() << "\n";
    return 3;
  } catch (const std::exception& error) {
    std::cerr << "select_with_library: " << error.what() << "\n";
    return 3;
  }
}
