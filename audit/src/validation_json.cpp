#include "stepledger/audit/validation_json.h"

#include <string>

#include "audit_reader.h"
#include "stepledger/audit/canonical_json.h"
#include "stepledger/audit/model_json.h"
#include "stepledger/engine/resampling.h"

namespace stepledger {
namespace {

using json = nlohmann::json;
using audit_detail::AuditReader;

json Interval(const std::pair<double, double>& interval) {
  return json::array({NumberOrNull(interval.first), NumberOrNull(interval.second)});
}

json FoldsJson(const FoldValidation& folds) {
  json per_fold = json::array();
  for (const FoldOutcome& fold : folds.per_fold) {
    per_fold.push_back({{"fold", fold.fold}, {"rows", fold.rows}, {"weight", NumberOrNull(fold.weight)},
                        {"sse", NumberOrNull(fold.sse)}});
  }
  json out{{"k", folds.settings.k},
           {"seed", folds.settings.seed},
           {"rmse", NumberOrNull(folds.rmse)},
           {"residual_sd", NumberOrNull(folds.residual_sd)},
           {"per_fold", std::move(per_fold)}};
  if (!folds.undefined_reason.empty()) out["undefined_reason"] = folds.undefined_reason;
  return out;
}

json HoldoutJson(const HoldoutValidation& holdout) {
  json calibration = json::array();
  for (const CalibrationBin& bin : holdout.calibration) {
    calibration.push_back({{"decile", bin.decile},
                           {"rows", bin.rows},
                           {"mean_prediction", NumberOrNull(bin.mean_prediction)},
                           {"mean_observed", NumberOrNull(bin.mean_observed)}});
  }
  return {{"fraction", holdout.settings.fraction},
          {"seed", holdout.settings.seed},
          {"rows", holdout.rows},
          {"weight", NumberOrNull(holdout.weight)},
          {"rmse", NumberOrNull(holdout.rmse)},
          {"mean_error", NumberOrNull(holdout.mean_error)},
          {"r2", NumberOrNull(holdout.r2)},
          {"rows_outside_ranges", holdout.rows_outside_ranges},
          {"rows_high_leverage", holdout.rows_high_leverage},
          {"calibration", std::move(calibration)}};
}

json BootstrapJson(const BootstrapValidation& bootstrap) {
  json inclusion = json::array();
  for (const TermInclusion& term : bootstrap.inclusion) {
    inclusion.push_back({{"term", term.term}, {"frequency", NumberOrNull(term.frequency)}});
  }
  json sizes = json::array();
  for (const SizeFrequency& size : bootstrap.sizes) {
    sizes.push_back({{"size", size.size}, {"replicates", size.replicates}});
  }
  json models = json::array();
  for (const ModelFrequency& model : bootstrap.models) {
    models.push_back({{"terms", model.terms}, {"frequency", NumberOrNull(model.frequency)}, {"chosen", model.chosen}});
  }
  json coefficients = json::array();
  for (const CoefficientSpread& spread : bootstrap.coefficients) {
    coefficients.push_back({{"name", spread.name},
                            {"inclusion", NumberOrNull(spread.inclusion)},
                            {"conditional", spread.conditional ? Interval(*spread.conditional) : json(nullptr)},
                            {"unconditional", Interval(spread.unconditional)}});
  }
  json substitutes = json::array();
  for (const SubstitutePair& pair : bootstrap.substitutes) {
    substitutes.push_back({{"first", pair.first},
                           {"second", pair.second},
                           {"together", NumberOrNull(pair.together)},
                           {"first_only", NumberOrNull(pair.first_only)},
                           {"second_only", NumberOrNull(pair.second_only)},
                           {"statistic", NumberOrNull(pair.statistic)}});
  }
  return {{"replicates", bootstrap.settings.replicates},
          {"seed", bootstrap.settings.seed},
          {"inclusion", std::move(inclusion)},
          {"sizes", std::move(sizes)},
          {"models", std::move(models)},
          {"chosen_among_top", bootstrap.chosen_among_top},
          {"coefficients", std::move(coefficients)},
          {"substitutes", std::move(substitutes)}};
}

// The typed reader: each part checks its keys' types and ranges, naming the key path.
class ValidationReader {
 public:
  explicit ValidationReader(std::string_view source) : reader_(source) {}

  ValidationResult Read(const json& value) const {
    const std::string path = "validation";
    if (!value.is_object()) reader_.Fail(path, "expected an object, found " + AuditReader::TypeOf(value));
    ValidationResult result;
    result.folds = Folds(reader_.Object(value, path, "folds"), path + ".folds");
    if (const json* holdout = AuditReader::Find(value, "holdout"); holdout != nullptr && !holdout->is_null()) {
      result.holdout = Holdout(reader_.Object(value, path, "holdout"), path + ".holdout");
    }
    if (const json* bootstrap = AuditReader::Find(value, "bootstrap"); bootstrap != nullptr && !bootstrap->is_null()) {
      result.bootstrap = Bootstrap(reader_.Object(value, path, "bootstrap"), path + ".bootstrap");
    }
    return result;
  }

 private:
  // Seeds are unsigned 64-bit: the whole range is valid, so Integer's int64 bound does not apply.
  std::uint64_t Seed(const json& parent, const std::string& path) const {
    const json& value = reader_.Member(parent, path, "seed");
    if (value.is_number_unsigned()) return value.get<std::uint64_t>();
    return static_cast<std::uint64_t>(reader_.Integer(value, AuditReader::Join(path, "seed"), 0));
  }
  std::size_t Size(const json& parent, const std::string& path, const char* key, std::int64_t minimum,
                   std::int64_t maximum = std::numeric_limits<std::int64_t>::max()) const {
    return static_cast<std::size_t>(reader_.Integer(parent, path, key, minimum, maximum));
  }
  double Share(const json& parent, const std::string& path, const char* key) const {
    const double value = reader_.Number(parent, path, key);
    if (!(value >= 0 && value <= 1)) {
      reader_.Fail(AuditReader::Join(path, key), "expected a share from 0 to 1, found " + CanonicalNumber(value));
    }
    return value;
  }
  const json& Array(const json& parent, const std::string& path, const char* key) const {
    const json& value = reader_.Member(parent, path, key);
    if (!value.is_array()) reader_.Fail(AuditReader::Join(path, key), "expected an array, found " + AuditReader::TypeOf(value));
    return value;
  }
  // Reads every object of the array parent[key] with read(entry, "path.key[i]").
  template <typename Read>
  void Each(const json& parent, const std::string& path, const char* key, const Read& read) const {
    const json& array = Array(parent, path, key);
    const std::string list = AuditReader::Join(path, key);
    for (std::size_t i = 0; i < array.size(); ++i) read(reader_.ObjectAt(array, list, i), AuditReader::Index(list, i));
  }
  std::pair<double, double> Pair(const json& value, const std::string& path) const {
    const std::vector<double> numbers = reader_.Numbers(value, path);
    if (numbers.size() != 2) reader_.Fail(path, "expected [low, high], found " + std::to_string(numbers.size()) + " numbers");
    return {numbers[0], numbers[1]};
  }

  FoldValidation Folds(const json& value, const std::string& path) const {
    FoldValidation folds;
    folds.settings.k = Size(value, path, "k", static_cast<std::int64_t>(kMinFolds), static_cast<std::int64_t>(kMaxFolds));
    folds.settings.seed = Seed(value, path);
    folds.rmse = reader_.OptionalNumber(value, path, "rmse");
    folds.undefined_reason = reader_.OptionalString(value, path, "undefined_reason").value_or("");
    folds.residual_sd = reader_.OptionalNumber(value, path, "residual_sd");
    const std::int64_t last_fold = static_cast<std::int64_t>(folds.settings.k) - 1;
    Each(value, path, "per_fold", [&](const json& entry, const std::string& at) {
      FoldOutcome fold;
      fold.fold = Size(entry, at, "fold", 0, last_fold);
      fold.rows = reader_.Count(entry, at, "rows");
      fold.weight = reader_.Number(entry, at, "weight");
      fold.sse = reader_.Number(entry, at, "sse");
      folds.per_fold.push_back(fold);
    });
    if (folds.per_fold.size() > folds.settings.k) {
      reader_.Fail(AuditReader::Join(path, "per_fold"), "has " + std::to_string(folds.per_fold.size()) +
                                                            " folds, more than k = " + std::to_string(folds.settings.k));
    }
    return folds;
  }

  HoldoutValidation Holdout(const json& value, const std::string& path) const {
    HoldoutValidation holdout;
    holdout.settings.fraction = reader_.Number(value, path, "fraction");
    if (!(holdout.settings.fraction > 0 && holdout.settings.fraction < 1)) {
      reader_.Fail(AuditReader::Join(path, "fraction"),
                   "expected a number between 0 and 1 (exclusive), found " + CanonicalNumber(holdout.settings.fraction));
    }
    holdout.settings.seed = Seed(value, path);
    holdout.rows = reader_.Count(value, path, "rows");
    holdout.weight = reader_.Number(value, path, "weight");
    holdout.rmse = reader_.OptionalNumber(value, path, "rmse");
    holdout.mean_error = reader_.OptionalNumber(value, path, "mean_error");
    holdout.r2 = reader_.OptionalNumber(value, path, "r2");
    holdout.rows_outside_ranges = reader_.Count(value, path, "rows_outside_ranges");
    holdout.rows_high_leverage = reader_.Count(value, path, "rows_high_leverage");
    Each(value, path, "calibration", [&](const json& entry, const std::string& at) {
      CalibrationBin bin;
      bin.decile = Size(entry, at, "decile", 1, 10);
      bin.rows = reader_.Count(entry, at, "rows");
      bin.mean_prediction = reader_.Number(entry, at, "mean_prediction");
      bin.mean_observed = reader_.Number(entry, at, "mean_observed");
      holdout.calibration.push_back(bin);
    });
    return holdout;
  }

  BootstrapValidation Bootstrap(const json& value, const std::string& path) const {
    BootstrapValidation bootstrap;
    bootstrap.settings.replicates = Size(value, path, "replicates", 1, static_cast<std::int64_t>(kMaxReplicates));
    bootstrap.settings.seed = Seed(value, path);
    Each(value, path, "inclusion", [&](const json& entry, const std::string& at) {
      bootstrap.inclusion.push_back({reader_.String(entry, at, "term"), Share(entry, at, "frequency")});
    });
    Each(value, path, "sizes", [&](const json& entry, const std::string& at) {
      bootstrap.sizes.push_back({Size(entry, at, "size", 0),
                                 Size(entry, at, "replicates", 0, static_cast<std::int64_t>(bootstrap.settings.replicates))});
    });
    Each(value, path, "models", [&](const json& entry, const std::string& at) {
      ModelFrequency model;
      model.terms = reader_.Strings(reader_.Member(entry, at, "terms"), AuditReader::Join(at, "terms"));
      model.frequency = Share(entry, at, "frequency");
      model.chosen = reader_.Bool(entry, at, "chosen");
      bootstrap.models.push_back(std::move(model));
    });
    bootstrap.chosen_among_top = reader_.Bool(value, path, "chosen_among_top");
    Each(value, path, "coefficients", [&](const json& entry, const std::string& at) {
      CoefficientSpread spread;
      spread.name = reader_.String(entry, at, "name");
      spread.inclusion = Share(entry, at, "inclusion");
      const json& conditional = reader_.Member(entry, at, "conditional");
      if (!conditional.is_null()) spread.conditional = Pair(conditional, AuditReader::Join(at, "conditional"));
      spread.unconditional = Pair(reader_.Member(entry, at, "unconditional"), AuditReader::Join(at, "unconditional"));
      bootstrap.coefficients.push_back(std::move(spread));
    });
    Each(value, path, "substitutes", [&](const json& entry, const std::string& at) {
      SubstitutePair pair;
      pair.first = reader_.String(entry, at, "first");
      pair.second = reader_.String(entry, at, "second");
      pair.together = Share(entry, at, "together");
      pair.first_only = Share(entry, at, "first_only");
      pair.second_only = Share(entry, at, "second_only");
      pair.statistic = reader_.Number(entry, at, "statistic");
      bootstrap.substitutes.push_back(std::move(pair));
    });
    return bootstrap;
  }

  AuditReader reader_;
};

}  // namespace

json ValidationToJson(const ValidationResult& validation) {
  json out{{"folds", FoldsJson(validation.folds)}};
  if (validation.holdout) out["holdout"] = HoldoutJson(*validation.holdout);
  if (validation.bootstrap) out["bootstrap"] = BootstrapJson(*validation.bootstrap);
  return out;
}

ValidationResult ValidationFromJson(const json& validation, std::string_view source_name) {
  return ValidationReader(source_name).Read(validation);
}

}  // namespace stepledger
