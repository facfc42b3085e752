#pragma once
// Term specs written in one line, for tests that build a DesignSpec by hand.

#include <optional>
#include <string>
#include <utility>

#include "stepledger/engine/design.h"

namespace stepledger::testing {

inline TermSpec Numeric(std::string name, std::string column) {
  TermSpec term;
  term.name = std::move(name);
  term.kind = TermKind::kNumeric;
  term.column = std::move(column);
  return term;
}
inline TermSpec Power(std::string name, std::string column, int degree) {
  TermSpec term = Numeric(std::move(name), std::move(column));
  term.kind = TermKind::kPower;
  term.degree = degree;
  return term;
}
inline TermSpec Log(std::string name, std::string column) {
  TermSpec term = Numeric(std::move(name), std::move(column));
  term.kind = TermKind::kLog;
  return term;
}
inline TermSpec Categorical(std::string name, std::string column,
                            std::optional<std::string> baseline = std::nullopt) {
  TermSpec term = Numeric(std::move(name), std::move(column));
  term.kind = TermKind::kCategorical;
  term.baseline = std::move(baseline);
  return term;
}
inline TermSpec Product(std::string name, std::string first, std::string second) {
  TermSpec term;
  term.name = std::move(name);
  term.kind = TermKind::kProduct;
  term.parts = {std::move(first), std::move(second)};
  return term;
}

}  // namespace stepledger::testing
