#pragma once
// Bearer-token check for the TCP listener. The comparison takes time that
// depends only on the lengths, never on where the first differing byte is,
// so a remote peer cannot learn the token byte by byte from reply timing.
#include <string_view>

namespace accrue::daemon::api {

bool tokens_equal(std::string_view expected, std::string_view given);

}  // namespace accrue::daemon::api
