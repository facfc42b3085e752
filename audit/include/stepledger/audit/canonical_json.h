#pragma once
// Canonical JSON for digests and seals, after the JSON Canonicalization Scheme (RFC 8785):
// no white space, object members sorted by the UTF-16 code units of their names, strings with
// the minimal escapes, and numbers in the shortest form that round-trips a double, written as
// ECMAScript writes numbers (1e+30, 0.002, 4.5, 1e-27). So a digest covers content, not
// bytes: the same document re-serialised by another JSON library verifies.
//
// The writer keeps its own stack: a value of any depth is written without recursion (a document
// read from a file has at most 64 levels, io/json_reader.h; one built in memory may have more).
//
// One deliberate departure: integers that nlohmann-json holds as integers are written
// exactly, even beyond 2^53 (seeds). Integral doubles below 2^53 print the same either way.

#include <string>

#include <nlohmann/json.hpp>

namespace stepledger {

/// Canonical text of a JSON value. Throws InputError for NaN or infinite numbers (JSON has none).
std::string CanonicalJson(const nlohmann::json& value);

/// ECMAScript's shortest round-trip text of a finite double ("-0" is written "0").
std::string CanonicalNumber(double value);

}  // namespace stepledger
