#pragma once
// Error channels of stepledger (STYLE.md, habit 4):
//  - programmer bugs: assert(), or std::logic_error where the check must stay in release builds
//    (RunCli reports it as an internal error, exit 3; never InputError);
//  - bad input (data file, plan, options): InputError and PlanError, whose message is the
//    complete one-line text for the user, naming file:line:column or the JSON key path;
//  - numerical or internal failures that end the work: NumericalError.
// Expected numerical outcomes (aliased column, exact fit, n <= k) are never thrown: they are
// recorded in results.

#include <cstdint>
#include <stdexcept>
#include <string>
#include <string_view>

namespace stepledger {

/// Bad input from a file or the command line. what() is the full user-facing message.
class InputError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

/// Bad plan: key_path() is the JSON path of the offending key, e.g. "terms[3].power.degree".
class PlanError : public InputError {
 public:
  PlanError(std::string key_path, const std::string& message)
      : InputError(key_path.empty() ? "plan: " + message
                                    : "plan key '" + key_path + "': " + message),
        key_path_(std::move(key_path)) {}
  const std::string& key_path() const { return key_path_; }

 private:
  std::string key_path_;
};

/// A numerical or internal failure that ends the work (exit status 3).
class NumericalError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

/// "file:line:column" (1-based line and column) as used at the start of input messages.
std::string FormatLocation(std::string_view file, std::uint64_t line, std::uint64_t column);

/// Shortens text for quoting in a message (keeps at most max_chars, appends "...").
std::string QuoteForMessage(std::string_view text, std::size_t max_chars = 40);

}  // namespace stepledger
