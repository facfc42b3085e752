#pragma once
// What every fuzz target shares: the one rule for exceptions, findings that stop the run with
// a clear line, and a private temporary folder for targets that need files.
//
// The rule: bad input must end in InputError (PlanError, JsonReadError and LocatedInputError
// are kinds of it), which the command line turns into exit 2 with a message. Any other
// exception (std::logic_error, nlohmann::json's own errors, std::bad_alloc, NumericalError),
// a crash, a hang or a sanitizer report is a finding.

#include <cstddef>
#include <cstdint>
#include <cstdio>
#include <cstdlib>
#include <exception>
#include <filesystem>
#include <string>
#include <string_view>
#include <typeinfo>

#include <cxxabi.h>

#include "stepledger/engine/errors.h"

namespace stepledger::fuzz {

/// Text with every byte outside printable ASCII (but the line feed) written as \xNN, so that a
/// finding's detail shows NUL bytes, CRs and invalid UTF-8 as they are.
inline std::string Escaped(std::string_view text) {
  static constexpr char kHex[] = "0123456789abcdef";
  std::string out;
  for (const char c : text) {
    const auto byte = static_cast<unsigned char>(c);
    if ((byte >= 0x20 && byte < 0x7f) || byte == '\n') {
      out += c;
    } else {
      out += "\\x";
      out += kHex[byte >> 4];
      out += kHex[byte & 15];
    }
  }
  return out;
}

/// Thrown by Finding instead of aborting when the finding is a known one (below).
struct SkippedKnownFinding {};

/// True when what contains one of the '|'-separated texts of the environment variable
/// STEPLEDGER_FUZZ_KNOWN: a finding already reported and awaiting its fix, which a local run
/// may step over to look for others (DEVELOPERS.md). Never set in CI.
inline bool IsKnownFinding(std::string_view what) {
  const char* known = std::getenv("STEPLEDGER_FUZZ_KNOWN");
  if (known == nullptr) return false;
  std::string_view rest = known;
  while (!rest.empty()) {
    const std::size_t bar = rest.find('|');
    const std::string_view text = rest.substr(0, bar);
    if (!text.empty() && what.find(text) != std::string_view::npos) return true;
    if (bar == std::string_view::npos) break;
    rest.remove_prefix(bar + 1);
  }
  return false;
}

/// Prints "fuzz finding: what" (and the detail, escaped and shortened) on stderr and aborts, so
/// that libFuzzer keeps the input as a crash file and the replay driver names the file. A known
/// finding (IsKnownFinding) throws SkippedKnownFinding instead, which ends this input quietly.
[[noreturn]] inline void Finding(std::string_view what, std::string_view detail = {}) {
  if (IsKnownFinding(what)) throw SkippedKnownFinding{};
  constexpr std::size_t kMaxDetail = 6000;
  std::string text = "fuzz finding: " + Escaped(what) + "\n";
  if (!detail.empty()) {
    const std::string shown = Escaped(detail);
    text += shown.substr(0, kMaxDetail) + (shown.size() > kMaxDetail ? "\n[...]\n" : "\n");
  }
  std::fwrite(text.data(), 1, text.size(), stderr);
  std::fflush(stderr);
  std::abort();
}

/// The readable name of an exception's type ("nlohmann::...::out_of_range").
inline std::string TypeName(const std::exception& error) {
  int status = 0;
  char* name = abi::__cxa_demangle(typeid(error).name(), nullptr, nullptr, &status);
  std::string text = status == 0 && name != nullptr ? name : typeid(error).name();
  std::free(name);
  return text;
}

/// Runs body; InputError is the expected end of bad input, anything else is a finding.
template <typename Body>
void ExpectOnlyInputErrors(std::string_view stage, Body&& body) {
  try {
    body();
  } catch (const InputError&) {
    // Bad input, reported to the user with exit 2: fine.
  } catch (const SkippedKnownFinding&) {
    // A known finding, stepped over on request.
  } catch (const std::exception& error) {
    const std::string what = std::string(stage) + ": exception other than InputError (exit 3 for bad input): " +
                             TypeName(error) + ": " + error.what();
    if (!IsKnownFinding(what)) Finding(what);  // (Finding would throw out of this handler)
  } catch (...) {
    const std::string what = std::string(stage) + ": exception of an unknown type";
    if (!IsKnownFinding(what)) Finding(what);
  }
}

/// The input as text.
inline std::string_view AsText(const std::uint8_t* data, std::size_t size) {
  return {reinterpret_cast<const char*>(data), size};
}

/// A folder of this process under the system temporary folder (TMPDIR), made on first use and
/// removed at exit.
const std::filesystem::path& PrivateTempDir();

/// Writes bytes to path (replacing it); aborts when it cannot (that is the harness, not input).
void WriteFileOrDie(const std::filesystem::path& path, std::string_view bytes);

}  // namespace stepledger::fuzz
