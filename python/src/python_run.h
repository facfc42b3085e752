#pragma once
// Internal to the Python module: the bridge between a run (which releases the GIL) and the
// Python callables it may call back — the progress callable, the text columns of a data frame
// and Ctrl-C — and the columns of a data frame as an engine ColumnSource.

#include <pybind11/numpy.h>
#include <pybind11/pybind11.h>

#include <cstdint>
#include <memory>
#include <string>
#include <thread>
#include <vector>

#include "stepledger/engine/column_source.h"

namespace stepledger::python {

namespace py = pybind11;

/// Thrown through the run when Python asks it to stop (Ctrl-C, or an exception raised by a
/// callable the run called). Not a std::exception, so that no handler in the run that turns a
/// std::exception into another error can swallow it; the run unwinds through its normal cleanup
/// (the spill's destructor removes its folder) and the binding raises the Python error.
struct PythonStop {};

/// The Python side of one call: the progress callable and the Python error that stopped the run.
/// Every call back comes from the thread that started the run (other threads are ignored),
/// with the GIL taken for the call and given back after it.
class PythonHooks {
 public:
  explicit PythonHooks(py::object progress);
  ~PythonHooks();
  PythonHooks(const PythonHooks&) = delete;
  PythonHooks& operator=(const PythonHooks&) = delete;

  /// Reports progress (phase, done, total; total 0 when not known) and checks for Ctrl-C. Call
  /// with the GIL released. Throws PythonStop when Python wants the run to stop.
  void Report(const char* phase, std::uint64_t done, std::uint64_t total);
  /// Keeps the Python error that is set now and throws PythonStop. Call with the GIL held.
  [[noreturn]] void StopWithPythonError();
  /// After the run, GIL held: raises the kept Python error (when the run stopped with PythonStop).
  [[noreturn]] void RaiseKeptError();

 private:
  py::object progress_;
  std::thread::id thread_;
  std::unique_ptr<py::error_already_set> error_;
};

/// One column of a data frame as the package hands it over: a name, a kind ("number" or
/// "text") and either a 1-D numpy array of numbers (float64 read in place; other numeric
/// dtypes converted a chunk at a time) or a callable fetch(first, count) returning the texts of
/// rows [first, first + count) as a list of str or None.
struct ColumnSpec {
  std::string name;
  std::string kind;
  py::object values;
};

/// A data frame's columns as the engine reads them (engine/column_source.h). Construct and
/// destroy with the GIL held; the reads take it only for what needs Python (text columns,
/// numbers that are not float64).
class PythonColumns : public ColumnSource {
 public:
  PythonColumns(std::vector<ColumnSpec> specs, std::uint64_t rows);
  ~PythonColumns() override;
  const std::vector<MemoryColumn>& columns() const override { return columns_; }
  std::uint64_t rows() const override { return rows_; }
  void ReadNumbers(std::size_t column, std::uint64_t first, std::size_t count, double* out) override;
  void ReadTexts(std::size_t column, std::uint64_t first, std::size_t count, std::vector<std::string>& texts,
                 std::vector<char>& missing) override;
  void OnRowsRead(std::uint64_t rows_done, std::uint64_t rows_total) override;
  /// The hooks of the call now running (progress, Ctrl-C), or null.
  void SetHooks(PythonHooks* hooks) { hooks_ = hooks; }

 private:
  std::vector<MemoryColumn> columns_;
  std::vector<py::object> values_;
  std::vector<const double*> direct_;  // float64, contiguous: read without the GIL
  std::uint64_t rows_ = 0;
  PythonHooks* hooks_ = nullptr;
};

}  // namespace stepledger::python
