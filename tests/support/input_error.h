#pragma once
// The message of an expected InputError, for tests that check the place a message names.

#include <string>
#include <utility>

#include <gtest/gtest.h>

#include "stepledger/engine/errors.h"

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

}  // namespace stepledger::testing
