#pragma once
// Reader of the NIST StRD linear least-squares .dat files (certified values and data), as
// described in the reference folder's README: CR LF or LF line ends; header line 5 names the
// certified block's lines, line 6 the data lines; certified values found by their leading words;
// Fortran exponents, trailing decimal points and "Infinity" accepted.

#include <filesystem>
#include <optional>
#include <string>
#include <vector>

#include <armadillo>

namespace stepledger::testing {

struct NistCertified {
  std::vector<double> estimates;            ///< B0.. (or B1 alone without an intercept)
  std::vector<double> standard_deviations;  ///< of the estimates, same order
  double residual_sd = 0;
  double r_squared = 0;
  double regression_df = 0, regression_ss = 0, regression_ms = 0, regression_f = 0;
  double residual_df = 0, residual_ss = 0, residual_ms = 0;
};

struct NistDataset {
  std::string name;      ///< file stem, e.g. "Longley"
  arma::vec y;
  arma::mat predictors;  ///< the data's x columns (1 for the polynomial sets, 6 for Longley)
  NistCertified certified;
  bool first_parameter_is_b0 = true;  ///< false for NoInt1/NoInt2 (the model has only B1)
};

/// Reads a .dat file; throws std::runtime_error naming file:line on anything unexpected.
NistDataset ReadNistDataset(const std::filesystem::path& path);

/// The folder of the .dat files (reference folder/nist-strd), or nullopt when absent.
std::filesystem::path NistDirectory();

/// Log relative error: digits of agreement -log10(|computed - certified| / |certified|), capped
/// at 15; where certified is 0, the absolute error -log10|computed| (capped likewise).
double LogRelativeError(double computed, double certified);

}  // namespace stepledger::testing
