#pragma once
// The message of an expected InputError, for tests that check the place a message names.

#include <string>
#include <utility>

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/limits.h"

namespace stepledger::testing {

/// The message of the InputError that action throws; fails the test when none is thrown.
template <typename Action>
std::string InputErrorOf(Action&& action) {
  try {
    std::forward<Action>(action)();
  } catch (const InputError& error) {
    return error.what();
  }
  ADD_FAILURE() << "expected an InputError";
  return {};
}

/// The LimitError that action throws; fails the test when it throws none or another kind.
template <typename Action>
LimitError LimitErrorOf(Action&& action) {
  try {
    std::forward<Action>(action)();
  } catch (const LimitError& error) {
    return error;
  } catch (const std::exception& error) {
    ADD_FAILURE() << "expected a LimitError, got: " << error.what();
    return LimitError(LimitKind::kColumns, 0, "none", "none");
  }
  ADD_FAILURE() << "expected a LimitError";
  return LimitError(LimitKind::kColumns, 0, "none", "none");
}

}  // namespace stepledger::testing
