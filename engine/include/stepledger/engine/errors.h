#pragma once
// Error channels of stepledger (STYLE.md, habit 4):
//  - programmer bugs: assert(), or std::logic_error where the check must stay in release builds
//    (RunCli reports it as an internal error, exit 3; never InputError);
//  - bad input (data file, plan, options): InputError and PlanError, whose message is the
//    complete one-line text for the user, naming file:line:column or the JSON key path;
//  - numerical or internal failures that end the work: NumericalError;
//  - the machine's resources running out (memory, address space): ResourceError (exit 3).
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

/// Bad input at a place in a data file: what() is "file:line:column: detail" (column 0 is left
/// out when the byte column cannot be known). The parts are kept so that a reader of one byte
/// range of a file, which counts lines from its own start, can be corrected by the lines before
/// the range once they are known (WithLinesBefore).
class LocatedInputError : public InputError {
 public:
  LocatedInputError(std::string file, std::uint64_t line, std::uint64_t column, std::string detail);
  const std::string& file() const { return file_; }
  std::uint64_t line() const { return line_; }
  std::uint64_t column() const { return column_; }
  const std::string& detail() const { return detail_; }
  /// The same error with `lines` added to its line.
  LocatedInputError WithLinesBefore(std::uint64_t lines) const;

 private:
  std::string file_;
  std::uint64_t line_ = 0;
  std::uint64_t column_ = 0;
  std::string detail_;
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

/// The machine cannot give what the work needs (memory or address space under a limit such as
/// `ulimit -v`): exit status 3, with what() saying what ran out and what to change.
class ResourceError : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

/// "file:line:column" (1-based line and column) as used at the start of input messages;
/// "file:line" when column is 0 (unknown).
std::string FormatLocation(std::string_view file, std::uint64_t line, std::uint64_t column);

/// Shortens text for quoting in a message (keeps at most max_chars, appends "...").
std::string QuoteForMessage(std::string_view text, std::size_t max_chars = 40);

}  // namespace stepledger
