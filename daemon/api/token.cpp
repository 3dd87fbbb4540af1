#include "daemon/api/token.hpp"

#include <cstddef>

namespace accrue::daemon::api {

bool tokens_equal(std::string_view expected, std::string_view given) {
  // Walk the expected token's length whatever is given; fold every byte
  // difference (and the length difference) into one accumulator. volatile
  // keeps the compiler from turning the loop into an early-exit memcmp.
  volatile unsigned char diff = expected.size() == given.size() ? 0 : 1;
  for (std::size_t i = 0; i < expected.size(); ++i) {
    const unsigned char g = i < given.size() ? static_cast<unsigned char>(given[i]) : 0;
    diff = diff | static_cast<unsigned char>(static_cast<unsigned char>(expected[i]) ^ g);
  }
  return !expected.empty() && diff == 0;
}

}  // namespace accrue::daemon::api
