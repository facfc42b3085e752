// The extension `stepledger._stepledger`: the run the command line makes (RunPlan, the same
// audit writer, the same report), for the package in python/stepledger/ that wraps it. No second
// pipeline: every function composes the libraries exactly as its command does (cli/src/).

#include <pybind11/pybind11.h>
#include <pybind11/stl.h>

#include <filesystem>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include <nlohmann/json.hpp>

#include "python_run.h"
#include "stepledger/audit/audit_compare.h"
#include "stepledger/audit/audit_document.h"
#include "stepledger/audit/audit_verify.h"
#include "stepledger/audit/fitted_model.h"
#include "stepledger/audit/prediction_json.h"
#include "stepledger/audit/rerun.h"
#include "stepledger/engine/csv.h"
#include "stepledger/engine/data_pass.h"
#include "stepledger/engine/prediction.h"
#include "stepledger/engine/row_cells.h"
#include "stepledger/engine/errors.h"
#include "stepledger/engine/limits.h"
#include "stepledger/io/atomic_file.h"
#include "stepledger/io/json_reader.h"
#include "stepledger/io/plan_file.h"
#include "stepledger/report/report.h"
#include "stepledger/run/cautions.h"
#include "stepledger/run/run_plan.h"
#include "stepledger/run/starter_plan.h"
#include "stepledger/engine/table_scan.h"
#include "stepledger/selection/observer.h"
#include "stepledger/selection/plan.h"

namespace stepledger::python {
namespace {

// The Python exception classes (module attributes; alive as long as the module).
py::handle g_input_error, g_plan_error, g_numerical_error, g_audit_error;

/// An input error found in an audit (reading it, or digests that do not hold where the command
/// refuses such an audit): raised as stepledger.AuditError.
class AuditInputError : public InputError {
 public:
  AuditInputError(const std::string& message, std::string key) : InputError(message), key_(std::move(key)) {}
  const std::string& key() const { return key_; }

 private:
  std::string key_;
};

void RaisePython(py::handle type, const char* message, py::object file, py::object line, py::object column,
                 py::object key) {
  py::object error = type(message);
  error.attr("file") = std::move(file);
  error.attr("line") = std::move(line);
  error.attr("column") = std::move(column);
  error.attr("key") = std::move(key);
  PyErr_SetObject(type.ptr(), error.ptr());
}

void TranslateErrors(std::exception_ptr pointer) {
  const py::object none = py::none();
  try {
    if (pointer) std::rethrow_exception(pointer);
  } catch (const AuditInputError& error) {
    RaisePython(g_audit_error, error.what(), none, none, none, error.key().empty() ? none : py::str(error.key()));
  } catch (const PlanError& error) {
    RaisePython(g_plan_error, error.what(), none, none, none,
                error.key_path().empty() ? none : py::str(error.key_path()));
  } catch (const JsonReadError& error) {
    RaisePython(g_input_error, error.what(), none, none, none,
                error.key_path().empty() ? none : py::str(error.key_path()));
  } catch (const LocatedInputError& error) {
    RaisePython(g_input_error, error.what(), py::str(error.file()), py::int_(error.line()),
                error.column() == 0 ? none : py::int_(error.column()), none);
  } catch (const InputError& error) {
    RaisePython(g_input_error, error.what(), none, none, none, none);
  } catch (const NumericalError& error) {
    RaisePython(g_numerical_error, error.what(), none, none, none, none);
  } catch (const ResourceError& error) {
    PyErr_SetString(PyExc_MemoryError, error.what());
  }
}

/// The progress and Ctrl-C hooks of the search (bootstrap, all-subsets and every step).
class PythonObserver : public SearchObserver {
 public:
  explicit PythonObserver(PythonHooks& hooks) : hooks_(hooks) {}
  void OnStart(const StartEvent& /*event*/) override { hooks_.Report("search", 0, 0); }
  void OnDecision(const DecisionEvent& event) override { hooks_.Report("search", event.step_index, 0); }
  void OnProgress(const ProgressEvent& event) override {
    hooks_.Report(event.stage.c_str(), event.done, event.total);
  }
  void OnSubsetProgress(const SubsetProgressEvent& event) override { hooks_.Report("all subsets", event.nodes, 0); }

 private:
  PythonHooks& hooks_;
};

/// What the package passes as data: a path, a list of paths (a data set), or columns.
struct DataArgument {
  DataSet set;
  std::shared_ptr<PythonColumns> columns;  // kept to set the hooks
};

DataArgument MakeData(const py::object& data) {
  DataArgument argument;
  if (py::isinstance<PythonColumns>(data)) {
    argument.columns = data.cast<std::shared_ptr<PythonColumns>>();
    argument.set = DataSet(std::static_pointer_cast<ColumnSource>(argument.columns));
  } else if (py::isinstance<py::str>(data)) {
    argument.set = DataSet(std::filesystem::path(data.cast<std::string>()));
  } else {
    std::vector<std::filesystem::path> paths;
    for (const py::handle item : data) paths.emplace_back(item.cast<std::string>());
    argument.set = DataSet(std::move(paths));
  }
  return argument;
}

/// Runs work with the GIL released, the hooks set on the columns and on the passes over the spill
/// (PassCheckScope, engine/data_pass.h); a PythonStop ends in the kept Python error
/// (KeyboardInterrupt for Ctrl-C), after the run's cleanup has run.
template <typename Work>
auto WithoutGil(PythonHooks& hooks, DataArgument* data, Work&& work) -> decltype(work()) {
  if (data != nullptr && data->columns) data->columns->SetHooks(&hooks);
  struct Unset {
    DataArgument* data;
    ~Unset() {
      if (data != nullptr && data->columns) data->columns->SetHooks(nullptr);
    }
  } unset{data};
  // Ctrl-C and progress inside the passes over the spill too (the factor pass, every replay),
  // before each block of a few thousand rows.
  const PassCheckScope pass_check(
      [&hooks](const PassProgress& progress) { hooks.Report(progress.pass, progress.done, progress.total); });
  try {
    py::gil_scoped_release release;
    return work();
  } catch (const PythonStop&) {
    hooks.RaiseKeptError();
  }
}

/// One run and its sealed audit: what the package's Result wraps.
struct RunHandle {
  RunResult run;
  nlohmann::json audit;  // sealed
  std::string comparison_text;  // rerun: what changed, as the command prints it
  std::string AuditText() const { return SerializeAudit(audit); }
  std::string ReportText() const {
    const std::optional<ReportDiagnostics> diagnostics = RunReportDiagnostics(run);
    return RenderTextReport(audit, diagnostics ? &*diagnostics : nullptr);
  }
  std::string ReportHtml() const {
    const std::optional<ReportDiagnostics> diagnostics = RunReportDiagnostics(run);
    return RenderHtmlReport(audit, diagnostics ? &*diagnostics : nullptr);
  }
};

LoadedPlan LoadPlan(const py::object& plan_text, const py::object& plan_path, const InputLimits& limits) {
  if (!plan_path.is_none()) return LoadPlanFile(plan_path.cast<std::string>(), limits);
  return ParsePlanText(plan_text.cast<std::string>(), "plan", limits);
}

std::shared_ptr<RunHandle> Run(const py::object& data, const py::object& plan_text, const py::object& plan_path,
                               const std::string& method, const std::string& criterion, bool fit_only, int threads,
                               const std::string& work_dir, double level, int refine, const std::string& sign_key,
                               const py::object& progress) {
  InputLimits limits;
  LoadedPlan loaded = LoadPlan(plan_text, plan_path, limits);
  // As the command line: an override makes the audit record the normalised plan it ran.
  if (fit_only) loaded.plan.search.method = Method::kNone;
  if (!method.empty()) {
    const auto parsed = MethodFromString(method);
    if (!parsed) throw InputError("method: unknown method '" + QuoteForMessage(method) + "'; use forward, backward, stepwise, all-subsets or none");
    loaded.plan.search.method = *parsed;
  }
  if (!criterion.empty()) {
    const auto parsed = CriterionFromString(criterion);
    if (!parsed) throw InputError("criterion: unknown criterion '" + QuoteForMessage(criterion) + "'; use adj-r2, aic, aicc, bic, cp, partial-f or cv");
    loaded.plan.search.criterion = *parsed;
  }
  if (!method.empty() || !criterion.empty()) {
    loaded.json = PlanToJson(loaded.plan);
    loaded.verbatim = loaded.json.dump(2) + "\n";
  }
  RunOptions options;
  options.threads = threads;
  options.work_dir = work_dir;
  options.limits = limits;
  options.fit.confidence_level = level;
  options.fit.max_refinement_passes = refine;
  options.diagnostics = true;  // the report and the extrapolation caution need it (select --out)
  DataArgument argument = MakeData(data);
  PythonHooks hooks(progress);
  auto handle = std::make_shared<RunHandle>();
  WithoutGil(hooks, &argument, [&] {
    PythonObserver observer(hooks);
    handle->run = RunPlan(argument.set, loaded, options, &observer);
    handle->audit = BuildSealedAudit(handle->run, AuditDocumentOptions{}, sign_key);
    return 0;
  });
  return handle;
}

nlohmann::json ReadAudit(const std::string& path) {
  try {
    return ReadAuditFile(path);
  } catch (const LimitError&) {
    throw;
  } catch (const JsonReadError& error) {
    throw AuditInputError(error.what(), error.key_path());
  } catch (const InputError& error) {
    throw AuditInputError(error.what(), "");
  }
}

py::tuple Verify(const std::string& audit_path, const py::object& data, const std::string& public_key, int threads,
                 const std::string& work_dir) {
  const nlohmann::json document = ReadAudit(audit_path);
  VerifyOptions options;
  options.public_key = public_key;
  options.threads = threads;
  options.work_dir = work_dir;
  std::optional<DataArgument> argument;
  if (!data.is_none()) {
    argument = MakeData(data);
    options.data = argument->set;
  }
  PythonHooks hooks{py::object(py::none())};
  const VerifyReport report = WithoutGil(hooks, argument ? &*argument : nullptr,
                                         [&] { return VerifyAudit(document, options); });
  nlohmann::json json = report.ToJson();
  json["audit"] = audit_path;
  return py::make_tuple(report.Holds(), audit_path + ":\n" + report.FullReport(), json.dump());
}

py::tuple Compare(const std::string& old_path, const std::string& new_path) {
  const nlohmann::json old_audit = ReadAudit(old_path);
  const nlohmann::json new_audit = ReadAudit(new_path);
  const AuditComparison comparison = CompareAudits(old_audit, new_audit);
  return py::make_tuple(comparison.ToJson().dump(), comparison.FullReport());
}

/// The parent's integrity, as `rerun` and `predict` require it before use.
void RequireIntegrity(const nlohmann::json& document, const std::string& path, const char* use) {
  const VerifyReport integrity = CheckAuditIntegrity(document, {}, InputLimits{});
  if (integrity.Holds()) return;
  throw AuditInputError(path + " does not verify (" +
                            (integrity.problems.empty() ? std::string("digests do not hold") : integrity.problems.front()) +
                            "); " + use + "; run stepledger.verify on it for the details",
                        "");
}

std::shared_ptr<RunHandle> Rerun(const std::string& audit_path, const py::object& data, int threads,
                                 const std::string& work_dir, const std::string& sign_key, const py::object& progress) {
  const nlohmann::json parent = ReadAudit(audit_path);
  RequireIntegrity(parent, audit_path, "a rerun is linked to a parent that holds");
  ReplayOverrides overrides;
  if (threads > 0) overrides.threads = threads;
  overrides.work_dir = work_dir;
  DataArgument argument = MakeData(data);
  PythonHooks hooks(progress);
  auto handle = std::make_shared<RunHandle>();
  WithoutGil(hooks, &argument, [&] {
    PythonObserver observer(hooks);
    RerunResult rerun = RerunRecordedPlan(parent, argument.set, audit_path, overrides, &observer, sign_key);
    handle->run = std::move(rerun.run);
    handle->audit = std::move(rerun.audit);
    handle->comparison_text = rerun.comparison.FullReport();
    return 0;
  });
  return handle;
}

/// Prices rows with an audit's final model, as `predict --json` does: one JSON object per row
/// (PredictedRowJson), in row order, handed to sink(bytes) as the text of a JSON array of up to
/// kPredictSinkRows rows at a time (the package builds its table from them), so that nothing here
/// grows with the rows. The rows are a CSV file (a path) or columns in memory (Columns), read
/// through the same evaluator (engine/row_cells.h). Returns the warning ("" when none).
constexpr std::size_t kPredictSinkRows = 4096;

std::string Predict(const std::string& audit_path, const py::object& rows_argument, double level,
                    const std::string& id_column, bool allow_unverified, const py::object& sink) {
  const nlohmann::json document = ReadAudit(audit_path);
  std::optional<FittedModel> fitted;
  try {
    fitted = FittedModelFromAudit(document, audit_path, InputLimits{});
  } catch (const LimitError&) {
    throw;
  } catch (const InputError& error) {
    throw AuditInputError(error.what(), "");
  }
  std::string warning;
  if (allow_unverified) {
    if (const VerifyReport integrity = CheckAuditIntegrity(document, {}, InputLimits{}); !integrity.Holds()) {
      warning = audit_path + " does not verify (" + integrity.problems.front() +
                "); these prices come from an audit whose digests do not hold (allow_unverified)";
    }
  } else {
    RequireIntegrity(document, audit_path, "its coefficients may have been edited (allow_unverified=True prices with it anyway)");
  }
  PredictionOptions options;
  options.level = level;
  options.Validate();
  std::optional<DataArgument> in_memory;
  if (py::isinstance<PythonColumns>(rows_argument)) in_memory = MakeData(rows_argument);
  const std::string rows_path = in_memory ? std::string() : rows_argument.cast<std::string>();
  PythonHooks hooks{py::object(py::none())};
  WithoutGil(hooks, in_memory ? &*in_memory : nullptr, [&] {
    const Predictor predictor(MakePricingModel(*fitted), options);
    std::string text;
    std::size_t rows_in_text = 0;
    const auto flush = [&] {
      if (rows_in_text == 0) return;
      text += ']';
      py::gil_scoped_acquire gil;
      try {
        sink(py::bytes(text));
      } catch (py::error_already_set& error) {
        error.restore();
        hooks.StopWithPythonError();
      }
      text.clear();
      rows_in_text = 0;
    };
    std::string id;
    // id: the id cell's text (a CSV field as written; a column's cell as RowCell gives it), or null.
    const auto add = [&](const PredictionRowEvaluator& evaluator, const RowCells& cells, const std::string* row_id) {
      const PredictedRow row = predictor.Predict(evaluator.Evaluate(cells));
      text += rows_in_text == 0 ? '[' : ',';
      text += PredictedRowJson(row, row_id).dump(-1, ' ', false, nlohmann::json::error_handler_t::replace);
      if (++rows_in_text == kPredictSinkRows) flush();
    };
    const auto id_index_in = [&](std::ptrdiff_t found, const std::string& name) {
      if (id_column.empty()) return std::ptrdiff_t{-1};
      if (found < 0) throw InputError(name + ": no column '" + QuoteForMessage(id_column) + "' in the header (named by id)");
      return found;
    };
    if (in_memory) {
      ColumnRows rows(*in_memory->columns);
      const std::ptrdiff_t id_index = id_index_in(rows.ColumnIndex(id_column), rows.display_name());
      const PredictionRowEvaluator evaluator(predictor.design(), rows);
      while (rows.Next()) {
        if (id_index >= 0) id.assign(rows.Cell(static_cast<std::size_t>(id_index)).text);
        add(evaluator, rows, id_index >= 0 ? &id : nullptr);
      }
    } else {
      CsvOptions csv;
      csv.missing_tokens = fitted->missing_tokens;
      CsvReader reader(rows_path, csv);
      const std::ptrdiff_t id_index = id_index_in(reader.ColumnIndex(id_column), rows_path);
      const PredictionRowEvaluator evaluator(predictor.design(), reader);
      CsvRecord record;
      while (reader.Next(record)) {
        if (id_index >= 0) id.assign(record.fields[static_cast<std::size_t>(id_index)].text);
        add(evaluator, CsvRowCells(reader, record), id_index >= 0 ? &id : nullptr);
      }
    }
    flush();
    return 0;
  });
  return warning;
}

/// `report AUDIT --html OUT [--data DATA] [--title T] [--allow-unverified]`: the HTML report of
/// an audit file, composed as the command composes it (integrity, DiagnoseAuditRows with data,
/// BuildReportModel, RenderHtmlReport), written atomically (an existing file needs force). Data
/// may be a path, a list of paths or columns in memory (DiagnoseAuditRows scans a DataSet and
/// checks its fingerprint against the audit's).
void Report(const std::string& audit_path, const std::string& out, const py::object& data, bool force,
            bool allow_unverified, const std::string& title, int threads, const std::string& work_dir) {
  const nlohmann::json audit = ReadAudit(audit_path);
  const std::string audit_name = std::filesystem::path(audit_path).filename().string();
  ReportOptions options;
  options.title = title;
  const InputLimits limits;
  const VerifyReport integrity = CheckAuditIntegrity(audit, {}, limits);
  if (!integrity.Holds()) {
    if (!allow_unverified) {
      throw AuditInputError(audit_path + ": the audit does not verify (" + integrity.problems.front() +
                                "); refusing to render it. stepledger.verify lists every problem; "
                                "allow_unverified=True renders it anyway, with a warning at the top",
                            "");
    }
    options.integrity_problems = integrity.problems;
  }
  std::optional<ReportDiagnostics> diagnostics;
  if (!data.is_none()) {
    DataArgument argument = MakeData(data);
    DataReadOptions read_options;
    read_options.threads = threads;
    read_options.work_dir = work_dir;
    read_options.limits = limits;
    PythonHooks hooks{py::object(py::none())};
    diagnostics = WithoutGil(hooks, &argument, [&] {
      return DiagnoseAuditRows(audit, argument.set, audit_name, {}, read_options);
    });
  }
  const ReportModel model = BuildReportModel(audit, diagnostics ? &*diagnostics : nullptr, options);
  AtomicWriteOptions write;
  write.overwrite = force;
  WriteFileAtomically(out, RenderHtmlReport(model, options.chart_width), write);
}

/// `profile --json` for Python: the columns, the fingerprint and, with a response, the starter plan.
std::string Profile(const py::object& data, const std::string& response, int threads) {
  DataArgument argument = MakeData(data);
  const InputLimits limits;
  ScanOptions scan;
  scan.threads = threads;
  scan.spill = false;  // the profile is all it needs
  scan.profile.max_levels = static_cast<std::size_t>(limits.levels);
  scan.csv.max_columns = limits.columns;
  PythonHooks hooks{py::object(py::none())};
  const ScanResult scanned = WithoutGil(hooks, &argument, [&] { return ScanData(argument.set, scan); });
  const StarterPlan starter = MakeStarterPlan(scanned.profile, response, limits, "response");
  nlohmann::ordered_json result;
  result["file"] = scanned.profile.path.string();
  result["rows"] = scanned.profile.rows;
  result["sha256"] = scanned.sha256;
  nlohmann::ordered_json columns = nlohmann::ordered_json::array();
  for (const ColumnProfile& column : scanned.profile.columns) columns.push_back(ColumnProfileJson(column));
  result["columns"] = std::move(columns);
  result["starter_plan"] = starter.plan;
  result["starter_plan_text"] = starter.plan.is_null() ? nlohmann::ordered_json(nullptr)
                                                        : nlohmann::ordered_json(StarterPlanText(starter.plan));
  result["notes"] = starter.notes;
  return result.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace);
}

std::string Fingerprint(const py::object& data) {
  DataArgument argument = MakeData(data);
  PythonHooks hooks{py::object(py::none())};
  return WithoutGil(hooks, &argument, [&] { return FingerprintDataSet(argument.set).sha256; });
}

}  // namespace
}  // namespace stepledger::python

PYBIND11_MODULE(_stepledger, module) {
  using namespace stepledger;
  using namespace stepledger::python;
  module.doc() = "stepledger's run, audit and report for Python (use the package `stepledger`)";

  static py::exception<InputError> input_error(module, "InputError", PyExc_ValueError);
  static py::exception<PlanError> plan_error(module, "PlanError", input_error.ptr());
  static py::exception<NumericalError> numerical_error(module, "NumericalError", PyExc_ArithmeticError);
  static py::exception<AuditInputError> audit_error(module, "AuditError", input_error.ptr());
  g_input_error = input_error;
  g_plan_error = plan_error;
  g_numerical_error = numerical_error;
  g_audit_error = audit_error;
  py::register_exception_translator(&TranslateErrors);

  py::class_<PythonColumns, std::shared_ptr<PythonColumns>>(module, "Columns")
      .def(py::init([](const py::list& specs, std::uint64_t rows) {
             std::vector<ColumnSpec> columns;
             for (const py::handle item : specs) {
               const py::tuple spec = item.cast<py::tuple>();
               columns.push_back(ColumnSpec{spec[0].cast<std::string>(), spec[1].cast<std::string>(),
                                            py::reinterpret_borrow<py::object>(spec[2])});
             }
             return std::make_shared<PythonColumns>(std::move(columns), rows);
           }),
           py::arg("specs"), py::arg("rows"));

  py::class_<RunHandle, std::shared_ptr<RunHandle>>(module, "Run")
      .def("audit_text", &RunHandle::AuditText)
      .def("report_text", &RunHandle::ReportText)
      .def("comparison_text", [](const RunHandle& handle) { return handle.comparison_text; })
      .def("report_html", &RunHandle::ReportHtml)
      .def("write_audit", [](const RunHandle& handle, const std::string& folder, bool overwrite) {
        WriteAuditWithReport(folder, handle.audit, handle.run, overwrite);
      }, py::arg("folder"), py::arg("overwrite"))
      .def("write_report", [](const RunHandle& handle, const std::string& path, bool overwrite) {
        AtomicWriteOptions write;
        write.overwrite = overwrite;
        WriteFileAtomically(path, handle.ReportHtml(), write);
      }, py::arg("path"), py::arg("overwrite"));

  module.def("run", &Run, py::arg("data"), py::arg("plan_text"), py::arg("plan_path"), py::arg("method"),
             py::arg("criterion"), py::arg("fit_only"), py::arg("threads"), py::arg("work_dir"), py::arg("level"),
             py::arg("refine"), py::arg("sign_key"), py::arg("progress"));
  module.def("verify", &Verify, py::arg("audit"), py::arg("data"), py::arg("public_key"), py::arg("threads"),
             py::arg("work_dir"));
  module.def("rerun", &Rerun, py::arg("audit"), py::arg("data"), py::arg("threads"), py::arg("work_dir"),
             py::arg("sign_key"), py::arg("progress"));
  module.def("predict", &Predict, py::arg("audit"), py::arg("rows"), py::arg("level"), py::arg("id"),
             py::arg("allow_unverified"), py::arg("sink"));
  module.def("report", &Report, py::arg("audit"), py::arg("out"), py::arg("data"), py::arg("force"),
             py::arg("allow_unverified"), py::arg("title"), py::arg("threads"), py::arg("work_dir"));
  module.def("compare", &Compare, py::arg("old"), py::arg("new"));
  module.def("profile", &Profile, py::arg("data"), py::arg("response"), py::arg("threads"));
  module.def("fingerprint", &Fingerprint, py::arg("data"));
}
