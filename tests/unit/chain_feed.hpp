#pragma once
// Test helper: feeds an integrator output given as a function of time to a
// ChannelChain, quantised by the calibration's ADC, in blocks of one status
// (the way a board sends them). Header-only, tests only.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <functional>
#include <vector>

#include "daemon/chain/channel_chain.hpp"

namespace accrue::test {

struct ChainFeed {
  chain::Calibration cal;
  chain::ChainSettings settings;
  chain::ChannelChain chain;
  chain::ChainOutput out;
  std::uint64_t index = 0;

  ChainFeed(chain::Calibration c, chain::ChainSettings s) : cal(c), settings(s), chain(c, s) {}
  std::int32_t code(double volts) const {
    const double lsb = cal.adc.volts_per_code();
    const double top = std::ldexp(1.0, cal.adc.bits - 1);
    return std::int32_t(std::clamp(std::nearbyint(volts / lsb), -top, top - 1)) + cal.adc.zero_code;
  }
  double time() const { return double(index) * settings.sample_period_s; }
  // `samples` samples of v(t) with the given status bits.
  void run(std::uint64_t samples, std::uint8_t status, const std::function<double(double)>& v) {
    std::vector<std::int32_t> codes;
    codes.reserve(samples);
    for (std::uint64_t k = 0; k < samples; ++k) codes.push_back(code(v(double(index + k) * settings.sample_period_s)));
    chain.process(index, status, codes.data(), codes.size(), 1, out);
    index += samples;
  }
};

}  // namespace accrue::test
