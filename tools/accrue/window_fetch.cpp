#include "tools/accrue/window_fetch.hpp"

#include "tools/accrue/cli_args.hpp"

namespace accrue::client {

WindowOptions parse_window_options(const std::vector<std::string>& args) {
  WindowOptions w;
  for (std::size_t i = 0; i < args.size(); ++i) {
    std::string v;
    if (parse_flag(args, i, "--channel", v)) w.params["channel"] = whole_number("--channel", v);
    else if (parse_flag(args, i, "--run", v)) w.params["run_id"] = whole_number("--run", v);
    else if (parse_flag(args, i, "--derivation", v)) w.params["derivation"] = whole_number("--derivation", v);
    else if (parse_flag(args, i, "--from", v)) w.params["from"] = bound_value(v);
    else if (parse_flag(args, i, "--to", v)) w.params["to"] = bound_value(v);
    else if (parse_flag(args, i, "--points", v)) w.params["max_points"] = whole_number("--points", v);
    else if (parse_flag(args, i, "--select", v)) w.params["select"] = v;
    else w.rest.push_back(args[i]);
  }
  return w;
}

RpcResult fetch_window(RpcClient& c, const nlohmann::json& params, std::size_t max_pages) {
  RpcResult first = c.call("window", params);
  if (!first.ok) return first;
  nlohmann::json token = first.result["continuation"];
  for (std::size_t page = 1; !token.is_null(); ++page) {
    if (page >= max_pages) {
      RpcResult r;
      r.error = "the window needs more than " + std::to_string(max_pages) + " pages: ask for fewer points";
      return r;
    }
    RpcResult next = c.call("window", {{"continuation", token}});
    if (!next.ok) return next;
    for (auto& p : next.result["points"]) first.result["points"].push_back(std::move(p));
    token = next.result["continuation"];
  }
  first.result["continuation"] = nullptr;
  return first;
}

}  // namespace accrue::client
