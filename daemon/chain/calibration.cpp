#include "daemon/chain/calibration.hpp"

#include <cmath>

namespace accrue::chain {

double AdcCalibration::volts_per_code() const {
  const int span_bits = bipolar ? bits - 1 : bits;
  return full_scale_v / std::ldexp(1.0, span_bits) / gain;
}

double AdcCalibration::quantisation_sigma_v() const { return volts_per_code() / std::sqrt(12.0); }

double Calibration::quantity_per_volt() const {
  const double sign = front_end.inverting ? -1.0 : 1.0;
  switch (sensor) {
    case SensorKind::charge: return sign * front_end.c_farad;
    case SensorKind::volt_seconds: return sign * front_end.r1_ohm * front_end.c_farad;
  }
  return 0.0;
}

std::string_view Calibration::quantity_name() const { return to_string(sensor); }

std::string_view Calibration::unit() const {
  switch (sensor) {
    case SensorKind::charge: return "C";
    case SensorKind::volt_seconds: return "V·s";
  }
  return "";
}

std::string_view to_string(SensorKind kind) {
  switch (kind) {
    case SensorKind::charge: return "charge";
    case SensorKind::volt_seconds: return "volt_seconds";
  }
  return "";
}

bool parse_sensor_kind(std::string_view text, SensorKind& out) {
  if (text == "charge") out = SensorKind::charge;
  else if (text == "volt_seconds") out = SensorKind::volt_seconds;
  else return false;
  return true;
}

}  // namespace accrue::chain
