#include "tools/accrue-sim/beam.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace accrue::sim {

double BeamModel::antiderivative(double t) const {
  const double w = 2 * std::numbers::pi / modulation_period_s;
  return current_a * (t - modulation / w * std::cos(w * t));
}

double BeamModel::current(double t) const {
  if (t < start_s || t >= stop_s) return 0.0;
  const double phase = std::fmod(t - start_s, spill_period_s);
  if (phase >= spill_on_s) return 0.0;
  return current_a * (1.0 + modulation * std::sin(2 * std::numbers::pi * t / modulation_period_s));
}

double BeamModel::charge(double a, double b) const {
  a = std::max(a, start_s);
  b = std::min(b, stop_s);
  if (b <= a) return 0.0;
  double q = 0.0;
  // Walk the spills overlapping [a, b]; a sample interval touches at most two.
  double k = std::floor((a - start_s) / spill_period_s);
  for (;; k += 1.0) {
    const double on = start_s + k * spill_period_s;
    if (on >= b) break;
    const double lo = std::max(a, on), hi = std::min(b, on + spill_on_s);
    if (hi > lo) q += antiderivative(hi) - antiderivative(lo);
  }
  return q;
}

}  // namespace accrue::sim
