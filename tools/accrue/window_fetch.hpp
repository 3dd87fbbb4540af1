#pragma once
// Reads a whole window from accrued: sends one "window" request built from
// the command-line options, follows its continuation tokens (docs/api.md,
// window) and returns the first reply with every page's points appended, so
// export and plot see one window however many pages it took. Also parses the
// options every window-shaped subcommand takes.
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "tools/accrue/rpc_client.hpp"

namespace accrue::client {

struct WindowOptions {
  nlohmann::json params = nlohmann::json::object();  // the window request's params
  std::vector<std::string> rest;                     // arguments not consumed
};

// Consumes --channel N, --run ID, --from T, --to T, --points N, --select S.
WindowOptions parse_window_options(const std::vector<std::string>& args);

// The whole window (every page); on error the RpcResult of the failing call.
RpcResult fetch_window(RpcClient& c, const nlohmann::json& params, std::size_t max_pages = 10000);

}  // namespace accrue::client
