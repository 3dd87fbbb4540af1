#pragma once
// Small helpers the accrue subcommands share for reading their options and
// reporting the daemon's errors. Usage errors exit with status 2 (see
// commands.hpp); nothing here talks to the daemon.
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "tools/accrue/rpc_client.hpp"

namespace accrue::client {

// When args[i] is `name`, stores the next argument in `out`, advances i and
// returns true; a missing value is a usage error (exit 2).
bool parse_flag(const std::vector<std::string>& args, std::size_t& i, const char* name, std::string& out);
// A whole number parsed from an option's text; anything else is a usage error (exit 2).
long long whole_number(const std::string& option, const std::string& text);
// A window or range bound as the API takes it: a whole number is a sample
// index, a number with a fraction is Unix seconds, anything else RFC 3339 text.
nlohmann::json bound_value(const std::string& text);
// Prints the daemon's error (or the transport's) to stderr; returns exit code 1.
int fail(const RpcResult& r);
// Prints a JSON result for machines: indented, UTF-8, newline-terminated.
void print_json(const nlohmann::json& j);

}  // namespace accrue::client
