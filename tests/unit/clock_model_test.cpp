#include <catch2/catch.hpp>

#include <random>

#include "daemon/clock_model.hpp"

using accrue::daemon::ClockModel;

namespace {

// Simulated receive times: a board whose clock runs `skew_ppm` slow against the
// host, blocks of 250 samples at 1 kS/s, and a USB latency that is 1 ms plus an
// exponential jitter (mean 2 ms) with, 5 % of the time, a spike of 20..500 ms.
// Deterministic: fixed seed.
ClockModel simulate(double skew_ppm, double hours, std::uint64_t seed, std::size_t* spikes = nullptr) {
  const double period = 1e-3;
  ClockModel m(period);
  std::mt19937_64 rng(seed);
  std::exponential_distribution<double> jitter(1.0 / 2e-3);
  std::uniform_real_distribution<double> u(0.0, 1.0), spike(0.02, 0.5);
  const double t0 = 1.7e9;
  const std::uint64_t n = std::uint64_t(hours * 3600 / period);
  for (std::uint64_t last = 249; last < n; last += 250) {
    const double true_utc = t0 + double(last) * period * (1.0 + skew_ppm * 1e-6);
    double latency = 1e-3 + jitter(rng);
    if (u(rng) < 0.05) {
      latency += spike(rng);
      if (spikes) ++*spikes;
    }
    m.add(last, true_utc + latency);
  }
  return m;
}

}  // namespace

TEST_CASE("clock model: recovers an injected 50 ppm skew within 1 ppm despite latency spikes", "[daemon][clock]") {
  std::size_t spikes = 0;
  const ClockModel m = simulate(50.0, 1.0, 3, &spikes);
  const auto f = m.fit();
  REQUIRE(f.valid);
  INFO("fitted skew " << f.skew_ppm << " ppm from " << f.buckets << " buckets, " << spikes << " spikes");
  CHECK(spikes > 500);  // the spikes really are there
  CHECK(std::abs(f.skew_ppm - 50.0) < 1.0);
  CHECK(f.buckets <= ClockModel::kMaxBuckets);
  // Sample 0 maps to the true start plus the latency floor (1 ms), within the jitter.
  CHECK(m.utc_of(0) == Approx(1.7e9 + 1e-3).margin(1e-3));
}

TEST_CASE("clock model: negative skew and a long run stay bounded and accurate", "[daemon][clock]") {
  const ClockModel m = simulate(-20.0, 6.0, 5);
  const auto f = m.fit();
  REQUIRE(f.valid);
  CHECK(std::abs(f.skew_ppm + 20.0) < 1.0);
  CHECK(f.buckets <= ClockModel::kMaxBuckets);
  // UTC of a sample 6 h in: true time plus the 1 ms latency floor, within a few ms.
  const std::uint64_t index = 6 * 3600 * 1000 - 1;
  const double truth = 1.7e9 + double(index) * 1e-3 * (1.0 - 20e-6);
  CHECK(m.utc_of(index) == Approx(truth + 1e-3).margin(5e-3));
}

TEST_CASE("clock model: a plain least-squares fit of all pairs would be biased by a spike cluster", "[daemon][clock]") {
  // Control: the lower envelope is what makes the fit robust. Latency spikes
  // only in the last tenth of the run bias an all-points regression upward.
  const double period = 1e-3;
  ClockModel m(period);
  double sx = 0, sy = 0, sxx = 0, sxy = 0, n = 0;
  for (std::uint64_t last = 249; last < 3'600'000; last += 250) {
    const double x = double(last) * period;
    const double latency = 1e-3 + (last > 3'240'000 && (last / 250) % 3 == 0 ? 0.2 : 0.0);
    const double y = x * 50e-6 + latency;
    m.add(last, 1.7e9 + x + y);
    sx += x, sy += y, sxx += x * x, sxy += x * y, n += 1;
  }
  const double ls_slope_ppm = (n * sxy - sx * sy) / (n * sxx - sx * sx) * 1e6;
  CHECK(std::abs(ls_slope_ppm - 50.0) > 5.0);
  CHECK(std::abs(m.fit().skew_ppm - 50.0) < 1.0);
}

TEST_CASE("clock model: needs two buckets before it claims a fit", "[daemon][clock]") {
  ClockModel m(1e-3);
  m.add(100, 10.0);
  CHECK_FALSE(m.fit().valid);
  m.add(200, 10.1);
  CHECK_FALSE(m.fit().valid);  // same 1 s bucket
  m.add(5000, 15.0);
  CHECK(m.fit().valid);
}
