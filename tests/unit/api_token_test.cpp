#include <catch2/catch.hpp>

#include "daemon/api/token.hpp"

using accrue::daemon::api::tokens_equal;

TEST_CASE("api token: only the exact token matches") {
  CHECK(tokens_equal("sloppy-test-token-0123456789", "sloppy-test-token-0123456789"));
  CHECK_FALSE(tokens_equal("sloppy-test-token-0123456789", "sloppy-test-token-012345678"));    // prefix
  CHECK_FALSE(tokens_equal("sloppy-test-token-0123456789", "sloppy-test-token-01234567890"));  // longer
  CHECK_FALSE(tokens_equal("sloppy-test-token-0123456789", "Sloppy-test-token-0123456789"));   // first byte
  CHECK_FALSE(tokens_equal("sloppy-test-token-0123456789", ""));
  CHECK_FALSE(tokens_equal("", ""));  // no token configured never authenticates
}
