#include "daemon/chain/calibration.hpp"

#include <cmath>

namespace accrue::chain {

double AdcCalibration::volts_per_code() const {
  const int span_bits = bipolar ? bits - 1 : bits;
  return full_scale_v / std::ldexp(1.0, span_bits) / gain;
}

double AdcCalibration::quantisation_sigma_v() const { return volts_per_code() / std::sqrt(12.0); }

double Calibration::quantity_per_volt() const {
  const double sign = front_end.inverting ? 1.0 : -1.0;
  const double c = front_end.c_farad;
  const double rc = front_end.r1_ohm * front_end.c_farad;
  const SensorModel& m = sensor_model;
  switch (sensor) {
    case SensorKind::charge: return -sign * c;
    case SensorKind::volt_seconds: return -sign * rc;
    case SensorKind::magnetic_flux: return sign * rc / m.turns;
    case SensorKind::flux_density: return sign * rc / (m.turns * m.area_m2);
    case SensorKind::rogowski_current: return sign * rc / m.mutual_inductance_h;
    case SensorKind::displacement: return -sign * rc / m.sensitivity_v_per_m_per_s;
    case SensorKind::piezo_force:
    case SensorKind::piezo_acceleration: return -sign * c / m.charge_sensitivity;
  }
  return 0.0;
}

std::string_view Calibration::quantity_name() const { return to_string(sensor); }

std::string_view Calibration::unit() const { return unit_of(sensor); }

std::string Calibration::rate_unit() const {
  switch (sensor) {
    case SensorKind::charge: return "A";
    case SensorKind::volt_seconds: return "V";
    case SensorKind::magnetic_flux: return "V";  // Wb/s
    case SensorKind::flux_density: return "T/s";
    case SensorKind::rogowski_current: return "A/s";
    case SensorKind::displacement: return "m/s";
    case SensorKind::piezo_force: return "N/s";
    case SensorKind::piezo_acceleration: return "m/s³";
  }
  return "";
}

std::string Calibration::check() const {
  const auto positive = [](double v) { return std::isfinite(v) && v > 0; };
  if (!positive(front_end.c_farad)) return "c_farad must be > 0";
  if (front_end.r2_ohm < 0 || !std::isfinite(front_end.r2_ohm)) return "r2_ohm must be >= 0";
  const SensorModel& m = sensor_model;
  switch (sensor) {
    case SensorKind::charge: return {};
    case SensorKind::piezo_force:
    case SensorKind::piezo_acceleration:
      return positive(m.charge_sensitivity) ? "" : "charge_sensitivity must be > 0 for a piezo sensor";
    default: break;
  }
  if (!positive(front_end.r1_ohm)) return "r1_ohm must be > 0 for sensor " + std::string(to_string(sensor));
  switch (sensor) {
    case SensorKind::magnetic_flux:
      return positive(m.turns) ? "" : "turns must be > 0 for a search coil";
    case SensorKind::flux_density:
      if (!positive(m.turns)) return "turns must be > 0 for a search coil";
      return positive(m.area_m2) ? "" : "area_m2 must be > 0 for flux density";
    case SensorKind::rogowski_current:
      return positive(m.mutual_inductance_h) ? "" : "mutual_inductance_h must be > 0 for a Rogowski coil";
    case SensorKind::displacement:
      return positive(m.sensitivity_v_per_m_per_s) ? "" : "sensitivity_v_per_m_per_s must be > 0 for a velocity sensor";
    default: return {};
  }
}

namespace {
struct KindName {
  SensorKind kind;
  std::string_view name;
  std::string_view unit;
};
constexpr KindName kinds[] = {
    {SensorKind::charge, "charge", "C"},
    {SensorKind::volt_seconds, "volt_seconds", "V·s"},
    {SensorKind::magnetic_flux, "magnetic_flux", "Wb"},
    {SensorKind::flux_density, "flux_density", "T"},
    {SensorKind::rogowski_current, "rogowski_current", "A"},
    {SensorKind::displacement, "displacement", "m"},
    {SensorKind::piezo_force, "piezo_force", "N"},
    {SensorKind::piezo_acceleration, "piezo_acceleration", "m/s²"},
};
}  // namespace

std::string_view to_string(SensorKind kind) {
  for (const auto& k : kinds)
    if (k.kind == kind) return k.name;
  return "";
}

std::string_view unit_of(SensorKind kind) {
  for (const auto& k : kinds)
    if (k.kind == kind) return k.unit;
  return "";
}

bool parse_sensor_kind(std::string_view text, SensorKind& out) {
  for (const auto& k : kinds)
    if (k.name == text) {
      out = k.kind;
      return true;
    }
  return false;
}

std::string_view sensor_kind_names() {
  return "charge, volt_seconds, magnetic_flux, flux_density, rogowski_current, displacement, piezo_force or "
         "piezo_acceleration";
}

}  // namespace accrue::chain
