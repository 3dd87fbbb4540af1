#pragma once
// Calibration of one channel: how ADC codes become output volts, and how a
// change of integrator output becomes the integrated quantity in SI units.
// Values only; the chain never changes a Calibration once it is in use (a
// corrected one is a new version with a new id, see storage).
//
// Sensor models (DESIGN.md §4), for an inverting integrator with input
// resistor R1 and feedback capacitor C, where "∫Vin dt" = -R1*C*dVout:
//   charge            Q   = -C*dV                       C
//   volt_seconds      ∫Vin = -R1*C*dV                   V·s
//   magnetic_flux     dPhi = -∫Vin/N = R1*C*dV/N        Wb   (Faraday: emf = -N dPhi/dt)
//   flux_density      dB  = dPhi/A                      T
//   rogowski_current  di  = -∫Vin/M = R1*C*dV/M         A    (emf = -M di/dt)
//   displacement      dx  = ∫Vin/G = -R1*C*dV/G         m    (velocity sensor, Vin = G*v)
//   piezo_force       F   = Q/S, S in C/N               N
//   piezo_acceleration a  = Q/S, S in C/(m/s²)          m/s²
// A non-inverting board flips every sign. For the Rogowski coil the
// integrator output follows the current itself, so the "total" is the change
// of current since the run began.
#include <cstdint>
#include <string>
#include <string_view>

namespace accrue::chain {

// The elementary charge, exact by definition since the 2019 SI redefinition
// (BIPM, The International System of Units, 9th edition, 2019, §2.3.1).
inline constexpr double elementary_charge_c = 1.602176634e-19;
// A charge expressed as a count of elementary charges.
inline double elementary_charges(double charge_c) { return charge_c / elementary_charge_c; }

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
  // The largest |output| the ADC can represent, in output volts.
  double full_scale_output_v() const { return full_scale_v / gain; }
};

struct FrontEnd {
  double r1_ohm = 0.0;    // input resistor (0 for a pure charge amplifier)
  double c_farad = 1e-9;  // feedback capacitor
  double r2_ohm = 0.0;    // discharge resistor across C; 0 = none
  bool inverting = true;  // false for boards whose output rises with positive input
};

enum class SensorKind {
  charge,
  volt_seconds,
  magnetic_flux,
  flux_density,
  rogowski_current,
  displacement,
  piezo_force,
  piezo_acceleration,
};

// Parameters of the sensor in front of the integrator; only those the kind
// needs are used (see the table above).
struct SensorModel {
  double turns = 1.0;                        // N, search coil
  double area_m2 = 0.0;                      // A, search coil (flux density)
  double mutual_inductance_h = 0.0;          // M, Rogowski coil
  double sensitivity_v_per_m_per_s = 0.0;    // G, velocity sensor
  double charge_sensitivity = 0.0;           // S, piezo: C/N (force) or C/(m/s²) (acceleration)
  bool operator==(const SensorModel&) const = default;
};

struct Calibration {
  std::int64_t id = 0;  // storage's calibration version; 0 = not yet stored
  AdcCalibration adc;
  FrontEnd front_end;
  SensorKind sensor = SensorKind::charge;
  SensorModel sensor_model;

  // d(quantity)/d(Vout), from the table above.
  double quantity_per_volt() const;
  std::string_view quantity_name() const;
  std::string_view unit() const;
  // The unit of the rate output (quantity per second): A for charge, V for volt-seconds, ...
  std::string rate_unit() const;
  // Empty if the calibration can be used; otherwise what is missing or out of range.
  std::string check() const;
};

std::string_view to_string(SensorKind kind);
bool parse_sensor_kind(std::string_view text, SensorKind& out);
// The SI unit symbol of a kind's quantity (C, V·s, Wb, T, A, m, N, m/s²).
std::string_view unit_of(SensorKind kind);
// All kind names, for error messages.
std::string_view sensor_kind_names();

}  // namespace accrue::chain
