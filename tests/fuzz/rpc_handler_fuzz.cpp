// libFuzzer target: the JSON-RPC request handler (api::Methods::handle_line)
// on arbitrary request lines, against a small store written once by
// storage::Writer (the deterministic stream of tests/helpers/crash_workload.hpp).
// Checks its promises: it never throws or crashes; every reply is valid JSON
// (so valid UTF-8) holding JSON-RPC 2.0 replies, each with exactly one of
// "result" and "error"; a peer that has not authenticated (input starting
// with byte 0x01) gets no result at all unless the line authenticated it.
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <memory>
#include <optional>
#include <string>

#include "daemon/api/methods.hpp"
#include "helpers/crash_workload.hpp"
#include "storage/writer.hpp"

using namespace accrue;
using nlohmann::json;

namespace {

struct Fixture {
  std::string dir;
  daemon::api::Hub hub;
  std::unique_ptr<daemon::api::Methods> methods;
};

Fixture* fixture = nullptr;  // lives for the whole fuzzing process

Fixture* make_fixture() {
  auto* f = new Fixture;
  std::string t = (std::filesystem::temp_directory_path() / "accrue-rpc-fuzz-XXXXXX").string();
  if (!::mkdtemp(t.data())) std::abort();
  f->dir = t;
  fixture = f;
  // libFuzzer ends with exit(): the store's directory goes with the process.
  std::atexit([] {
    std::error_code ec;
    std::filesystem::remove_all(fixture->dir, ec);
  });
  const std::string db = t + "/fuzz.db";
  std::unique_ptr<storage::Writer> w;
  if (!storage::Writer::open(db, {}, [] { return testing::crash::kUtc0; }, w,
                             [] { return std::optional<std::uint64_t>(1ull << 40); })
           .ok())
    std::abort();
  chain::Calibration cal;
  if (!w->ensure_calibration(0, cal).ok()) std::abort();
  double total = 0;
  for (std::uint64_t k = 0; k < 40; ++k) {
    w->submit(testing::crash::make_batch(k, total, cal.id));
    total += testing::crash::increment(k);
  }
  w->stop();
  daemon::api::MethodSettings settings;
  settings.tcp_token = "fuzz-token-0123456789";
  f->methods = std::make_unique<daemon::api::Methods>(
      db, [] { return json{{"state", "fuzzing"}}; }, f->hub, nullptr, settings);
  return f;
}

void check_reply(const json& r, bool refused) {
  if (!r.is_object() || r.value("jsonrpc", "") != "2.0" || !r.contains("id")) std::abort();
  if (r.contains("result") == r.contains("error")) std::abort();
  if (refused && r.contains("result")) std::abort();
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  static Fixture* f = make_fixture();
  // A leading 0x01 makes the peer a TCP one that has not authenticated.
  const bool tcp = size > 0 && data[0] == 1;
  daemon::api::Peer peer;
  peer.authenticated = !tcp;
  const std::string_view line(reinterpret_cast<const char*>(data) + (tcp ? 1 : 0), tcp ? size - 1 : size);
  // Without a Control nothing is deferred: the reply comes before handle_line returns, exactly once.
  int calls = 0;
  std::optional<std::string> reply;
  f->methods->handle_line(line, peer, [&](std::optional<std::string> r) {
    ++calls;
    reply = std::move(r);
  });
  if (calls != 1) std::abort();
  if (!reply) return 0;  // notifications only
  const json r = json::parse(*reply, nullptr, false);
  if (r.is_discarded()) std::abort();
  const bool refused = tcp && !peer.authenticated;
  if (r.is_array()) {
    if (r.empty()) std::abort();
    for (const auto& x : r) check_reply(x, refused);
  } else {
    check_reply(r, refused);
  }
  return 0;
}
