// libFuzzer target: the config loader on arbitrary text. Checks its promises:
// it never throws or crashes, every error gives a reason, and the same text
// gives the same errors twice (no hidden state). (The key may be empty: a file
// may itself use "" as a key, which is then named as an unknown key "".)
#include <cstdlib>
#include <string>

#include "daemon/options.hpp"

using namespace accrue::daemon;

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  DaemonConfig a, b;
  const auto first = load_config_text(text, a);
  for (const auto& e : first) {
    if (e.reason.empty()) std::abort();
    if (to_string(e).empty()) std::abort();
  }
  const auto second = load_config_text(text, b);
  if (second.size() != first.size()) std::abort();
  for (std::size_t i = 0; i < first.size(); ++i)
    if (first[i].key != second[i].key || first[i].reason != second[i].reason) std::abort();
  return 0;
}
