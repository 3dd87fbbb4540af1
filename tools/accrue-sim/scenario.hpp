#pragma once
// Scenario: everything the simulated board is made of. The default is an
// invented one ("overnight Faraday cup"): 8 hours at 1 kS/s of a spilled
// 100 pA beam into a 1 nF charge amplifier with a cheap op-amp's offset and
// bias current, a threshold-triggered reset switch, and a 60 s zero window at
// the start. Loaded from / written to JSON so runs can be described in files.
#include <cstdint>
#include <map>
#include <string>

#include <nlohmann/json.hpp>

#include "tools/accrue-sim/beam.hpp"
#include "tools/accrue-sim/faults.hpp"

namespace accrue::sim {

struct FrontEndModel {
  double r1_ohm = 1e9;      // input resistance (cup and cable leakage path)
  double c_farad = 1e-9;
  double r2_ohm = 0.0;      // discharge resistor across C; 0 = none
  double offset_v = 1e-3;   // op-amp input offset voltage
  double bias_a = 5e-12;    // op-amp input bias current
  double rail_v = 12.0;
  double noise_v = 50e-6;   // white output noise, rms
  double reset_s = 1e-3;    // switch closed
  double settle_tau_s = 2e-4;
  double pedestal_v = 5e-3; // output step left by charge injection
  double reset_threshold_v = 8.0;
};

struct AdcModel {
  int bits = 24;
  double full_scale_v = 10.0;  // bipolar
};

// One channel's input and front end.
struct ChannelModel {
  BeamModel beam;
  FrontEndModel front_end;
};

// How the board talks: framed binary (PROTOCOL.md §2-3) or text lines (§5).
enum class Wire { frames, lines };

struct Scenario {
  std::string name = "overnight Faraday cup (invented demo scenario)";
  double duration_s = 8 * 3600.0;
  double sample_period_s = 1e-3;
  double zero_window_s = 60.0;
  std::uint32_t board_serial = 4242;
  std::uint16_t samples_per_block = 250;
  double identity_every_s = 10.0;
  std::uint64_t seed = 1;
  BeamModel beam;
  FrontEndModel front_end;
  AdcModel adc;
  // Channels of the board (1..16). Channel 0 is `beam` and `front_end`; every
  // other channel starts as an invented variation of it (channel k: beam
  // current / (k+1), offset voltage sign alternating) and then takes the
  // overrides in `channel_overrides[k]` ({"beam": {...}, "front_end": {...}};
  // keys of "channels" in JSON are the channel numbers as strings).
  int channel_count = 1;
  std::map<int, nlohmann::json> channel_overrides;
  Wire wire = Wire::frames;
  FaultSettings faults;

  std::uint64_t total_samples() const;
  // d(Vout)/dt with the input at zero (offset and bias current), V/s, channel 0.
  double drift_v_per_s() const;
  ChannelModel channel(int k) const;
};

double drift_v_per_s(const FrontEndModel& fe);

nlohmann::json to_json(const Scenario& s);
// Keys present in `j` override `s`; returns an error text, empty if fine.
std::string apply_json(const nlohmann::json& j, Scenario& s);

}  // namespace accrue::sim
