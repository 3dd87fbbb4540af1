#include "tools/accrue/cli_args.hpp"

#include <cerrno>
#include <cstdio>
#include <cstdlib>
#include <iostream>

namespace accrue::client {

bool parse_flag(const std::vector<std::string>& args, std::size_t& i, const char* name, std::string& out) {
  if (args[i] != name) return false;
  if (i + 1 >= args.size()) {
    std::fprintf(stderr, "accrue: %s needs a value\n", name);
    std::exit(2);
  }
  out = args[++i];
  return true;
}

long long whole_number(const std::string& option, const std::string& text) {
  char* end = nullptr;
  errno = 0;
  const long long v = std::strtoll(text.c_str(), &end, 10);
  if (text.empty() || *end != '\0' || errno != 0) {
    std::fprintf(stderr, "accrue: %s takes a whole number, not %s\n", option.c_str(), text.c_str());
    std::exit(2);
  }
  return v;
}

nlohmann::json bound_value(const std::string& text) {
  const auto j = nlohmann::json::parse(text, nullptr, false);
  if (!j.is_discarded() && j.is_number()) return j;
  return text;
}

int fail(const RpcResult& r) {
  std::fprintf(stderr, "accrue: %s\n", r.error.c_str());
  return 1;
}

void print_json(const nlohmann::json& j) {
  std::cout << j.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
}

}  // namespace accrue::client
