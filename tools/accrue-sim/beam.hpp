#pragma once
// BeamModel is the invented input of the demo scenario: a pulsed ("spilled")
// beam current into a Faraday cup. During each spill the current is
// I0*(1 + m*sin(2*pi*t/T_mod)); between spills and outside [start, stop) it
// is zero. charge(a, b) is the exact integral over [a, b] from the closed-form
// antiderivative, so the simulator's truth carries no integration error.
namespace accrue::sim {

struct BeamModel {
  double current_a = 100e-12;     // I0 during a spill
  double modulation = 0.3;        // m
  double modulation_period_s = 3 * 3600.0;
  double spill_period_s = 6.0;
  double spill_on_s = 4.0;
  double start_s = 120.0;
  double stop_s = 28800.0 - 60.0;

  double current(double t) const;
  double charge(double a, double b) const;

 private:
  double antiderivative(double t) const;  // of I0*(1 + m*sin(2*pi*t/T))
};

}  // namespace accrue::sim
