#pragma once
// The one small fixed case behind the golden files (tests/audit/golden, tests/report/golden):
// sixteen invented laptops (no real brands) and a forward AIC plan, and the switch that rewrites
// golden files on purpose (STEPLEDGER_UPDATE_GOLDEN=1; see DEVELOPERS.md "Golden files").

#include <cstdlib>
#include <string>

namespace stepledger::testing {

// Age in months, memory, condition grade, battery cycles, price.
inline constexpr const char* kGoldenData =
    "age_months,ram_gb,grade,battery_cycles,price\n"
    "6,16,A,120,1180\n"
    "12,8,B,340,860\n"
    "18,16,B,410,905\n"
    "24,8,C,650,610\n"
    "30,32,A,300,1215\n"
    "36,8,B,720,640\n"
    "9,4,C,150,720\n"
    "15,16,A,260,1090\n"
    "21,8,A,500,930\n"
    "27,16,C,610,700\n"
    "33,4,B,800,515\n"
    "39,32,B,350,940\n"
    "45,8,C,880,395\n"
    "48,16,A,900,820\n"
    "3,8,B,60,1010\n"
    "54,4,C,950,300\n";

inline constexpr const char* kGoldenPlan = R"({
  "response": "price",
  "terms": [
    {"name": "age", "column": "age_months"},
    {"name": "ram", "column": "ram_gb"},
    {"name": "grade", "categorical": "grade", "baseline": "B"},
    {"name": "battery", "column": "battery_cycles"}
  ],
  "method": "forward",
  "criterion": "aic"
}
)";

/// True when the run was asked to rewrite golden files (STEPLEDGER_UPDATE_GOLDEN=1).
inline bool UpdatingGoldenFiles() {
  const char* update = std::getenv("STEPLEDGER_UPDATE_GOLDEN");
  return update != nullptr && std::string(update) == "1";
}

}  // namespace stepledger::testing
