// Fuzz target: canonical JSON (audit/canonical_json.h), the text every digest and the seal of an
// audit are computed over, on arbitrary JSON read by the tool's one strict reader
// (io/json_reader.h).
//
// Checked: for any document the reader accepts, CanonicalJson succeeds; its text is JSON that the
// strict reader reads back to an equal value; and canonicalising that value gives the same text
// (a digest must not depend on how often a document was read and written).

#include <cstdint>
#include <string>

#include "fuzz_support.h"
#include "stepledger/audit/canonical_json.h"
#include "stepledger/io/json_reader.h"

namespace stepledger::fuzz {
namespace {

void CheckCanonical(std::string_view text) {
  nlohmann::json value;
  try {
    value = ParseStrictJson(text, "fuzz.json");
  } catch (const InputError&) {
    return;  // not JSON the tool reads: exit 2
  }
  const std::string canonical = CanonicalJson(value);
  nlohmann::json again;
  try {
    again = ParseStrictJson(canonical, "canonical");
  } catch (const InputError& error) {
    Finding("canonical JSON is not read back", std::string(error.what()) + "\n" + canonical);
  }
  if (again != value) Finding("canonical JSON reads back to a different value", canonical);
  const std::string twice = CanonicalJson(again);
  if (twice != canonical) Finding("canonical JSON is not stable", canonical + "\n" + twice);
}

}  // namespace
}  // namespace stepledger::fuzz

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace stepledger::fuzz;
  ExpectOnlyInputErrors("canonical json", [&] { CheckCanonical(AsText(data, size)); });
  return 0;
}
