#pragma once
// Calibration of one channel: how ADC codes become output volts, and how a
// change of integrator output becomes the integrated quantity in SI units.
// Values only; the chain never changes a Calibration once it is in use (a
// corrected one is a new version with a new id, see storage).
#include <cstdint>
#include <string>
#include <string_view>

namespace accrue::chain {

struct AdcCalibration {
  int bits = 24;
  std::int32_t zero_code = 0;
  double full_scale_v = 10.0;  // bipolar: +-full_scale_v; unipolar: 0..full_scale_v
  double gain = 1.0;           // gain between integrator output and ADC input
  bool bipolar = true;

  // Bipolar: V = (code - zero)*FS/2^(bits-1)/gain; unipolar: V = (code - zero)*FS/2^bits/gain.
  double volts_per_code() const;
  double to_volts(std::int32_t code) const { return double(code - zero_code) * volts_per_code(); }
  // Quantisation noise of one reading, LSB/sqrt(12), in output volts.
  double quantisation_sigma_v() const;
};

struct FrontEnd {
  double r1_ohm = 0.0;    // input resistor (0 for a pure charge amplifier)
  double c_farad = 1e-9;  // feedback capacitor
  double r2_ohm = 0.0;    // discharge resistor across C; 0 = none
  bool inverting = true;  // false for boards whose output rises with positive input
};

enum class SensorKind { charge, volt_seconds };

struct Calibration {
  std::int64_t id = 0;  // storage's calibration version; 0 = not yet stored
  AdcCalibration adc;
  FrontEnd front_end;
  SensorKind sensor = SensorKind::charge;

  // d(quantity)/d(Vout): charge amplifier Q = -C*dV, volt-seconds = -R1*C*dV
  // (sign flipped for non-inverting boards).
  double quantity_per_volt() const;
  std::string_view quantity_name() const;
  std::string_view unit() const;
};

std::string_view to_string(SensorKind kind);
bool parse_sensor_kind(std::string_view text, SensorKind& out);

}  // namespace accrue::chain
