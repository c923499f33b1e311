#pragma once
// The message of the InputError an action raises, for tests that check the exact words of errors.

#include <string>

#include "statewise/error.h"

namespace statewise::testing {

/// What `action()` raised as InputError, or "(no error)" when it returned normally. Other exceptions
/// pass through (and fail the test).
template <typename Action>
std::string input_error_of(Action&& action) {
  try {
    action();
  } catch (const InputError& error) {
    return error.what();
  }
  return "(no error)";
}

}  // namespace statewise::testing
