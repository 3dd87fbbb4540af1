#include <catch2/catch.hpp>

#include "daemon/api/utf8.hpp"

using accrue::daemon::api::first_invalid_utf8;

// Cases follow RFC 3629 section 3 (the UTF-8 byte table and "overlong"
// prohibition) and section 4 (surrogates are not valid); the samples are the
// kind used in Markus Kuhn's UTF-8 decoder stress test (from memory).
TEST_CASE("api utf8: valid text of every sequence length passes") {
  CHECK_FALSE(first_invalid_utf8("plain ASCII {\"a\":1}"));
  CHECK_FALSE(first_invalid_utf8("\xce\xba\xe1\xbd\xb9\xcf\x83\xce\xbc\xce\xb5"));  // Greek "kosme" (2 and 3 bytes)
  CHECK_FALSE(first_invalid_utf8("\xf0\x9f\x98\x80"));                              // U+1F600, 4 bytes
  CHECK_FALSE(first_invalid_utf8("\xf4\x8f\xbf\xbf"));                              // U+10FFFF, the last code point
}

TEST_CASE("api utf8: overlong forms, surrogates, out-of-range and truncated sequences are rejected") {
  CHECK(first_invalid_utf8("ab\xc0\xaf") == std::optional<std::size_t>(2));  // overlong '/'
  CHECK(first_invalid_utf8("\xe0\x80\xaf") == std::optional<std::size_t>(0));  // overlong '/' in 3 bytes
  CHECK(first_invalid_utf8("\xed\xa0\x80") == std::optional<std::size_t>(0));  // U+D800, a surrogate
  CHECK(first_invalid_utf8("\xf4\x90\x80\x80") == std::optional<std::size_t>(0));  // above U+10FFFF
  CHECK(first_invalid_utf8("x\xe2\x82") == std::optional<std::size_t>(1));  // truncated euro sign
  CHECK(first_invalid_utf8("\x80") == std::optional<std::size_t>(0));       // lone continuation byte
  CHECK(first_invalid_utf8("\xff") == std::optional<std::size_t>(0));       // never valid in UTF-8
}
