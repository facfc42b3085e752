// Fuzz target: the CSV reader (engine/csv.h), on the bytes of a data file held in memory.
//
// Checked: CsvReader over the bytes (the ReadFunction constructor, as a decompressing source or
// a pipe feeds it), with one block larger than the input and again with one-byte blocks and
// one-byte reads, returns the same records (every field's text, line, column and quoting, every
// cell's classification by ClassifyCell) or the same error message; every record has the
// header's field count; bytes_read() is the input's size at the end. Only InputError is an
// acceptable exception (fuzz_support.h). table_scan_fuzz.cpp fuzzes the scan of a file.

#include <cstdint>
#include <string_view>

#include "csv_read_text.h"
#include "fuzz_support.h"

namespace stepledger::fuzz {
namespace {

// Larger than any input the fuzzer makes (it keeps them to a few KB): the whole input in one
// block. Not the default 1 MiB, whose allocation and zeroing per reader would dominate the time
// of every input under the sanitizers.
constexpr std::size_t kWholeBlockBytes = std::size_t{1} << 16;

void CheckReader(std::string_view bytes) {
  const ReadOutcome whole = ReadFromMemory(bytes, kWholeBlockBytes, SIZE_MAX);
  const ReadOutcome bytewise = ReadFromMemory(bytes, 1, 1);
  if (whole.text != bytewise.text) {
    Finding("CsvReader with 1-byte blocks and reads differs from one block",
            "one block:\n" + whole.text + "\n1-byte blocks:\n" + bytewise.text);
  }
}

}  // namespace
}  // namespace stepledger::fuzz

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  using namespace stepledger::fuzz;
  ExpectOnlyInputErrors("csv reader", [&] { CheckReader(AsText(data, size)); });
  return 0;
}
