#pragma once
// The records a CsvReader returns for bytes held in memory, as one text, for fuzz targets that
// compare two ways of reading the same bytes (csv_reader_fuzz.cpp, table_scan_fuzz.cpp).

#include <algorithm>
#include <charconv>
#include <cstdint>
#include <cstring>
#include <string>
#include <string_view>

#include "fuzz_support.h"
#include "stepledger/engine/csv.h"

namespace stepledger::fuzz {

/// Shortest round-trip text of a double.
inline void AppendNumber(std::string& out, double value) {
  char buffer[32];
  const auto result = std::to_chars(buffer, buffer + sizeof buffer, value);
  out.append(buffer, result.ptr);
}

/// Everything the reader returned, as text (header, then per record its index, line, offset and
/// every field's place, quoting, text and classification); or "error: message".
struct ReadOutcome {
  std::string text;
  std::uint64_t records = 0;
  bool ok = false;
};

/// Reads bytes with CsvReader's ReadFunction constructor: blocks of block_bytes, each read
/// call returning at most read_limit bytes. Checks that every record has the header's field
/// count and that bytes_read() is the input's size at the end.
inline ReadOutcome ReadFromMemory(std::string_view bytes, std::size_t block_bytes, std::size_t read_limit) {
  ReadOutcome outcome;
  std::size_t position = 0;
  CsvReader::ReadFunction read = [&](char* buffer, std::size_t capacity) {
    const std::size_t count = std::min({capacity, read_limit, bytes.size() - position});
    std::memcpy(buffer, bytes.data() + position, count);
    position += count;
    return count;
  };
  CsvOptions options;
  options.block_bytes = block_bytes;
  try {
    CsvReader reader("fuzz.csv", read, options);
    for (const std::string& name : reader.header()) outcome.text += "[" + name + "]";
    outcome.text += "\n";
    CsvRecord record;
    while (reader.Next(record)) {
      if (record.fields.size() != reader.header().size()) {
        Finding("CsvReader returned a record whose field count is not the header's");
      }
      outcome.text += std::to_string(record.row_index) + "@" + std::to_string(record.line) + "+" +
                      std::to_string(record.offset);
      for (const CsvField& field : record.fields) {
        outcome.text += " " + std::to_string(field.line) + ":" + std::to_string(field.column) +
                        (field.quoted ? "q" : "u") + "[";
        outcome.text += field.text;
        outcome.text += "]";
        double value = 0;
        switch (ClassifyCell(field.text, options.missing_tokens, value)) {
          case CellKind::kNumber:
            outcome.text += "=";
            AppendNumber(outcome.text, value);
            break;
          case CellKind::kMissing: outcome.text += "=missing"; break;
          case CellKind::kText: outcome.text += "=text"; break;
          case CellKind::kNonFinite: outcome.text += "=nonfinite"; break;
        }
      }
      outcome.text += "\n";
      ++outcome.records;
    }
    if (reader.bytes_read() != bytes.size()) {
      Finding("CsvReader::bytes_read() is not the input's size at the end",
              std::to_string(reader.bytes_read()) + " != " + std::to_string(bytes.size()));
    }
    outcome.ok = true;
  } catch (const InputError& error) {
    outcome.text = std::string("error: ") + error.what();
  }
  return outcome;
}

}  // namespace stepledger::fuzz
