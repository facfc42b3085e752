#include "stepledger/io/plan_file.h"

#include <algorithm>
#include <cerrno>
#include <cstring>
#include <fstream>
#include <iterator>
#include <limits>
#include <map>
#include <set>
#include <sstream>
#include <type_traits>
#include <utility>
#include <vector>

#include "stepledger/engine/errors.h"
#include "stepledger/engine/number_format.h"
#include "stepledger/selection/search.h"
#include "stepledger/io/json_reader.h"

namespace stepledger {
namespace {

using nlohmann::json;

std::string Quote(std::string_view text) { return "'" + QuoteForMessage(text) + "'"; }

// What the plan holds at a key, for "expected ..., found ..." (JSON text, shortened).
std::string Found(const json& value) { return QuoteForMessage(value.dump(), 60); }

std::string Join(const std::string& path, std::string_view key) {
  return path.empty() ? std::string(key) : path + "." + std::string(key);
}

std::string Index(const std::string& path, std::size_t index) {
  return path + "[" + std::to_string(index) + "]";
}

std::string JoinNames(const std::vector<const char*>& names) {
  std::string text;
  for (std::size_t i = 0; i < names.size(); ++i) {
    if (i > 0) text += ", ";
    text += names[i];
  }
  return text;
}

// An object whose keys must all be known.
class ObjectReader {
 public:
  ObjectReader(const json& value, std::string path, std::vector<const char*> known)
      : value_(value), path_(std::move(path)) {
    if (!value.is_object()) {
      throw PlanError(path_, "expected an object, found " + Found(value));
    }
    for (const auto& entry : value.items()) {
      const std::string& key = entry.key();  // a structured binding cannot be captured before C++20 in Clang 14
      const bool is_known = std::any_of(known.begin(), known.end(),
                                        [&](const char* name) { return key == name; });
      if (!is_known) {
        throw PlanError(Join(path_, key), "unknown key; the keys here are " + JoinNames(known));
      }
    }
  }
  const json* Get(std::string_view key) const {
    const auto found = value_.find(key);
    return found == value_.end() ? nullptr : &*found;
  }
  std::string Path(std::string_view key) const { return Join(path_, key); }

 private:
  const json& value_;
  std::string path_;
};

std::string ReadString(const json& value, const std::string& path, bool allow_empty = false) {
  if (!value.is_string()) throw PlanError(path, "expected a string, found " + Found(value));
  std::string text = value.get<std::string>();
  if (text.empty() && !allow_empty) {
    throw PlanError(path, "expected a non-empty string, found \"\"");
  }
  return text;
}

bool ReadBool(const json& value, const std::string& path) {
  if (!value.is_boolean()) throw PlanError(path, "expected true or false, found " + Found(value));
  return value.get<bool>();
}

// A JSON integer (not 2.0) in [minimum, maximum].
std::uint64_t ReadInteger(const json& value, const std::string& path, std::uint64_t minimum,
                          std::uint64_t maximum = std::numeric_limits<std::uint64_t>::max()) {
  const std::string expected = "expected an integer >= " + std::to_string(minimum);
  if (!value.is_number_integer()) throw PlanError(path, expected + ", found " + Found(value));
  if (!value.is_number_unsigned() && value.get<std::int64_t>() < 0) {
    throw PlanError(path, expected + ", found " + Found(value));
  }
  const std::uint64_t number = value.get<std::uint64_t>();
  if (number < minimum) throw PlanError(path, expected + ", found " + Found(value));
  if (number > maximum) {
    throw PlanError(path, "expected an integer from " + std::to_string(minimum) + " to " +
                              std::to_string(maximum) + ", found " + Found(value));
  }
  return number;
}

double ReadProbability(const json& value, const std::string& path) {
  if (!value.is_number()) {
    throw PlanError(path, "expected a number in (0, 1), found " + Found(value));
  }
  const double number = value.get<double>();
  if (!(number > 0 && number < 1)) {
    throw PlanError(path, "expected a number in (0, 1), found " + Found(value));
  }
  return number;
}

// An unsigned 64-bit integer (a seed): every JSON integer from 0 to 2^64 - 1, read exactly (the
// JSON reader keeps integers up to 2^64 - 1 as integers; 2^64 and beyond arrive as doubles).
std::uint64_t ReadSeed(const json& value, const std::string& path) {
  if (!value.is_number_unsigned() && !(value.is_number_integer() && value.get<std::int64_t>() >= 0)) {
    throw PlanError(path, "expected an integer from 0 to 18446744073709551615 (2^64 - 1), found " + Found(value));
  }
  return value.get<std::uint64_t>();
}

// A JSON integer for a setting of type Field whose rule, [minimum, maximum], ValidateSearchSettings
// checks (the one place of the search's rules). The reader checks the type only, and refuses here
// what Field cannot hold, with the rule's own range so that the message is the same for 101 and
// for 2^31.
template <typename Field>
Field ReadIntegerInto(const json& value, const std::string& path, std::size_t minimum, std::size_t maximum) {
  const auto refuse = [&] {
    return PlanError(path, "expected an integer from " + std::to_string(minimum) + " to " +
                               std::to_string(maximum) + ", found " + Found(value));
  };
  if (!value.is_number_integer()) throw refuse();
  if (value.is_number_unsigned()) {
    const std::uint64_t number = value.get<std::uint64_t>();
    if (number > static_cast<std::uint64_t>(std::numeric_limits<Field>::max())) throw refuse();
    return static_cast<Field>(number);
  }
  const std::int64_t number = value.get<std::int64_t>();
  if constexpr (std::is_signed_v<Field>) {
    if (number < std::numeric_limits<Field>::min() || number > std::numeric_limits<Field>::max()) throw refuse();
  } else {
    if (number < 0) throw refuse();
  }
  return static_cast<Field>(number);
}

// A JSON number for a setting whose range ValidateSearchSettings checks.
double ReadNumber(const json& value, const std::string& path, std::string_view rule) {
  if (!value.is_number()) throw PlanError(path, "expected " + std::string(rule) + ", found " + Found(value));
  return value.get<double>();
}

// "holdout": {"fraction", "seed"}; a key left out takes HoldoutSettings' default.
HoldoutSettings ReadHoldout(const json& value, const std::string& path) {
  ObjectReader object(value, path, {"fraction", "seed"});
  HoldoutSettings holdout;
  if (const json* fraction = object.Get("fraction")) {
    holdout.fraction = ReadNumber(*fraction, object.Path("fraction"), "a number strictly between 0 and 1");
  }
  if (const json* seed = object.Get("seed")) holdout.seed = ReadSeed(*seed, object.Path("seed"));
  return holdout;
}

// "bootstrap": {"replicates", "seed"}; a key left out takes BootstrapSettings' default.
BootstrapSettings ReadBootstrap(const json& value, const std::string& path) {
  ObjectReader object(value, path, {"replicates", "seed"});
  BootstrapSettings bootstrap;
  if (const json* replicates = object.Get("replicates")) {
    bootstrap.replicates =
        ReadIntegerInto<std::size_t>(*replicates, object.Path("replicates"), 1, kMaxReplicates);
  }
  if (const json* seed = object.Get("seed")) bootstrap.seed = ReadSeed(*seed, object.Path("seed"));
  return bootstrap;
}

std::vector<std::string> ReadStrings(const json& value, const std::string& path, bool allow_empty) {
  if (!value.is_array()) throw PlanError(path, "expected an array of strings, found " + Found(value));
  std::vector<std::string> strings;
  for (std::size_t i = 0; i < value.size(); ++i) {
    strings.push_back(ReadString(value[i], Index(path, i), allow_empty));
  }
  return strings;
}

constexpr const char* kKindKeys[] = {"column", "power", "log", "categorical", "product"};

TermSpec ReadTerm(const json& value, const std::string& path) {
  ObjectReader object(value, path,
                      {"name", "column", "power", "log", "categorical", "baseline", "product"});
  TermSpec term;
  term.key_path = path;
  const json* name = object.Get("name");
  if (name == nullptr) throw PlanError(object.Path("name"), "missing: every term needs a name");
  term.name = ReadString(*name, object.Path("name"));

  std::vector<const char*> kinds;
  for (const char* key : kKindKeys) {
    if (object.Get(key) != nullptr) kinds.push_back(key);
  }
  if (kinds.empty()) {
    throw PlanError(path, "expected one of the keys column, power, log, categorical, product; "
                          "found none");
  }
  if (kinds.size() > 1) {
    throw PlanError(path, "a term has exactly one of column, power, log, categorical, product; "
                          "found " + std::string(kinds[0]) + " and " + kinds[1]);
  }
  const std::string kind = kinds.front();
  if (kind != "categorical" && object.Get("baseline") != nullptr) {
    throw PlanError(object.Path("baseline"), "a baseline belongs to a categorical term only");
  }
  if (kind == "column") {
    term.kind = TermKind::kNumeric;
    term.column = ReadString(*object.Get("column"), object.Path("column"));
  } else if (kind == "log") {
    term.kind = TermKind::kLog;
    term.column = ReadString(*object.Get("log"), object.Path("log"));
  } else if (kind == "categorical") {
    term.kind = TermKind::kCategorical;
    term.column = ReadString(*object.Get("categorical"), object.Path("categorical"));
    if (const json* baseline = object.Get("baseline")) {
      // A level may be any text but a missing token; an empty level is allowed when "" is not
      // a missing token, so an empty string is accepted here and checked against the data.
      term.baseline = ReadString(*baseline, object.Path("baseline"), /*allow_empty=*/true);
    }
  } else if (kind == "power") {
    term.kind = TermKind::kPower;
    const std::string power_path = object.Path("power");
    ObjectReader power(*object.Get("power"), power_path, {"column", "degree"});
    const json* column = power.Get("column");
    if (column == nullptr) throw PlanError(power.Path("column"), "missing: a power names its column");
    term.column = ReadString(*column, power.Path("column"));
    const json* degree = power.Get("degree");
    if (degree == nullptr) throw PlanError(power.Path("degree"), "missing: a power needs a degree");
    // Capped (design.h, kMaxPowerDegree): the power is made by repeated products per row.
    term.degree = static_cast<int>(ReadInteger(*degree, power.Path("degree"), 2, kMaxPowerDegree));
  } else {
    term.kind = TermKind::kProduct;
    const json& parts = *object.Get("product");
    const std::string parts_path = object.Path("product");
    if (!parts.is_array() || parts.size() != 2) {
      throw PlanError(parts_path, "expected an array of two term names, found " + Found(parts));
    }
    term.parts = ReadStrings(parts, parts_path, /*allow_empty=*/false);
  }
  return term;
}

// keep and never: unique names, and names of the plan's terms when it lists them. O(n log n):
// a long list costs no quadratic time.
void CheckTermNames(const std::vector<std::string>& names, const std::string& key,
                    const DesignSpec& design) {
  std::set<std::string_view> terms;
  for (const TermSpec& term : design.terms) terms.insert(term.name);
  std::map<std::string_view, std::size_t> seen;
  for (std::size_t i = 0; i < names.size(); ++i) {
    const auto [earlier, inserted] = seen.emplace(names[i], i);
    if (!inserted) {
      throw PlanError(Index(key, i), "term " + Quote(names[i]) + " is listed twice (also " +
                                         Index(key, earlier->second) + ")");
    }
    if (design.all_terms) continue;
    if (!terms.contains(names[i])) throw PlanError(Index(key, i), "no term named " + Quote(names[i]) + " in the plan");
  }
}

json TermSpecToJson(const TermSpec& term) {
  json object = json::object();
  object["name"] = term.name;
  switch (term.kind) {
    case TermKind::kNumeric: object["column"] = term.column; break;
    case TermKind::kPower: object["power"] = {{"column", term.column}, {"degree", term.degree}}; break;
    case TermKind::kLog: object["log"] = term.column; break;
    case TermKind::kCategorical:
      object["categorical"] = term.column;
      if (term.baseline) object["baseline"] = *term.baseline;
      break;
    case TermKind::kProduct: object["product"] = term.parts; break;
  }
  return object;
}

json DesignTermToJson(const Design& design, const DesignTerm& term) {
  TermSpec spec;
  spec.name = term.name;
  spec.kind = term.kind;
  spec.column = term.source_column;
  spec.degree = term.degree;
  if (term.kind == TermKind::kCategorical) spec.baseline = term.baseline;
  if (term.kind == TermKind::kProduct) {
    spec.parts = {design.terms[term.parts[0]].name, design.terms[term.parts[1]].name};
  }
  return TermSpecToJson(spec);
}

// The top-level keys a plan may hold; any other key is an error naming it.
ObjectReader ReadPlanRoot(const json& value) {
  if (!value.is_object()) {
    throw PlanError("", "expected a JSON object at the top level, found " + Found(value));
  }
  return ObjectReader(value, "",
                      {"response", "response_transform", "intercept", "weights", "terms", "keep",
                       "never", "method", "criterion", "entry_p", "exit_p", "hierarchy",
                       "max_terms", "best_per_size", "subset_tolerance", "folds", "seed", "holdout",
                       "bootstrap", "missing", "max_levels"});
}

// The design's response side: response column, its transform, intercept and weights.
void ReadResponsePart(const ObjectReader& root, DesignSpec& design) {
  const json* response = root.Get("response");
  if (response == nullptr) {
    throw PlanError("response", "missing: the plan must name the response column");
  }
  design.response = ReadString(*response, "response");
  if (const json* transform = root.Get("response_transform")) {
    const std::string text = transform->is_string() ? transform->get<std::string>() : "";
    if (text == "log") {
      design.response_transform = ResponseTransform::kLog;
    } else if (text == "none") {
      design.response_transform = ResponseTransform::kNone;
    } else {
      throw PlanError("response_transform", "expected \"log\" or \"none\", found " + Found(*transform));
    }
  }
  if (const json* intercept = root.Get("intercept")) design.intercept = ReadBool(*intercept, "intercept");
  if (const json* weights = root.Get("weights"); weights != nullptr && !weights->is_null()) {
    design.weights = ReadString(*weights, "weights");
  }
}

// The design's terms (a list or "all") and the level cap, then the design's own checks. A list
// longer than the terms limit is refused before any term is read.
void ReadDesignTerms(const ObjectReader& root, DesignSpec& design, const InputLimits& limits) {
  const json* terms = root.Get("terms");
  if (terms == nullptr) {
    throw PlanError("terms", "missing: the plan must list its terms, or say \"all\"");
  }
  if (terms->is_string()) {
    if (terms->get<std::string>() != "all") {
      throw PlanError("terms", "expected an array of term objects or \"all\", found " + Found(*terms));
    }
    design.all_terms = true;
  } else if (terms->is_array()) {
    if (terms->size() > limits.terms) {
      throw LimitError(LimitKind::kTerms, limits.terms, "plan key 'terms'",
                       "the plan lists " + FormatCount(static_cast<std::int64_t>(terms->size())) + " terms");
    }
    design.terms.reserve(terms->size());
    for (std::size_t i = 0; i < terms->size(); ++i) {
      design.terms.push_back(ReadTerm((*terms)[i], Index("terms", i)));
    }
  } else {
    throw PlanError("terms", "expected an array of term objects or \"all\", found " + Found(*terms));
  }
  if (const json* max_levels = root.Get("max_levels")) {
    design.max_levels = static_cast<std::size_t>(ReadInteger(*max_levels, "max_levels", 2));
  }
  // Empty names, duplicates, product parts and cycles, with the same key paths as here.
  ValidateDesignSpec(design);
}

// keep and never: known, unique term names, and no term in both.
void ReadKeepAndNever(const ObjectReader& root, const DesignSpec& design, SearchOptions& search) {
  if (const json* keep = root.Get("keep")) search.keep = ReadStrings(*keep, "keep", false);
  if (const json* never = root.Get("never")) search.never = ReadStrings(*never, "never", false);
  CheckTermNames(search.keep, "keep", design);
  CheckTermNames(search.never, "never", design);
  std::map<std::string_view, std::size_t> kept;
  for (std::size_t i = 0; i < search.keep.size(); ++i) kept.emplace(search.keep[i], i);
  for (std::size_t i = 0; i < search.never.size(); ++i) {
    const auto found = kept.find(search.never[i]);
    if (found != kept.end()) {
      throw PlanError(Index("never", i),
                      "term " + Quote(search.never[i]) + " is also in " + Index("keep", found->second) +
                          "; a term cannot be both kept and never used");
    }
  }
}

// The search settings: method, criterion, thresholds and limits. Their cross-checks run in
// ValidateSearchSettings once the whole plan has been read.
void ReadSearchSettings(const ObjectReader& root, SearchOptions& search) {
  if (const json* method = root.Get("method")) {
    const auto parsed = method->is_string() ? MethodFromString(method->get<std::string>()) : std::nullopt;
    if (!parsed) {
      throw PlanError("method", "expected one of \"forward\", \"backward\", \"stepwise\", "
                                "\"all-subsets\", \"none\", found " + Found(*method));
    }
    search.method = *parsed;
  }
  if (const json* criterion = root.Get("criterion")) {
    const auto parsed =
        criterion->is_string() ? CriterionFromString(criterion->get<std::string>()) : std::nullopt;
    if (!parsed) {
      throw PlanError("criterion", "expected one of \"adj-r2\", \"aic\", \"aicc\", \"bic\", \"cp\", "
                                   "\"partial-f\", \"cv\", found " + Found(*criterion));
    }
    search.criterion = *parsed;
  }
  if (const json* entry = root.Get("entry_p")) search.entry_p = ReadProbability(*entry, "entry_p");
  if (const json* exit = root.Get("exit_p")) search.exit_p = ReadProbability(*exit, "exit_p");
  if (const json* hierarchy = root.Get("hierarchy")) search.hierarchy = ReadBool(*hierarchy, "hierarchy");
  if (const json* max_terms = root.Get("max_terms"); max_terms != nullptr && !max_terms->is_null()) {
    search.max_terms = static_cast<std::size_t>(ReadInteger(*max_terms, "max_terms", 1));
    if (*search.max_terms < search.keep.size()) {
      throw PlanError("max_terms", "expected at least " + std::to_string(search.keep.size()) +
                                       ", the number of terms in keep, found " + Found(*max_terms));
    }
  }
  if (const json* best = root.Get("best_per_size")) {
    search.best_per_size = static_cast<std::size_t>(ReadInteger(*best, "best_per_size", 1));
  }
  if (const json* tolerance = root.Get("subset_tolerance")) {
    search.subset_tolerance =
        ReadNumber(*tolerance, "subset_tolerance", "a number from 0 up to but not including 1");
  }
  if (const json* folds = root.Get("folds")) {
    search.folds = ReadIntegerInto<int>(*folds, "folds", kMinFolds, kMaxFolds);
  }
  if (const json* seed = root.Get("seed")) search.seed = ReadSeed(*seed, "seed");
  if (const json* holdout = root.Get("holdout"); holdout != nullptr && !holdout->is_null()) {
    search.holdout = ReadHoldout(*holdout, "holdout");
  }
  if (const json* bootstrap = root.Get("bootstrap"); bootstrap != nullptr && !bootstrap->is_null()) {
    search.bootstrap = ReadBootstrap(*bootstrap, "bootstrap");
  }
}

// The tokens a data cell may hold to mean "missing"; "" is a token like any other.
void ReadMissingTokens(const ObjectReader& root, std::vector<std::string>& missing_tokens) {
  if (const json* missing = root.Get("missing")) {
    missing_tokens = ReadStrings(*missing, "missing", /*allow_empty=*/true);
  }
}

std::string ByteCount(std::uint64_t bytes) {
  return bytes > static_cast<std::uint64_t>(std::numeric_limits<std::int64_t>::max())
             ? std::to_string(bytes)
             : FormatCount(static_cast<std::int64_t>(bytes));
}

// A plan file's bytes, refused past limit before they are held: a regular file by its size, a
// FIFO or a device (/dev/stdin) by reading at most limit + 1 bytes. Folders and files that cannot
// be opened get ReadWholeFile's messages.
std::string ReadPlanBytes(const std::filesystem::path& path, std::uint64_t limit) {
  const std::string quoted = "plan file '" + path.string() + "'";
  auto refuse = [&](const std::string& seen) {
    return LimitError(LimitKind::kPlanBytes, limit, quoted, seen);
  };
  std::error_code error;
  const std::filesystem::file_status status = std::filesystem::status(path, error);
  if (error || std::filesystem::is_directory(status)) return ReadWholeFile(path, "plan file");
  if (std::filesystem::is_regular_file(status)) {
    const std::uintmax_t size = std::filesystem::file_size(path, error);
    if (!error && size > limit) throw refuse("it holds " + ByteCount(size) + " bytes");
    std::string text = ReadWholeFile(path, "plan file");
    if (text.size() > limit) throw refuse("it holds " + ByteCount(text.size()) + " bytes");
    return text;
  }
  std::ifstream stream(path, std::ios::binary);
  if (!stream) throw InputError("cannot open " + quoted + ": " + std::strerror(errno));
  std::string text;
  std::vector<char> buffer(1 << 16);
  while (stream) {
    stream.read(buffer.data(), static_cast<std::streamsize>(buffer.size()));
    text.append(buffer.data(), static_cast<std::size_t>(stream.gcount()));
    if (text.size() > limit) throw refuse("it holds more than " + ByteCount(limit) + " bytes");
  }
  if (stream.bad()) throw InputError("cannot read " + quoted + ": " + std::strerror(errno));
  return text;
}

}  // namespace

Plan PlanFromJson(const json& value, const InputLimits& limits) {
  const ObjectReader root = ReadPlanRoot(value);
  Plan plan;
  // The order of the phases is the order in which errors are reported; keep it.
  ReadResponsePart(root, plan.design);
  ReadDesignTerms(root, plan.design, limits);
  ReadKeepAndNever(root, plan.design, plan.search);
  ReadSearchSettings(root, plan.search);
  ReadMissingTokens(root, plan.missing_tokens);
  // The rules that do not depend on how the keys were spelled (ranges, thresholds, keep and
  // never) are the search's own, so that a plan file, the command line and a replay agree.
  ValidateSearchSettings(plan.search);
  return plan;
}

LoadedPlan ParsePlanText(std::string text, std::string_view source_name, const InputLimits& limits) {
  if (text.size() > limits.plan_bytes) {
    throw LimitError(LimitKind::kPlanBytes, limits.plan_bytes, std::string(source_name),
                     "the plan holds " + ByteCount(text.size()) + " bytes");
  }
  LoadedPlan loaded;
  try {
    loaded.json = ParseStrictJson(text, source_name);
  } catch (const JsonReadError& error) {
    // A duplicate key is a plan error at its key; syntax and depth errors name the place.
    if (!error.key_path().empty()) throw PlanError(error.key_path(), error.detail());
    throw PlanError("", error.detail());
  }
  loaded.plan = PlanFromJson(loaded.json, limits);
  loaded.verbatim = std::move(text);
  return loaded;
}

LoadedPlan LoadPlanFile(const std::filesystem::path& path, const InputLimits& limits) {
  std::string text;
  try {
    text = ReadPlanBytes(path, limits.plan_bytes);
  } catch (const LimitError&) {
    throw;
  } catch (const InputError& error) {
    throw PlanError("", error.what());
  }
  return ParsePlanText(std::move(text), path.string(), limits);
}

json PlanToJson(const Plan& plan, const Design* design) {
  const DesignSpec& spec = plan.design;
  const SearchOptions& search = plan.search;
  json out = json::object();
  out["response"] = spec.response;
  out["response_transform"] = ToString(spec.response_transform);
  out["intercept"] = spec.intercept;
  out["weights"] = spec.weights ? json(*spec.weights) : json(nullptr);
  if (design != nullptr) {
    json terms = json::array();
    for (const auto& term : design->terms) terms.push_back(DesignTermToJson(*design, term));
    out["terms"] = std::move(terms);
  } else if (spec.all_terms) {
    out["terms"] = "all";
  } else {
    json terms = json::array();
    for (const auto& term : spec.terms) terms.push_back(TermSpecToJson(term));
    out["terms"] = std::move(terms);
  }
  out["keep"] = search.keep;
  out["never"] = search.never;
  out["method"] = ToString(search.method);
  out["criterion"] = ToString(search.criterion);
  out["entry_p"] = search.entry_p;
  out["exit_p"] = search.exit_p;
  out["hierarchy"] = search.hierarchy;
  out["max_terms"] = search.max_terms ? json(*search.max_terms) : json(nullptr);
  out["best_per_size"] = search.best_per_size;
  out["subset_tolerance"] = search.subset_tolerance;
  out["folds"] = search.folds;
  out["seed"] = search.seed;
  out["holdout"] = search.holdout ? json{{"fraction", search.holdout->fraction}, {"seed", search.holdout->seed}}
                                  : json(nullptr);
  out["bootstrap"] = search.bootstrap
                         ? json{{"replicates", search.bootstrap->replicates}, {"seed", search.bootstrap->seed}}
                         : json(nullptr);
  out["missing"] = plan.missing_tokens;
  out["max_levels"] = spec.max_levels;
  return out;
}

Plan MakeQuickPlan(std::string response_column) {
  Plan plan;
  plan.design.response = std::move(response_column);
  plan.design.all_terms = true;
  return plan;
}


}  // namespace stepledger
