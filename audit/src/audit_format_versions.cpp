#include "stepledger/audit/audit_format_versions.h"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <set>
#include <string>
#include <tuple>
#include <unordered_map>
#include <utility>
#include <vector>

#include "stepledger/audit/audit_document.h"
#include "stepledger/io/json_reader.h"
#include "stepledger/selection/plan.h"
#include "stepledger/selection/search.h"

namespace stepledger {
namespace {

using json = nlohmann::json;

// ---- format_version 1 -> 2 --------------------------------------------------------------

using ColumnNames = std::vector<std::string>;

const json* Member(const json& parent, const char* key) {
  if (!parent.is_object()) return nullptr;
  const auto found = parent.find(key);
  return found == parent.end() ? nullptr : &*found;
}

std::vector<std::string> StringsOf(const json* array) {
  std::vector<std::string> strings;
  if (array == nullptr || !array->is_array()) return strings;
  for (const json& item : *array) {
    if (item.is_string()) strings.push_back(item.get<std::string>());
  }
  return strings;
}

// The version 2 names of a term's design columns, from the design section's terms (which
// record each term's kind, levels, parts and version 1 column names). A categorical term's
// columns are TERM=LEVEL; a product's are the parts' columns joined by ':' in the order
// BuildDesign makes them (first part's columns outer); any other term keeps its names.
// Returns false for a term the section does not describe well enough (its names then stay).
class V1ColumnNamer {
 public:
  explicit V1ColumnNamer(const json& design_terms) {
    if (!design_terms.is_array()) return;
    for (const json& term : design_terms) {
      const json* name = Member(term, "name");
      if (name != nullptr && name->is_string()) terms_.emplace(name->get<std::string>(), &term);
    }
  }

  bool NewNames(const std::string& term_name, ColumnNames& names, std::size_t depth = 0) {
    // Products of products are followed at most kMaxDepth deep (a plan nests far less): a
    // malformed section cannot make the walk exhaust the stack.
    constexpr std::size_t kMaxDepth = 64;
    if (depth > kMaxDepth) return false;
    if (const auto done = new_names_.find(term_name); done != new_names_.end()) {
      names = done->second;
      return true;
    }
    const auto found = terms_.find(term_name);
    // A product refers to its parts by name; a malformed section could make a cycle.
    if (found == terms_.end() || !visiting_.insert(term_name).second) return false;
    const json& term = *found->second;
    const json* kind = Member(term, "kind");
    const std::string kind_text = kind != nullptr && kind->is_string() ? kind->get<std::string>() : "";
    bool known = true;
    names.clear();
    if (kind_text == "categorical") {
      for (const std::string& level : StringsOf(Member(term, "levels"))) names.push_back(term_name + "=" + level);
    } else if (kind_text == "product") {
      const std::vector<std::string> parts = StringsOf(Member(term, "parts"));
      ColumnNames first, second;
      known = parts.size() == 2 && NewNames(parts[0], first, depth + 1) && NewNames(parts[1], second, depth + 1);
      for (const std::string& a : first) {
        for (const std::string& b : second) names.push_back(a + ":" + b);
      }
    } else {
      names = StringsOf(Member(term, "columns"));
    }
    visiting_.erase(term_name);
    if (!known || names.size() != StringsOf(Member(term, "columns")).size()) return false;
    new_names_.emplace(term_name, names);
    return true;
  }

 private:
  std::unordered_map<std::string, const json*> terms_;
  std::unordered_map<std::string, ColumnNames> new_names_;
  std::set<std::string> visiting_;
};

// Version 1 column name -> version 2 column name, for every column whose name changes.
std::vector<std::pair<std::string, std::string>> V1ColumnRenames(const json& document) {
  std::vector<std::pair<std::string, std::string>> renames;
  const json* design = Member(document, "design");
  const json* terms = design != nullptr ? Member(*design, "terms") : nullptr;
  if (terms == nullptr || !terms->is_array()) return renames;
  V1ColumnNamer namer(*terms);
  for (const json& term : *terms) {
    const json* name = Member(term, "name");
    if (name == nullptr || !name->is_string()) continue;
    ColumnNames new_names;
    if (!namer.NewNames(name->get<std::string>(), new_names)) continue;
    const std::vector<std::string> old_names = StringsOf(Member(term, "columns"));
    for (std::size_t c = 0; c < old_names.size(); ++c) {
      if (old_names[c] != new_names[c]) renames.emplace_back(old_names[c], new_names[c]);
    }
  }
  // Longest first, so that "age:grade[A]" is renamed whole before "grade[A]" could match
  // inside it.
  std::stable_sort(renames.begin(), renames.end(),
                   [](const auto& a, const auto& b) { return a.first.size() > b.first.size(); });
  return renames;
}

// Renames column names in every string of value: whole strings ("grade[A]" in a list of
// columns) and names inside texts (a caution's "age:grade[B] (12.53)"). Version 1 names all
// hold '[', so strings without one are left alone at the cost of one scan.
void RenameColumnsInString(std::string& text, const std::vector<std::pair<std::string, std::string>>& renames,
                           const std::unordered_map<std::string, std::string>& whole);

void RenameColumnsInStrings(json& root, const std::vector<std::pair<std::string, std::string>>& renames,
                            const std::unordered_map<std::string, std::string>& whole) {
  // An explicit stack: no nesting can exhaust the call stack.
  std::vector<json*> pending = {&root};
  while (!pending.empty()) {
    json& value = *pending.back();
    pending.pop_back();
    if (value.is_object() || value.is_array()) {
      for (json& child : value) pending.push_back(&child);
    } else if (value.is_string()) {
      RenameColumnsInString(value.get_ref<std::string&>(), renames, whole);
    }
  }
}

void RenameColumnsInString(std::string& text, const std::vector<std::pair<std::string, std::string>>& renames,
                           const std::unordered_map<std::string, std::string>& whole) {
  if (text.find('[') == std::string::npos) return;
  if (const auto found = whole.find(text); found != whole.end()) {
    text = found->second;
    return;
  }
  // A name can start only at or before the last '['.
  const std::size_t last_bracket = text.rfind('[');
  std::string renamed;
  renamed.reserve(text.size());
  std::size_t position = 0;
  while (position < text.size()) {
    if (position > last_bracket) {
      renamed.append(text, position, std::string::npos);
      break;
    }
    bool replaced = false;
    for (const auto& [old_name, new_name] : renames) {
      if (text.compare(position, old_name.size(), old_name) == 0) {
        renamed += new_name;
        position += old_name.size();
        replaced = true;
        break;
      }
    }
    if (!replaced) renamed += text[position++];
  }
  text = std::move(renamed);
}

// {"missing COLUMN": rows, "zero weight": rows} -> [{reason, column, rows}] in RowAccounting's
// order: reason (missing, then zero weight, then anything else by name), then column.
json V1RowsDropped(const json& dropped, const json& document) {
  if (!dropped.is_object()) return dropped;
  std::string weights;
  if (const json* design = Member(document, "design")) {
    if (const json* column = Member(*design, "weights"); column != nullptr && column->is_string()) {
      weights = column->get<std::string>();
    }
  }
  static const std::string kMissingPrefix = "missing ";
  using Entry = std::tuple<int, std::string, std::string, json>;  // (order, reason, column, rows)
  std::vector<Entry> entries;
  for (auto it = dropped.begin(); it != dropped.end(); ++it) {
    const std::string& key = it.key();
    if (key.rfind(kMissingPrefix, 0) == 0) {
      entries.emplace_back(0, "missing", key.substr(kMissingPrefix.size()), it.value());
    } else if (key == "zero weight") {
      entries.emplace_back(1, key, weights, it.value());
    } else {
      entries.emplace_back(2, key, "", it.value());
    }
  }
  std::sort(entries.begin(), entries.end(), [](const Entry& a, const Entry& b) {
    return std::tie(std::get<0>(a), std::get<1>(a), std::get<2>(a)) <
           std::tie(std::get<0>(b), std::get<1>(b), std::get<2>(b));
  });
  json list = json::array();
  for (const auto& [order, reason, column, rows] : entries) {
    list.push_back({{"reason", reason}, {"column", column}, {"rows", rows}});
  }
  return list;
}

// A whole number written as 3.0 by version 1 -> 3.
void CountAsInteger(json* value) {
  if (value == nullptr || !value->is_number_float()) return;
  const double number = value->get<double>();
  if (number == std::floor(number) && std::fabs(number) < 0x1p63) *value = static_cast<std::int64_t>(number);
}

json FromVersion1(const json& document) {
  json current = document;
  const auto renames = V1ColumnRenames(document);
  if (!renames.empty()) {
    const std::unordered_map<std::string, std::string> whole(renames.begin(), renames.end());
    // The plan names terms, never design columns; tool and the integrity fields are not content.
    static const std::set<std::string> kUntouched = {"format", "format_version", "tool", "plan",
                                                     "digests", "seal", "signature"};
    for (auto it = current.begin(); it != current.end(); ++it) {
      if (!kUntouched.count(it.key())) RenameColumnsInStrings(it.value(), renames, whole);
    }
  }
  if (current.contains("model") && current["model"].is_object()) {
    json& model = current["model"];
    if (model.contains("ssr")) {
      model["ss_regression"] = model["ssr"];
      model.erase("ssr");
    }
    CountAsInteger(model.contains("df_residual") ? &model["df_residual"] : nullptr);
    if (model.contains("anova") && model["anova"].is_object()) {
      for (auto& [key, row] : model["anova"].items()) {
        if (key == "terms" && row.is_array()) {
          for (json& term_row : row) CountAsInteger(term_row.is_object() && term_row.contains("df") ? &term_row["df"] : nullptr);
        } else if (row.is_object() && row.contains("df")) {
          CountAsInteger(&row["df"]);
        }
      }
    }
  }
  if (current.contains("search") && current["search"].is_object() && current["search"].contains("n")) {
    CountAsInteger(&current["search"]["n"]);
  }
  if (current.contains("data") && current["data"].is_object() && current["data"].contains("rows_dropped")) {
    current["data"]["rows_dropped"] = V1RowsDropped(current["data"]["rows_dropped"], document);
  }
  current["format_version"] = 2;
  return current;
}

// ---- format_version 2 -> 3 --------------------------------------------------------------

// The seed default of format_versions 1 and 2, recorded in plan.normalised where the plan file
// left the seed out.
constexpr std::int64_t kVersion2DefaultSeed = 20261201;

// Whether the plan file's text (plan.verbatim) sets "seed" at its top level. Text that is not a
// JSON object says no: the upgrade then leaves the seed, and verify reports the verbatim plan.
bool VerbatimPlanSetsSeed(const json& plan) {
  const json* verbatim = Member(plan, "verbatim");
  if (verbatim == nullptr || !verbatim->is_string()) return true;
  try {
    const json parsed = ParseStrictJson(verbatim->get_ref<const std::string&>(), "plan.verbatim");
    return !parsed.is_object() || parsed.contains("seed");
  } catch (const JsonReadError&) {
    return true;
  }
}

json FromVersion2(const json& document) {
  json current = document;
  if (current.contains("plan") && current["plan"].is_object() && current["plan"].contains("normalised") &&
      current["plan"]["normalised"].is_object()) {
    json& normalised = current["plan"]["normalised"];
    // Only the old default is replaced, and only where the plan file did not choose it: an
    // edited seed stays edited, and verify still compares it with plan.verbatim.
    const json* seed = Member(normalised, "seed");
    if (seed != nullptr && seed->is_number_integer() && seed->get<std::int64_t>() == kVersion2DefaultSeed &&
        !VerbatimPlanSetsSeed(current["plan"])) {
      normalised["seed"] = SearchOptions{}.seed;
    }
    if (!normalised.contains("holdout")) normalised["holdout"] = nullptr;
    if (!normalised.contains("bootstrap")) normalised["bootstrap"] = nullptr;
  }
  current["format_version"] = 3;
  return current;
}

// ---- format_version 3 -> 4 --------------------------------------------------------------

// The signature's new shape needs no translation: it is checked as recorded.
json FromVersion3(const json& document) {
  json current = document;
  if (current.contains("plan") && current["plan"].is_object() && current["plan"].contains("normalised") &&
      current["plan"]["normalised"].is_object()) {
    json& normalised = current["plan"]["normalised"];
    if (!normalised.contains("subset_tolerance")) normalised["subset_tolerance"] = 0;
  }
  if (current.contains("search") && current["search"].is_object()) {
    json& search = current["search"];
    // Version 3's all-subsets searches were exact; how many nodes they formed was not recorded
    // (the other methods form none).
    const json* method = Member(search, "method");
    const bool all_subsets = method != nullptr && method->is_string() &&
                             method->get_ref<const std::string&>() == ToString(Method::kAllSubsets);
    if (!search.contains("subset_nodes")) search["subset_nodes"] = all_subsets ? json(nullptr) : json(0);
    if (!search.contains("subset_tolerance")) search["subset_tolerance"] = 0;
    if (!search.contains("subset_guarantee")) {
      SearchResult exact;
      exact.method = Method::kAllSubsets;
      search["subset_guarantee"] = all_subsets ? json(exact.SubsetGuarantee()) : json(nullptr);
    }
  }
  current["format_version"] = 4;
  return current;
}

}  // namespace

json AuditInCurrentShape(const json& document) {
  const json* version = Member(document, "format_version");
  if (version == nullptr || !version->is_number_integer()) return document;
  const std::int64_t read_from = version->get<std::int64_t>();
  if (read_from < kOldestAuditFormatVersion || read_from >= kAuditFormatVersion) return document;
  json current = document;
  // One step per version, oldest first, so that each step is written against the shape of the
  // version it reads.
  if (current["format_version"] == 1) current = FromVersion1(current);
  if (current["format_version"] == 2) current = FromVersion2(current);
  if (current["format_version"] == 3) current = FromVersion3(current);
  current["read_from_format_version"] = read_from;
  return current;
}

}  // namespace stepledger
