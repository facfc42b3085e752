#pragma once
// Term expansion: from a DesignSpec (what the plan asks for) and the DataProfile (what the
// data hold) to the Design: the design columns, grouped into terms, and the per-row
// evaluation used by every pass over the data. The engine never sees JSON; the plan file
// parser (audit/plan_file.h) fills a DesignSpec.

#include <cstdint>
#include <limits>
#include <map>
#include <optional>
#include <span>
#include <string>
#include <string_view>
#include <vector>

#include "stepledger/engine/csv.h"
#include "stepledger/engine/limits.h"
#include "stepledger/engine/profile.h"

namespace stepledger {

enum class TermKind {
  kNumeric,      ///< a numeric column as it is
  kPower,        ///< column^degree (2 <= degree <= kMaxPowerDegree), by repeated products in long double
  kLog,          ///< natural log of a column; a non-positive value is an error naming the row
  kCategorical,  ///< k levels -> k-1 indicator columns against a baseline level
  kProduct,      ///< product of two terms: every column of one times every column of the other
};
const char* ToString(TermKind kind);

/// One candidate term as the plan names it.
struct TermSpec {
  std::string name;
  TermKind kind = TermKind::kNumeric;
  std::string column;                   ///< source column (all kinds but kProduct)
  int degree = 1;                       ///< kPower: 2 to kMaxPowerDegree
  std::optional<std::string> baseline;  ///< kCategorical: the reference level, if given
  std::vector<std::string> parts;       ///< kProduct: exactly two term names
  std::string key_path;                 ///< where the plan said it, e.g. "terms[3]"; for messages
  bool operator==(const TermSpec&) const = default;
};

enum class ResponseTransform { kNone, kLog };
const char* ToString(ResponseTransform transform);

/// The design part of a plan.
struct DesignSpec {
  std::string response;
  ResponseTransform response_transform = ResponseTransform::kNone;
  /// Include an intercept column (column 0 of the design). Default: yes.
  bool intercept = true;
  /// Column of precision weights; rows with weight 0 are excluded and counted.
  std::optional<std::string> weights;
  /// When true, terms is ignored and every column other than the response and the weights
  /// becomes a term named after it (numeric, or categorical when not numeric; empty
  /// columns and columns with too many levels are skipped and reported).
  bool all_terms = false;
  /// Most levels a categorical term may have (>= 2; the plan's `max_levels`). An explicit
  /// categorical term over it is refused; with all_terms such a column, and one that looks
  /// like an identifier, is skipped (ReasonNotACandidateTerm in profile.h). Default 100.
  std::size_t max_levels = kDefaultMaxLevels;
  std::vector<TermSpec> terms;
  bool operator==(const DesignSpec&) const = default;
};

/// Highest degree of a power term. 12 is above the degree-10 polynomial of NIST StRD Filip, the
/// most collinear certified case the kernel must fit; a monomial of higher degree is aliased with
/// the lower ones at the kernel's tolerance on any usual range of values (common practice:
/// beyond a cubic, use a few powers of a centred column or a categorical band instead). The cap
/// also bounds the repeated products per row (a degree of 2^31 - 1 would never finish).
inline constexpr int kMaxPowerDegree = 12;

/// The checks that need no data: a non-empty response, term names non-empty, unique and not
/// "intercept", a power of degree 2 to kMaxPowerDegree, a source column named for every kind but products,
/// a baseline only on categorical terms, products of two existing, different terms and no
/// cycle among products, and at least one term (unless all_terms). Throws PlanError naming
/// the key path (TermSpec::key_path + ".name", ".product[1]", ...). BuildDesign calls it.
void ValidateDesignSpec(const DesignSpec& spec);

inline constexpr std::size_t kNoTerm = std::numeric_limits<std::size_t>::max();

struct DesignColumn {
  std::string name;            ///< "intercept", "age", "grade=A", "age:grade=A"
  std::size_t term = kNoTerm;  ///< owning term index; kNoTerm for the intercept
  /// Exact power of two by which the factor scales this column (see Design::scales).
  double scale = 1.0;
  /// The largest |value| the column can take over the data's rows, from the profile (a power's
  /// is the column's to that power, a product's the product of its parts'): what sets `scale`
  /// and what the magnitude check (kLargestMagnitude) reads. 1 for the intercept and indicators.
  double bound = 1.0;
};

/// The magnitudes stepledger fits. The largest |value| of every design column (a column, its log
/// or power, a product of terms), of the response (after its transform) and of the weights must
/// lie in [kSmallestMagnitude, kLargestMagnitude], or be 0. Sums of squares, variances and
/// covariances are squares and ratios of such numbers (up to about 1e240 times factors of n,
/// the weights and the conditioning), which keeps them well inside the range of doubles (about
/// 1e-308 to 1e308): outside the window the factor's power-of-two scales would still fit the
/// model, but the numbers reported in the data's units would overflow or lose their digits.
/// BuildDesign refuses such data with an InputError at the cell of the largest magnitude (a
/// product: a PlanError at the term), saying by what power of ten to rescale the column.
inline constexpr double kLargestMagnitude = 1e60;
inline constexpr double kSmallestMagnitude = 1e-60;

struct DesignTerm {
  std::string name;
  TermKind kind = TermKind::kNumeric;
  std::size_t first_column = 0;  ///< index of its first design column
  std::size_t column_count = 0;  ///< 1, or k-1 for a categorical, or the product of the parts'
  /// Terms this one is built on, for hierarchy: a product's two parts; for a power of degree
  /// d, the numeric term and the lower powers of the same column that the plan has.
  std::vector<std::size_t> parts;
  std::string source_column;               ///< empty for products
  int degree = 1;
  std::string baseline;                    ///< kCategorical: the baseline used
  std::vector<std::string> levels;         ///< kCategorical: the non-baseline levels, in column order
  std::string key_path;                    ///< from the TermSpec
};

/// Why a row was not used. Every other problem with a cell (text in a numeric column, a
/// non-finite number, a negative weight, a response <= 0 under "log", a log term's column
/// <= 0, an unseen level) is an InputError naming the cell, not a dropped row.
enum class DropReason {
  kMissing,     ///< a cell the design reads is empty or a missing token ("missing")
  kZeroWeight,  ///< the row's precision weight is 0 ("zero weight")
};
/// The plain words the audit and the reports record: "missing", "zero weight".
const char* ToString(DropReason reason);

/// What Expand made of a row. A row is counted once, under the first reason found
/// (response, weights, then the terms' columns in plan order).
struct RowOutcome {
  bool used = false;
  DropReason reason = DropReason::kMissing;  ///< meaningful only when !used
  /// When !used, the column whose cell dropped the row (the weights column for kZeroWeight);
  /// a view of a name the Design owns. Empty when used.
  std::string_view column;
};

/// The expanded design. Column 0 is the intercept when there is one.
class Design {
 public:
  std::string response;
  ResponseTransform response_transform = ResponseTransform::kNone;
  bool intercept = true;
  std::optional<std::string> weights;
  std::vector<DesignColumn> columns;
  std::vector<DesignTerm> terms;
  /// Terms of the spec that could not be used and why (e.g. all_terms skipping an id column).
  std::vector<std::pair<std::string, std::string>> skipped;
  /// Power-of-two scale of the response inside the factor.
  double response_scale = 1.0;

  std::size_t column_count() const { return columns.size(); }
  /// Index of a term by name, or kNoTerm.
  std::size_t FindTerm(std::string_view name) const;
  /// Column indices of a term.
  std::vector<std::size_t> TermColumns(std::size_t term) const;
  /// Scales of the design columns then the response: what FactorBuilder multiplies by.
  std::vector<double> scales() const;

  /// Evaluates one record into x (column_count() values, unscaled), y (transformed
  /// response) and w (weight, 1 without weights). Returns whether the row is used and
  /// otherwise why not. Throws InputError naming file:line:column for a log of a
  /// non-positive value, a negative or non-finite weight, and a text cell in a numeric column.
  /// Cost: O(columns used + design columns) per row, no heap allocation for a used row.
  /// Every used cell of the row is checked (so a bad cell is reported even in a dropped row),
  /// but log and the response transform are evaluated only for used rows.
  /// x_low (optional, empty or column_count() values): the low-order parts of x, so that the
  /// exact value of column j is x[j] + x_low[j]; nonzero only for power columns (the rounding
  /// error of the long double power), 0 elsewhere. Written only for used rows.
  RowOutcome Expand(const CsvReader& reader, const CsvRecord& record, std::span<double> x,
                    double& y, double& w, std::span<double> x_low = {}) const;
  /// True when some term is a power (so x_low can be nonzero).
  bool HasLowOrderParts() const;

  /// The term-evaluation half of Expand, shared with the prediction evaluator
  /// (engine/prediction.h): from the values of the source cells (indexed like source.cells:
  /// cell_values for numeric cells, cell_levels for categorical cells, holding the offset of
  /// the level among the term's columns or kNoTerm for the baseline) to the design row x
  /// (column_count() values; the intercept set to 1) and, when x_low is not empty, its
  /// low-order parts (see Expand). Only the cells of terms are read (not the response or the
  /// weights). Returns kNoTerm, or the index of the first log term (in evaluation order) whose
  /// value is not positive; x is then incomplete. No heap allocation.
  std::size_t EvaluateTerms(std::span<const double> cell_values,
                            std::span<const std::size_t> cell_levels, std::span<double> x,
                            std::span<double> x_low = {}) const;

  /// Throws InputError when the reader's header does not put the design's source columns
  /// where the profile found them (the file changed since it was profiled).
  void CheckHeader(const CsvReader& reader) const;
  /// The same check against a header read elsewhere (e.g. the typed spill's source).
  void CheckHeader(const std::vector<std::string>& header, const std::string& file_name) const;

  // Filled by BuildDesign: header positions of the source columns of each term etc.
  struct Source {
    std::ptrdiff_t response = -1;
    std::ptrdiff_t weights = -1;
    std::vector<std::ptrdiff_t> term_column;  ///< per term; -1 for products
    /// Per term: level -> offset among the term's columns; the baseline maps to kNoTerm.
    std::vector<std::map<std::string, std::size_t, std::less<>>> level_index;
    /// Distinct (header column, as numeric or as categorical) cells Expand reads, in the
    /// order of the drop reasons: response, weights, then the terms' columns in plan order.
    struct Cell {
      std::ptrdiff_t header_index = -1;
      std::string column_name;
      bool categorical = false;
      std::size_t term = kNoTerm;  ///< categorical: the term whose levels apply
    };
    std::vector<Cell> cells;
    std::ptrdiff_t response_cell = -1;   ///< index into cells
    std::ptrdiff_t weights_cell = -1;    ///< index into cells, -1 without weights
    std::vector<std::ptrdiff_t> term_cell;  ///< per term: index into cells; -1 for products
    /// Terms in an order where a product comes after its parts.
    std::vector<std::size_t> evaluation_order;
    std::string file_name;  ///< profile path, for the changed-file message
  } source;
};

/// Builds the design; throws PlanError naming the key path for: unknown columns, duplicate
/// term names, a product part that is not a term (or a cycle of products), a power of degree
/// outside 2 to kMaxPowerDegree, a power/log/numeric term on a non-numeric column, a categorical
/// baseline that is not a level, a categorical or empty response, a weights column that is not
/// numeric. Throws LimitError (engine/limits.h) for more terms than limits.terms ("terms": "all"
/// counts the usable columns before any term is built), a design of more than
/// limits.design_columns columns (each term's count is known before its columns are made: the
/// message names the term that crosses the limit and the largest terms) and a categorical term on
/// a column that passed the levels limit of the scan when the plan's max_levels is above it.
/// Cost: O(terms log terms + design columns), no step quadratic in the terms.
/// Default baseline of a categorical term: its most frequent level, ties broken by byte-wise
/// order (the largest cell gives the most precise contrasts); recorded in DesignTerm::baseline.
/// Throws InputError naming file:line:column (from ColumnProfile::min_at/max_at; the file alone
/// for a profile without them) for a column, response or weights outside the magnitudes above,
/// and PlanError naming the term's key for a product or power that leaves them.
Design BuildDesign(const DesignSpec& spec, const DataProfile& profile, const InputLimits& limits = {});

}  // namespace stepledger
