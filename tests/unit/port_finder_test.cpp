// The port finder's selectors (daemon/port_finder.hpp): a path passes through
// untouched (pseudo-terminals and udev links are not in libserialport's list),
// USB selectors are looked up in the list of ports, and a selector that
// matches nothing or does not parse gets an error that says which and why.
#include <catch2/catch.hpp>

#include "daemon/port_finder.hpp"

using accrue::daemon::list_ports;
using accrue::daemon::resolve_port;

TEST_CASE("port finder: a path passes through as it is", "[daemon][ports]") {
  std::string why;
  CHECK(resolve_port("/dev/ttyUSB0", why) == std::optional<std::string>("/dev/ttyUSB0"));
  CHECK(resolve_port("/tmp/test-dir/board", why) == std::optional<std::string>("/tmp/test-dir/board"));
  CHECK(why.empty());
}

TEST_CASE("port finder: no selector is an error, not a guess", "[daemon][ports]") {
  std::string why;
  CHECK_FALSE(resolve_port("", why));
  CHECK(why == "no device configured");
}

TEST_CASE("port finder: a usb-serial selector that matches nothing says which serial", "[daemon][ports]") {
  // A serial number no adapter has: whatever ports this machine lists, none match.
  const std::string serial = "NO-SUCH-ADAPTER-7f3a91";
  for (const auto& p : list_ports()) REQUIRE(p.usb_serial != serial);
  std::string why;
  CHECK_FALSE(resolve_port("usb-serial:" + serial, why));
  CHECK(why == "no USB serial port with serial number " + serial);
}

TEST_CASE("port finder: usb-id is parsed as hex vendor:product, and a bad one is refused", "[daemon][ports]") {
  std::string why;
  // An id no port on this machine has (checked against the list first).
  for (const auto& p : list_ports()) REQUIRE_FALSE((p.usb_vid == 0xffff && p.usb_pid == 0xfffe));
  CHECK_FALSE(resolve_port("usb-id:ffff:fffe", why));
  CHECK(why == "no USB serial port with id ffff:fffe");
  why.clear();
  CHECK_FALSE(resolve_port("usb-id:vendor", why));
  CHECK(why.find("usb-id must be usb-id:VVVV:PPPP in hex") != std::string::npos);
  why.clear();
  CHECK_FALSE(resolve_port("usb-id:0403", why));
  CHECK(why.find("usb-id must be") != std::string::npos);
}
