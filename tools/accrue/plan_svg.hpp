#pragma once
// Bode plot of a front end as a standalone SVG document: magnitude (dB) and
// phase (degrees) of the practical integrator against the ideal one over a
// log frequency axis, with the corner fc and the 0 dB frequency marked.
// Pure: returns the document text; the caller writes it.
#include <string>

#include "daemon/chain/front_end_response.hpp"

namespace accrue::client {

std::string bode_svg(const chain::FrontEndResponse& r);

}  // namespace accrue::client
