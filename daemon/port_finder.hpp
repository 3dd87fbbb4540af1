#pragma once
// Finds serial ports through libserialport: lists them with their USB
// metadata, and resolves a configured selector to a device path. Selectors:
// a path ("/dev/ttyUSB0", also a pseudo-terminal), "usb-serial:SERIAL" or
// "usb-id:VVVV:PPPP" (hex vendor and product ids). libserialport cannot open
// pseudo-terminals (it looks devices up in sysfs), so paths pass through as
// they are and the link opens them with Asio.
#include <optional>
#include <string>
#include <vector>

namespace accrue::daemon {

struct PortInfo {
  std::string path;
  std::string description;
  std::string usb_serial;
  int usb_vid = -1;
  int usb_pid = -1;
};

std::vector<PortInfo> list_ports();
// nullopt with `why` filled when the selector matches no port.
std::optional<std::string> resolve_port(const std::string& selector, std::string& why);

}  // namespace accrue::daemon
