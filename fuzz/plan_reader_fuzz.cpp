// Fuzz target: the plan reader (io/plan_file.h), on the text of a plan file.
//
// Checked: ParsePlanText ends in a Plan or an InputError (PlanError names the key); a plan it
// accepts survives the round trip that audits rely on: PlanFromJson(PlanToJson(plan)) gives the
// same plan without an error, and its normalised JSON is stable.

#include <cstdint>
#include <string>

#include "fuzz_support.h"
#include "stepledger/io/plan_file.h"

namespace stepledger::fuzz {
namespace {

void CheckPlan(std::string_view text) {
  LoadedPlan loaded;
  try {
    loaded = ParsePlanText(std::string(text), "plan.json");
  } catch (const InputError&) {
    return;  // bad plan: exit 2
  }
  const nlohmann::json normalised = PlanToJson(loaded.plan);
  Plan again;
  try {
    again = PlanFromJson(normalised);
  } catch (const InputError& error) {
    Finding("the normalised plan of an accepted plan is refused", std::string(error.what()) + "\n" + normalised.dump());
  }
  if (!(again == loaded.plan)) Finding("PlanFromJson(PlanToJson(plan)) is not the plan", normalised.dump());
  if (PlanToJson(again) != normalised) Finding("the normalised plan is not stable", normalised.dump());
}

}  // namespace
}  // namespace stepledger::fuzz

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace stepledger::fuzz;
  ExpectOnlyInputErrors("plan reader", [&] { CheckPlan(AsText(data, size)); });
  return 0;
}
