#include <catch2/catch.hpp>

#include <cmath>

#include "daemon/chain/calibration.hpp"

using namespace accrue::chain;
using Catch::Matchers::WithinRel;

TEST_CASE("calibration: bipolar 24-bit codes to volts", "[chain][calibration]") {
  // Two's-complement bipolar ADC transfer: V = code * FS / 2^(N-1), so the
  // codes span [-FS, FS - 1 LSB] (common practice for bipolar converters).
  AdcCalibration adc;  // 24 bits, +-10 V, gain 1
  const double lsb = 10.0 / 8388608.0;
  CHECK(adc.volts_per_code() == lsb);
  CHECK(adc.to_volts(0) == 0.0);
  CHECK(adc.to_volts(-8388608) == -10.0);
  CHECK_THAT(adc.to_volts(8388607), WithinRel(10.0 - lsb, 1e-15));
  CHECK_THAT(adc.to_volts(1000), WithinRel(1000 * lsb, 1e-15));
}

TEST_CASE("calibration: zero code, gain and unipolar converters", "[chain][calibration]") {
  AdcCalibration adc;
  adc.zero_code = 120;
  adc.gain = 2.0;  // the output was amplified 2x before the ADC
  CHECK(adc.to_volts(120) == 0.0);
  CHECK_THAT(adc.to_volts(120 + 4194304), WithinRel(2.5, 1e-15));  // quarter scale of 10 V, halved by the gain
  AdcCalibration uni;
  uni.bipolar = false;
  uni.bits = 16;
  uni.full_scale_v = 5.0;
  // Unipolar: V = code * FS / 2^N.
  CHECK_THAT(uni.to_volts(32768), WithinRel(2.5, 1e-15));
  CHECK_THAT(uni.volts_per_code(), WithinRel(5.0 / 65536.0, 1e-15));
}

TEST_CASE("calibration: quantisation noise is LSB/sqrt(12)", "[chain][calibration]") {
  // Uniform quantisation error over one LSB has standard deviation LSB/sqrt(12)
  // (W. R. Bennett, "Spectra of quantized signals", Bell Syst. Tech. J. 27, 1948).
  AdcCalibration adc;
  adc.bits = 12;
  adc.full_scale_v = 2.048;
  CHECK_THAT(adc.quantisation_sigma_v(), WithinRel(0.001 / std::sqrt(12.0), 1e-12));
}

TEST_CASE("calibration: quantity per output volt for each sensor", "[chain][calibration]") {
  Calibration cal;
  cal.front_end.c_farad = 4.7e-9;
  cal.front_end.r1_ohm = 100e3;
  // Charge amplifier: Q = -C * dV (inverting).
  cal.sensor = SensorKind::charge;
  CHECK(cal.quantity_per_volt() == -4.7e-9);
  CHECK(cal.unit() == "C");
  // Volt-seconds: integral of Vin dt = -R1 * C * dV.
  cal.sensor = SensorKind::volt_seconds;
  CHECK_THAT(cal.quantity_per_volt(), WithinRel(-4.7e-4, 1e-12));
  // A non-inverting board flips the sign.
  cal.front_end.inverting = false;
  CHECK_THAT(cal.quantity_per_volt(), WithinRel(4.7e-4, 1e-12));
}
