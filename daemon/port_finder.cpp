#include "daemon/port_finder.hpp"

#include <libserialport.h>

#include <cstdio>

namespace accrue::daemon {

std::vector<PortInfo> list_ports() {
  std::vector<PortInfo> out;
  sp_port** ports = nullptr;
  if (sp_list_ports(&ports) != SP_OK) return out;
  for (sp_port** p = ports; p && *p; ++p) {
    PortInfo info;
    if (const char* n = sp_get_port_name(*p)) info.path = n;
    if (const char* d = sp_get_port_description(*p)) info.description = d;
    if (sp_get_port_transport(*p) == SP_TRANSPORT_USB) {
      if (const char* s = sp_get_port_usb_serial(*p)) info.usb_serial = s;
      int vid = -1, pid = -1;
      if (sp_get_port_usb_vid_pid(*p, &vid, &pid) == SP_OK) {
        info.usb_vid = vid;
        info.usb_pid = pid;
      }
    }
    out.push_back(info);
  }
  sp_free_port_list(ports);
  return out;
}

std::optional<std::string> resolve_port(const std::string& selector, std::string& why) {
  const std::string serial_prefix = "usb-serial:";
  const std::string id_prefix = "usb-id:";
  if (selector.rfind(serial_prefix, 0) == 0) {
    const std::string want = selector.substr(serial_prefix.size());
    for (const auto& p : list_ports())
      if (p.usb_serial == want) return p.path;
    why = "no USB serial port with serial number " + want;
    return std::nullopt;
  }
  if (selector.rfind(id_prefix, 0) == 0) {
    unsigned vid = 0, pid = 0;
    if (std::sscanf(selector.c_str() + id_prefix.size(), "%4x:%4x", &vid, &pid) != 2) {
      why = "usb-id must be usb-id:VVVV:PPPP in hex, got " + selector;
      return std::nullopt;
    }
    for (const auto& p : list_ports())
      if (p.usb_vid == int(vid) && p.usb_pid == int(pid)) return p.path;
    why = "no USB serial port with id " + selector.substr(id_prefix.size());
    return std::nullopt;
  }
  if (selector.empty()) {
    why = "no device configured";
    return std::nullopt;
  }
  return selector;
}

}  // namespace accrue::daemon
