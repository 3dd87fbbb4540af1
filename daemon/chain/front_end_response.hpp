#pragma once
// FrontEndResponse is the small-signal and drift model of an inverting
// integrator: input resistor R1, feedback capacitor C, optional discharge
// resistor R2 across C, op-amp offset voltage Vos and input bias current Ib.
//
//   practical:  H(jw) = -(R2/R1) / (1 + jw*R2*C)      (R2 present)
//   ideal:      H(jw) = -1 / (jw*R1*C)
//
// It takes the component values by value and keeps nothing else; every
// answer is a pure function of them (no I/O, no state). Without R2 the
// practical response is the ideal one and the answers that need R2 say so
// (has_r2() false: dc_gain() is +inf, corner_hz() is 0). Frequencies are in
// Hz, phases in degrees, voltages at the integrator output.
#include <complex>
#include <optional>

namespace accrue::chain {

struct FrontEndParts {
  double r1_ohm = 0.0;    // must be > 0
  double c_farad = 0.0;   // must be > 0
  double r2_ohm = 0.0;    // 0 = no discharge resistor
  double offset_v = 0.0;  // op-amp input offset voltage (magnitude is used)
  double bias_a = 0.0;    // op-amp input bias current (magnitude is used)
};

class FrontEndResponse {
 public:
  explicit FrontEndResponse(FrontEndParts parts) : p_(parts) {}
  const FrontEndParts& parts() const { return p_; }
  bool has_r2() const { return p_.r2_ohm > 0.0; }

  std::complex<double> practical(double f_hz) const;
  std::complex<double> ideal(double f_hz) const;
  static double magnitude_db(std::complex<double> h);
  static double phase_deg(std::complex<double> h);

  // R2/R1 and 20*log10(R2/R1); +inf without R2.
  double dc_gain() const;
  double dc_gain_db() const;
  // fc = 1/(2*pi*R2*C); 0 without R2.
  double corner_hz() const;
  // 1/(2*pi*R1*C): where the ideal integrator's gain is 1, and near where the practical one's is.
  double unity_gain_approx_hz() const;
  // The exact |H| = 1 crossing of the practical response:
  // f = sqrt((R2/R1)^2 - 1) / (2*pi*R2*C). Empty when R2 <= R1 (gain never reaches 1).
  // Without R2 it is the ideal crossing.
  std::optional<double> unity_gain_hz() const;
  // Lowest frequency from which the practical response is within `tolerance`
  // (e.g. 0.01) of the ideal one, counting magnitude and phase together:
  // |H/H_ideal - 1| = 1/sqrt(1 + (f/fc)^2) <= tolerance, so f >= fc*sqrt(1/tol^2 - 1).
  // 0 without R2 (the ideal integrator integrates at every frequency).
  double integrating_from_hz(double tolerance) const;
  // Relative shortfall of the practical integral of a constant input held for
  // `hold_s` against the ideal one: 1 - (tau/T)*(1 - exp(-T/tau)), tau = R2*C. 0 without R2.
  double droop_of_constant(double hold_s) const;

  // Drift with the input at zero, worst case (the two terms add):
  // |Vos|/(R1*C) + |Ib|/C, in V/s, as it starts from an empty capacitor.
  double drift_from_offset_v_per_s() const;
  double drift_from_bias_v_per_s() const;
  double drift_v_per_s() const { return drift_from_offset_v_per_s() + drift_from_bias_v_per_s(); }
  // With R2 the drift settles toward |Vos|*(1 + R2/R1) + |Ib|*R2; +inf without R2.
  double drift_settles_at_v() const;

  // Time for the output to go from |v0_v| to `limit_v` when it is driven at
  // `rate_v_per_s` (input plus drift, as it would be with an empty capacitor).
  // Without R2: (limit - |v0|)/rate. With R2 the output approaches rate*tau
  // exponentially: t = tau*ln((v_inf - v0)/(v_inf - limit)), never if v_inf <= limit.
  // Empty = never; 0 if already at or beyond the limit.
  std::optional<double> time_to_reach_s(double rate_v_per_s, double v0_v, double limit_v) const;

 private:
  FrontEndParts p_;
};

}  // namespace accrue::chain
