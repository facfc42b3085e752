#include <cstring>
#include <stdexcept>
#include <utility>

#include "python_run.h"
#include "stepledger/engine/errors.h"

namespace stepledger::python {

PythonHooks::PythonHooks(py::object progress)
    : progress_(std::move(progress)), thread_(std::this_thread::get_id()) {}

PythonHooks::~PythonHooks() = default;

void PythonHooks::StopWithPythonError() {
  error_ = std::make_unique<py::error_already_set>();  // takes the error that is set
  throw PythonStop{};
}

void PythonHooks::Report(const char* phase, std::uint64_t done, std::uint64_t total) {
  if (std::this_thread::get_id() != thread_) return;  // Python is called from one thread only
  py::gil_scoped_acquire gil;
  if (PyErr_CheckSignals() != 0) StopWithPythonError();  // Ctrl-C: KeyboardInterrupt is set
  if (progress_.is_none()) return;
  try {
    progress_(phase, done, total);
  } catch (py::error_already_set& error) {
    error_ = std::make_unique<py::error_already_set>(std::move(error));
    throw PythonStop{};
  }
}

void PythonHooks::RaiseKeptError() {
  if (!error_) throw std::logic_error("PythonHooks::RaiseKeptError: the run stopped without a Python error (a bug)");
  py::error_already_set error = std::move(*error_);
  error_.reset();
  throw error;
}

PythonColumns::PythonColumns(std::vector<ColumnSpec> specs, std::uint64_t rows) : rows_(rows) {
  for (ColumnSpec& spec : specs) {
    MemoryColumn column;
    column.name = spec.name;
    const double* direct = nullptr;
    if (spec.kind == "number") {
      column.kind = MemoryColumnKind::kNumber;
      const py::array array = py::reinterpret_borrow<py::array>(spec.values);
      if (array.ndim() != 1 || static_cast<std::uint64_t>(array.shape(0)) != rows) {
        throw std::invalid_argument("PythonColumns: column '" + spec.name + "' is not a 1-D array of the frame's rows (a bug)");
      }
      if (array.dtype().is(py::dtype::of<double>()) && (array.flags() & py::array::c_style) != 0) {
        direct = static_cast<const double*>(array.data());
      }
    } else {
      column.kind = MemoryColumnKind::kText;
    }
    columns_.push_back(std::move(column));
    values_.push_back(std::move(spec.values));
    direct_.push_back(direct);
  }
}

PythonColumns::~PythonColumns() {
  py::gil_scoped_acquire gil;  // the references to the arrays and callables
  values_.clear();
}

void PythonColumns::ReadNumbers(std::size_t column, std::uint64_t first, std::size_t count, double* out) {
  if (const double* direct = direct_.at(column)) {
    std::memcpy(out, direct + first, count * sizeof(double));
    return;
  }
  py::gil_scoped_acquire gil;
  try {
    // A slice of another numeric dtype, converted to float64 (one chunk at a time).
    const py::object slice = values_[column][py::slice(static_cast<py::ssize_t>(first),
                                                       static_cast<py::ssize_t>(first + count), 1)];
    const py::array_t<double, py::array::c_style | py::array::forcecast> chunk(slice);
    std::memcpy(out, chunk.data(), count * sizeof(double));
  } catch (py::error_already_set& error) {
    if (hooks_ == nullptr) throw;
    error.restore();
    hooks_->StopWithPythonError();
  }
}

void PythonColumns::ReadTexts(std::size_t column, std::uint64_t first, std::size_t count,
                              std::vector<std::string>& texts, std::vector<char>& missing) {
  py::gil_scoped_acquire gil;
  try {
    const py::list cells = values_[column](first, count);
    if (cells.size() != count) {
      throw std::logic_error("PythonColumns: the text column '" + columns_[column].name + "' gave " +
                             std::to_string(cells.size()) + " cells for " + std::to_string(count) + " rows (a bug)");
    }
    for (std::size_t i = 0; i < count; ++i) {
      const py::handle cell = cells[i];
      if (cell.is_none()) {
        missing[i] = 1;
        continue;
      }
      Py_ssize_t length = 0;
      const char* utf8 = PyUnicode_AsUTF8AndSize(cell.ptr(), &length);
      if (utf8 == nullptr) {
        PyErr_Clear();  // a lone surrogate: not text JSON can hold
        throw LocatedInputError(description(), first + i + 1, column + 1,
                                "column '" + QuoteForMessage(columns_[column].name) + "' holds text that is not UTF-8");
      }
      texts[i].assign(utf8, static_cast<std::size_t>(length));
    }
  } catch (py::error_already_set& error) {
    if (hooks_ == nullptr) throw;
    error.restore();
    hooks_->StopWithPythonError();
  }
}

void PythonColumns::OnRowsRead(std::uint64_t rows_done, std::uint64_t rows_total) {
  if (hooks_ != nullptr) hooks_->Report("reading", rows_done, rows_total);
}

}  // namespace stepledger::python
