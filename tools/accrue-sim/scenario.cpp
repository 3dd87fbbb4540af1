#include "tools/accrue-sim/scenario.hpp"

#include <cmath>

namespace accrue::sim {

std::uint64_t Scenario::total_samples() const { return std::uint64_t(std::llround(duration_s / sample_period_s)); }

double Scenario::drift_v_per_s() const {
  // Input at zero: the offset drives Vos/R1 through the input resistor and the
  // bias current adds Ib; both charge C. Sign chosen so the output ramps up.
  const double from_offset = front_end.r1_ohm > 0 ? front_end.offset_v / (front_end.r1_ohm * front_end.c_farad) : 0.0;
  return from_offset + front_end.bias_a / front_end.c_farad;
}

#define ACCRUE_SCENARIO_TOP(X) \
  X(name) X(duration_s) X(sample_period_s) X(zero_window_s) X(board_serial) X(samples_per_block) X(identity_every_s) X(seed)
#define ACCRUE_BEAM(X) \
  X(current_a) X(modulation) X(modulation_period_s) X(spill_period_s) X(spill_on_s) X(start_s) X(stop_s)
#define ACCRUE_FRONT_END(X)                                                                                   \
  X(r1_ohm) X(c_farad) X(r2_ohm) X(offset_v) X(bias_a) X(rail_v) X(noise_v) X(reset_s) X(settle_tau_s)    \
  X(pedestal_v) X(reset_threshold_v)
#define ACCRUE_ADC(X) X(bits) X(full_scale_v)

nlohmann::json to_json(const Scenario& s) {
  nlohmann::json j;
#define X(f) j[#f] = s.f;
  ACCRUE_SCENARIO_TOP(X)
#undef X
#define X(f) j["beam"][#f] = s.beam.f;
  ACCRUE_BEAM(X)
#undef X
#define X(f) j["front_end"][#f] = s.front_end.f;
  ACCRUE_FRONT_END(X)
#undef X
#define X(f) j["adc"][#f] = s.adc.f;
  ACCRUE_ADC(X)
#undef X
  return j;
}

namespace {
template <class T>
std::string take(const nlohmann::json& j, const char* key, T& out, const std::string& where) {
  if (!j.contains(key)) return {};
  const auto& v = j[key];
  if constexpr (std::is_same_v<T, std::string>) {
    if (!v.is_string()) return where + key + ": must be a string";
  } else {
    if (!v.is_number()) return where + key + ": must be a number";
  }
  out = v.get<T>();
  return {};
}
}  // namespace

std::string apply_json(const nlohmann::json& j, Scenario& s) {
  if (!j.is_object()) return "scenario must be a JSON object";
  std::string err;
#define X(f) \
  if (err.empty()) err = take(j, #f, s.f, "");
  ACCRUE_SCENARIO_TOP(X)
#undef X
  if (j.contains("beam")) {
#define X(f) \
  if (err.empty()) err = take(j["beam"], #f, s.beam.f, "beam.");
    ACCRUE_BEAM(X)
#undef X
  }
  if (j.contains("front_end")) {
#define X(f) \
  if (err.empty()) err = take(j["front_end"], #f, s.front_end.f, "front_end.");
    ACCRUE_FRONT_END(X)
#undef X
  }
  if (j.contains("adc")) {
#define X(f) \
  if (err.empty()) err = take(j["adc"], #f, s.adc.f, "adc.");
    ACCRUE_ADC(X)
#undef X
  }
  if (err.empty() && !(s.sample_period_s > 0)) err = "sample_period_s must be > 0";
  if (err.empty() && !(s.front_end.c_farad > 0)) err = "front_end.c_farad must be > 0";
  if (err.empty() && (s.adc.bits < 2 || s.adc.bits > 24)) err = "adc.bits must be 2..24";
  if (err.empty() && (s.samples_per_block < 1 || s.samples_per_block > 1361)) err = "samples_per_block must be 1..1361";
  return err;
}

}  // namespace accrue::sim
