#include "daemon/chain/front_end_response.hpp"

#include <cmath>
#include <limits>
#include <numbers>

namespace accrue::chain {
namespace {
constexpr double two_pi = 2.0 * std::numbers::pi;
}

std::complex<double> FrontEndResponse::practical(double f_hz) const {
  if (!has_r2()) return ideal(f_hz);
  const std::complex<double> jwt(0.0, two_pi * f_hz * p_.r2_ohm * p_.c_farad);
  return -(p_.r2_ohm / p_.r1_ohm) / (1.0 + jwt);
}

std::complex<double> FrontEndResponse::ideal(double f_hz) const {
  const std::complex<double> jwrc(0.0, two_pi * f_hz * p_.r1_ohm * p_.c_farad);
  return -1.0 / jwrc;
}

double FrontEndResponse::magnitude_db(std::complex<double> h) { return 20.0 * std::log10(std::abs(h)); }

double FrontEndResponse::phase_deg(std::complex<double> h) { return std::arg(h) * 180.0 / std::numbers::pi; }

double FrontEndResponse::dc_gain() const {
  return has_r2() ? p_.r2_ohm / p_.r1_ohm : std::numeric_limits<double>::infinity();
}

double FrontEndResponse::dc_gain_db() const {
  return has_r2() ? 20.0 * std::log10(dc_gain()) : std::numeric_limits<double>::infinity();
}

double FrontEndResponse::corner_hz() const { return has_r2() ? 1.0 / (two_pi * p_.r2_ohm * p_.c_farad) : 0.0; }

double FrontEndResponse::unity_gain_approx_hz() const { return 1.0 / (two_pi * p_.r1_ohm * p_.c_farad); }

std::optional<double> FrontEndResponse::unity_gain_hz() const {
  if (!has_r2()) return unity_gain_approx_hz();
  const double g = dc_gain();
  if (g <= 1.0) return std::nullopt;
  // |H|^2 = g^2/(1 + (w*R2*C)^2) = 1  =>  w*R2*C = sqrt(g^2 - 1).
  return std::sqrt(g * g - 1.0) / (two_pi * p_.r2_ohm * p_.c_farad);
}

double FrontEndResponse::integrating_from_hz(double tolerance) const {
  if (!has_r2()) return 0.0;
  if (tolerance >= 1.0) return 0.0;
  // H/H_ideal = jx/(1 + jx), x = f/fc, so H/H_ideal - 1 = -1/(1 + jx).
  return corner_hz() * std::sqrt(1.0 / (tolerance * tolerance) - 1.0);
}

double FrontEndResponse::droop_of_constant(double hold_s) const {
  if (!has_r2() || hold_s <= 0.0) return 0.0;
  const double tau = p_.r2_ohm * p_.c_farad;
  const double u = hold_s / tau;
  // 1 - (1 - e^-u)/u, written with expm1 so that small u keeps its digits.
  return 1.0 + std::expm1(-u) / u;
}

double FrontEndResponse::drift_from_offset_v_per_s() const {
  return std::fabs(p_.offset_v) / (p_.r1_ohm * p_.c_farad);
}

double FrontEndResponse::drift_from_bias_v_per_s() const { return std::fabs(p_.bias_a) / p_.c_farad; }

double FrontEndResponse::drift_settles_at_v() const {
  if (!has_r2()) return std::numeric_limits<double>::infinity();
  return std::fabs(p_.offset_v) * (1.0 + p_.r2_ohm / p_.r1_ohm) + std::fabs(p_.bias_a) * p_.r2_ohm;
}

std::optional<double> FrontEndResponse::time_to_reach_s(double rate_v_per_s, double v0_v, double limit_v) const {
  const double rate = std::fabs(rate_v_per_s);
  const double v0 = std::fabs(v0_v);
  if (v0 >= limit_v) return 0.0;
  if (rate <= 0.0) return std::nullopt;
  if (!has_r2()) return (limit_v - v0) / rate;
  const double tau = p_.r2_ohm * p_.c_farad;
  const double v_inf = rate * tau;
  if (v_inf <= limit_v) return std::nullopt;
  return tau * std::log((v_inf - v0) / (v_inf - limit_v));
}

}  // namespace accrue::chain
