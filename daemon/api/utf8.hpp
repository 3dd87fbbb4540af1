#pragma once
// Strict UTF-8 validation (RFC 3629): rejects overlong forms, surrogates
// (U+D800..U+DFFF), code points above U+10FFFF and truncated sequences. The
// server checks each request line with it before parsing, so a client gets a
// Parse error that names the byte offset instead of a generic one.
#include <cstddef>
#include <optional>
#include <string_view>

namespace accrue::daemon::api {

// nullopt when `text` is valid UTF-8, else the offset of the first bad byte.
std::optional<std::size_t> first_invalid_utf8(std::string_view text);

}  // namespace accrue::daemon::api
