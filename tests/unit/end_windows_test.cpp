#include <catch2/catch.hpp>

#include <cmath>
#include <random>

#include "daemon/chain/end_windows.hpp"

using accrue::chain::EndEstimate;
using accrue::chain::EndWindows;
using Catch::Matchers::WithinAbs;
using Catch::Matchers::WithinRel;

namespace {

constexpr double kPeriodS = 0.1;

// Samples v(k) for k in [first, first + n) into a fresh window of 16.
template <class F>
EndWindows fill(std::uint64_t first, std::uint64_t n, F v, double noise_floor_v = 1e-6) {
  EndWindows w(16, noise_floor_v);
  for (std::uint64_t k = first; k < first + n; ++k) w.add(k, v(k));
  return w;
}

}  // namespace

TEST_CASE("end_windows: a steady ramp gives its value and rate at both ends", "[chain][end_windows]") {
  // Exact for a straight line (least squares reproduces a line: common practice).
  const auto ramp = [](std::uint64_t k) { return 0.25 + 0.01 * double(k); };
  const EndWindows w = fill(100, 500, ramp);
  const EndEstimate start = w.start(kPeriodS), end = w.end(kPeriodS);
  CHECK_THAT(start.value_v, WithinAbs(ramp(100), 1e-12));
  CHECK_THAT(end.value_v, WithinAbs(ramp(599), 1e-12));
  CHECK_THAT(start.rate_v_per_s, WithinRel(0.1, 1e-9));
  CHECK_THAT(end.rate_v_per_s, WithinRel(0.1, 1e-9));
  CHECK(start.points == 16);
  CHECK(end.points == 16);
  CHECK_FALSE(start.changed_at_end);
  CHECK_FALSE(end.changed_at_end);
}

TEST_CASE("end_windows: a change of input inside the window shortens the fit to the steady part",
          "[chain][end_windows]") {
  // Flat until sample 495, then a ramp of 0.01 V per sample: the end's rate is the ramp's.
  const auto kink = [](std::uint64_t k) { return k < 495 ? 0.5 : 0.5 + 0.01 * double(k - 495); };
  const EndEstimate end = fill(0, 500, kink).end(kPeriodS);
  CHECK(end.points < 16);
  CHECK_THAT(end.rate_v_per_s, WithinRel(0.1, 1e-9));
  CHECK_THAT(end.value_v, WithinAbs(kink(499), 1e-12));
  CHECK_FALSE(end.changed_at_end);  // the change is four intervals back, not in the last one
}

TEST_CASE("end_windows: a change inside the interval next to an end is reported", "[chain][end_windows]") {
  // The input starts 30 % of the way into the last interval: the last step is
  // 0.7 of the ramp's, the steps before it are flat.
  const auto late_start = [](std::uint64_t k) { return k < 499 ? 0.5 : 0.5 + 0.7 * 0.01; };
  const EndEstimate end = fill(0, 500, late_start).end(kPeriodS);
  CHECK(end.changed_at_end);
  // At the start: the input stops 30 % into the first interval.
  const auto early_stop = [](std::uint64_t k) { return k == 0 ? 0.5 : 0.5 + 0.3 * 0.01; };
  const EndEstimate start = fill(0, 500, early_stop).start(kPeriodS);
  CHECK(start.changed_at_end);
  // A change one interval further in is not "at the end".
  const auto one_back = [](std::uint64_t k) { return k < 498 ? 0.5 : 0.5 + 0.01 * double(k - 497); };
  CHECK_FALSE(fill(0, 500, one_back).end(kPeriodS).changed_at_end);
}

TEST_CASE("end_windows: white noise on a steady ramp is not taken for a change", "[chain][end_windows]") {
  // 4-sigma test on a step difference: over 2000 independent windows a false
  // report would be rare (two-sided normal tail at 4 sigma: erfc(4/sqrt(2)) = 6.3e-5, C/Python math.erfc).
  std::mt19937_64 rng(7);
  std::normal_distribution<double> noise(0.0, 1e-4);
  int reported = 0;
  for (int trial = 0; trial < 2000; ++trial) {
    EndWindows w(16, 1e-6);
    for (std::uint64_t k = 0; k < 40; ++k) w.add(k, 0.002 * double(k) + noise(rng));
    reported += w.end(kPeriodS).changed_at_end ? 1 : 0;
  }
  CHECK(reported <= 4);
}
