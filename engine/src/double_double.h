#pragma once
// Private: double-double (compensated) arithmetic for one value at a time. A value hi + lo
// with |lo| <= ulp(hi)/2: about 32 significant digits. Error-free transformations: Knuth's
// TwoSum and the fused multiply-add product (Dekker/Ogita-Rump-Oishi). Refinement and the
// linear predictor need them because the residuals of an ill-conditioned fit are the
// difference of nearly equal numbers; a plain double (or long double) sum leaves digits to the
// row order. The per-row refinement kernel (refine_kernel.cpp) has its own vectorised form.
//
// Nothing outside engine/src includes this file.

#include <cmath>

namespace stepledger::dd {

struct DoubleDouble {
  double hi = 0;
  double lo = 0;
  double value() const { return hi + lo; }
};

inline DoubleDouble TwoSum(double a, double b) {
  const double s = a + b;
  const double bb = s - a;
  return {s, (a - (s - bb)) + (b - bb)};
}

inline DoubleDouble QuickTwoSum(double a, double b) {  // requires |a| >= |b| or a = 0
  const double s = a + b;
  return {s, b - (s - a)};
}

inline DoubleDouble TwoProduct(double a, double b) {
  const double p = a * b;
  return {p, std::fma(a, b, -p)};
}

inline DoubleDouble operator+(DoubleDouble a, DoubleDouble b) {
  DoubleDouble s = TwoSum(a.hi, b.hi);
  const DoubleDouble t = TwoSum(a.lo, b.lo);
  s.lo += t.hi;
  s = QuickTwoSum(s.hi, s.lo);
  s.lo += t.lo;
  return QuickTwoSum(s.hi, s.lo);
}

inline DoubleDouble operator-(DoubleDouble a) { return {-a.hi, -a.lo}; }

inline DoubleDouble operator*(DoubleDouble a, double b) {
  DoubleDouble p = TwoProduct(a.hi, b);
  p.lo += a.lo * b;
  return QuickTwoSum(p.hi, p.lo);
}

inline DoubleDouble operator*(DoubleDouble a, DoubleDouble b) {
  DoubleDouble p = TwoProduct(a.hi, b.hi);
  p.lo += a.hi * b.lo + a.lo * b.hi;
  return QuickTwoSum(p.hi, p.lo);
}

}  // namespace stepledger::dd
