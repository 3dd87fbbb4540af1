#include "tools/accrue/plan_svg.hpp"

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <functional>
#include <sstream>

#include "tools/accrue/plan_report.hpp"

namespace accrue::client {
namespace {

constexpr double kWidth = 760, kPanelHeight = 250, kLeft = 70, kRight = 20, kTop = 40, kGap = 60;

std::string n(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.2f", v);
  return buf;
}

struct Axis {
  double lo, hi;  // data range
  double p0, p1;  // pixel range
  double map(double v) const { return p0 + (v - lo) / (hi - lo) * (p1 - p0); }
};

// Escapes the few characters XML reserves in text.
std::string xml(const std::string& s) {
  std::string o;
  for (char c : s) {
    if (c == '<') o += "&lt;";
    else if (c == '>') o += "&gt;";
    else if (c == '&') o += "&amp;";
    else o += c;
  }
  return o;
}

}  // namespace

std::string bode_svg(const chain::FrontEndResponse& r) {
  const double fu = r.unity_gain_approx_hz();
  const double f_lo_data = r.has_r2() ? std::min(r.corner_hz() / 100.0, fu / 1e4) : fu / 1e4;
  const double f_hi_data = fu * 100.0;
  const double dlo = std::floor(std::log10(f_lo_data)), dhi = std::ceil(std::log10(f_hi_data));
  const Axis x{dlo, dhi, kLeft, kWidth - kRight};
  const int points = 400;

  auto mag = [&](double f, bool ideal) {
    return chain::FrontEndResponse::magnitude_db(ideal ? r.ideal(f) : r.practical(f));
  };
  auto phase = [&](double f, bool ideal) {
    // Shown as -270..-180: the inverting sign's -180 plus up to 90 degrees of
    // integrator lag (std::arg gives the same angle as +180..+90).
    double ph = chain::FrontEndResponse::phase_deg(ideal ? r.ideal(f) : r.practical(f));
    if (ph > 0) ph -= 360.0;
    return ph;
  };
  double mmin = 1e300, mmax = -1e300;
  for (int i = 0; i <= points; ++i) {
    const double f = std::pow(10.0, dlo + (dhi - dlo) * i / points);
    for (bool ideal : {false, true}) {
      mmin = std::min(mmin, mag(f, ideal));
      mmax = std::max(mmax, mag(f, ideal));
    }
  }
  // Ideal's magnitude grows without bound at low frequency: clip the panel
  // to 20 dB above the practical DC gain (or the data, without R2).
  if (r.has_r2()) mmax = std::min(mmax, r.dc_gain_db() + 20.0);
  mmax = std::ceil(mmax / 20.0) * 20.0;
  mmin = std::floor(mmin / 20.0) * 20.0;
  const double top2 = kTop + kPanelHeight + kGap;
  const Axis ym{mmin, mmax, kTop + kPanelHeight, kTop};
  const Axis yp{-270.0, -180.0, top2 + kPanelHeight, top2};
  const double height = top2 + kPanelHeight + 50;

  std::ostringstream o;
  o << "<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n";
  o << "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"" << kWidth << "\" height=\"" << n(height)
    << "\" viewBox=\"0 0 " << kWidth << " " << n(height) << "\" font-family=\"sans-serif\" font-size=\"12\">\n";
  o << "<title>Bode plot: practical integrator against the ideal one</title>\n";
  o << "<rect width=\"100%\" height=\"100%\" fill=\"white\"/>\n";

  auto panel = [&](const Axis& y, const std::string& label, double step, const std::function<double(double, bool)>& fn,
                   const std::string& id) {
    o << "<g id=\"" << id << "\">\n";
    o << "<rect x=\"" << n(x.p0) << "\" y=\"" << n(y.p1) << "\" width=\"" << n(x.p1 - x.p0) << "\" height=\""
      << n(y.p0 - y.p1) << "\" fill=\"none\" stroke=\"black\"/>\n";
    for (double d = dlo; d <= dhi + 1e-9; d += 1.0) {
      o << "<line x1=\"" << n(x.map(d)) << "\" y1=\"" << n(y.p0) << "\" x2=\"" << n(x.map(d)) << "\" y2=\"" << n(y.p1)
        << "\" stroke=\"#ddd\"/>\n";
      o << "<text x=\"" << n(x.map(d)) << "\" y=\"" << n(y.p0 + 16) << "\" text-anchor=\"middle\">"
        << xml(si_text(std::pow(10.0, d), "Hz", 3)) << "</text>\n";
    }
    for (double v = y.lo; v <= y.hi + 1e-9; v += step) {
      o << "<line x1=\"" << n(x.p0) << "\" y1=\"" << n(y.map(v)) << "\" x2=\"" << n(x.p1) << "\" y2=\"" << n(y.map(v))
        << "\" stroke=\"#ddd\"/>\n";
      o << "<text x=\"" << n(x.p0 - 6) << "\" y=\"" << n(y.map(v) + 4) << "\" text-anchor=\"end\">" << n(v).substr(0, n(v).size() - 3)
        << "</text>\n";
    }
    o << "<text x=\"" << n(x.p0) << "\" y=\"" << n(y.p1 - 8) << "\">" << xml(label) << "</text>\n";
    for (bool ideal : {true, false}) {
      o << "<polyline class=\"" << (ideal ? "ideal" : "practical") << "\" fill=\"none\" stroke=\""
        << (ideal ? "#888" : "#c03") << "\" stroke-width=\"" << (ideal ? "1.5" : "2") << "\""
        << (ideal ? " stroke-dasharray=\"6 4\"" : "") << " points=\"";
      for (int i = 0; i <= points; ++i) {
        const double d = dlo + (dhi - dlo) * i / points;
        const double v = std::clamp(fn(std::pow(10.0, d), ideal), y.lo, y.hi);
        o << n(x.map(d)) << "," << n(y.map(v)) << (i < points ? " " : "");
      }
      o << "\"/>\n";
    }
    auto marker = [&](double f, const std::string& name) {
      const double px = x.map(std::log10(f));
      o << "<line class=\"marker\" x1=\"" << n(px) << "\" y1=\"" << n(y.p0) << "\" x2=\"" << n(px) << "\" y2=\""
        << n(y.p1) << "\" stroke=\"#05a\" stroke-dasharray=\"2 3\"/>\n";
      o << "<text x=\"" << n(px + 4) << "\" y=\"" << n(y.p1 + 14) << "\" fill=\"#05a\">" << xml(name) << " "
        << xml(si_text(f, "Hz", 3)) << "</text>\n";
    };
    if (r.has_r2()) marker(r.corner_hz(), "fc");
    if (r.unity_gain_hz()) marker(*r.unity_gain_hz(), "f0dB");
    o << "</g>\n";
  };
  panel(ym, "magnitude (dB)", 20.0, mag, "magnitude");
  panel(yp, "phase (degrees)", 15.0, phase, "phase");
  const double ly = height - 14;
  o << "<line x1=\"" << n(kLeft) << "\" y1=\"" << n(ly) << "\" x2=\"" << n(kLeft + 30) << "\" y2=\"" << n(ly)
    << "\" stroke=\"#c03\" stroke-width=\"2\"/><text x=\"" << n(kLeft + 36) << "\" y=\"" << n(ly + 4)
    << "\">practical -(R2/R1)/(1 + j&#969;R2C)</text>\n";
  o << "<line x1=\"" << n(kLeft + 330) << "\" y1=\"" << n(ly) << "\" x2=\"" << n(kLeft + 360) << "\" y2=\"" << n(ly)
    << "\" stroke=\"#888\" stroke-width=\"1.5\" stroke-dasharray=\"6 4\"/><text x=\"" << n(kLeft + 366) << "\" y=\""
    << n(ly + 4) << "\">ideal -1/(j&#969;R1C)</text>\n";
  o << "</svg>\n";
  return o.str();
}

}  // namespace accrue::client
