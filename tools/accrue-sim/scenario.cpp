#include "tools/accrue-sim/scenario.hpp"

#include <cmath>
#include <cstdlib>

namespace accrue::sim {

std::uint64_t Scenario::total_samples() const { return std::uint64_t(std::llround(duration_s / sample_period_s)); }

double drift_v_per_s(const FrontEndModel& fe) {
  // Input at zero: the offset drives Vos/R1 through the input resistor and the
  // bias current adds Ib; both charge C. Sign chosen so the output ramps up.
  const double from_offset = fe.r1_ohm > 0 ? fe.offset_v / (fe.r1_ohm * fe.c_farad) : 0.0;
  return from_offset + fe.bias_a / fe.c_farad;
}

double Scenario::drift_v_per_s() const { return sim::drift_v_per_s(front_end); }

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
  j["channel_count"] = s.channel_count;
  j["wire"] = s.wire == Wire::lines ? "text_lines" : "frames";
  j["faults"] = to_json(s.faults);
  for (const auto& [k, v] : s.channel_overrides) j["channels"][std::to_string(k)] = v;
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

std::string apply_channel_json(const nlohmann::json& j, ChannelModel& m, const std::string& where) {
  if (!j.is_object()) return where + ": must be an object";
  std::string err;
  if (j.contains("beam")) {
#define X(f) \
  if (err.empty()) err = take(j["beam"], #f, m.beam.f, where + ".beam.");
    ACCRUE_BEAM(X)
#undef X
  }
  if (j.contains("front_end")) {
#define X(f) \
  if (err.empty()) err = take(j["front_end"], #f, m.front_end.f, where + ".front_end.");
    ACCRUE_FRONT_END(X)
#undef X
  }
  if (err.empty() && !(m.front_end.c_farad > 0)) err = where + ".front_end.c_farad must be > 0";
  return err;
}

}  // namespace

ChannelModel Scenario::channel(int k) const {
  ChannelModel m{beam, front_end};
  if (k > 0) {
    m.beam.current_a = beam.current_a / double(k + 1);
    if (k % 2 == 1) m.front_end.offset_v = -front_end.offset_v;
  }
  if (auto it = channel_overrides.find(k); it != channel_overrides.end())
    (void)apply_channel_json(it->second, m, "channels." + std::to_string(k));  // checked in apply_json
  return m;
}

std::string apply_json(const nlohmann::json& j, Scenario& s) {
  if (!j.is_object()) return "scenario must be a JSON object";
  std::string err;
  if (j.contains("channel_count")) {
    if (!j["channel_count"].is_number_integer()) return "channel_count: must be an integer";
    s.channel_count = j["channel_count"].get<int>();
    if (s.channel_count < 1 || s.channel_count > 16) return "channel_count must be 1..16";
  }
  if (j.contains("wire")) {
    const auto& w = j["wire"];
    if (w == "frames") s.wire = Wire::frames;
    else if (w == "lines" || w == "text_lines") s.wire = Wire::lines;
    else return "wire must be \"frames\" or \"text_lines\"";
  }
  if (j.contains("faults")) {
    if (std::string e = apply_json(j["faults"], s.faults); !e.empty()) return e;
  }
  if (j.contains("channels")) {
    if (!j["channels"].is_object()) return "channels: must be an object keyed by channel number";
    for (const auto& [key, value] : j["channels"].items()) {
      char* end = nullptr;
      const long k = std::strtol(key.c_str(), &end, 10);
      if (key.empty() || *end != '\0' || k < 0 || k > 15) return "channels: key " + key + " is not a channel number 0..15";
      nlohmann::json merged = s.channel_overrides.count(int(k)) ? s.channel_overrides[int(k)] : nlohmann::json::object();
      merged.merge_patch(value);
      ChannelModel probe;
      if (std::string e = apply_channel_json(merged, probe, "channels." + key); !e.empty()) return e;
      s.channel_overrides[int(k)] = merged;
    }
  }
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
  if (err.empty() && (s.samples_per_block < 1 || std::size_t(s.samples_per_block) * std::size_t(s.channel_count) > 1361))
    err = "samples_per_block times channel_count must be 1..1361 (one frame's codes)";
  return err;
}

}  // namespace accrue::sim
