#include "daemon/reprocess_jobs.hpp"

#include <chrono>

#include <nlohmann/json.hpp>

#include "storage/database.hpp"

namespace accrue::daemon {

using nlohmann::json;

ReprocessJobs::ReprocessJobs(asio::io_context& io, std::string database, storage::Writer& writer, LiveRun live_run,
                             std::function<double()> clock)
    : io_(io), database_(std::move(database)), writer_(writer), live_run_(std::move(live_run)), clock_(std::move(clock)) {}

ReprocessJobs::~ReprocessJobs() {
  cancel_ = true;
  if (thread_.joinable()) thread_.join();
}

api::ControlResult ReprocessJobs::start(storage::ReprocessRequest request, std::weak_ptr<api::Sink> sink, bool progress) {
  api::ControlResult r;
  if (busy_) {
    r.message = "a reprocessing is already running; one at a time";
    return r;
  }
  if (auto live = live_run_(); live && *live == request.run_id) {
    r.message = "run " + std::to_string(request.run_id) + " is still being recorded; reprocess it once it has ended";
    return r;
  }
  if (thread_.joinable()) thread_.join();  // the previous job has finished (busy_ is false)
  busy_ = true;
  const std::int64_t job = next_job_++;
  r.ok = true;
  r.detail = {{"job", job}, {"run_id", request.run_id}, {"state", "running"}};
  thread_ = std::thread([this, job, request = std::move(request), sink = std::move(sink), progress]() mutable {
    run(job, std::move(request), std::move(sink), progress);
  });
  return r;
}

void ReprocessJobs::post(std::weak_ptr<api::Sink> sink, std::string line) {
  asio::post(io_, [sink = std::move(sink), line = std::move(line)]() mutable {
    if (auto s = sink.lock(); s && s->open()) s->notify(std::move(line));
  });
}

storage::Status ReprocessJobs::calibration_id(int channel, chain::Calibration& calibration) {
  if (storage::Status s = writer_.ensure_calibration(channel, calibration); !s.ok()) return s;
  // The Writer commits a new version within its commit interval; the rows that name it must wait.
  std::unique_ptr<storage::Database> db;
  if (storage::Status s = storage::Database::open(database_, storage::Database::Mode::read_only, db); !s.ok()) return s;
  for (int attempt = 0; attempt < 300 && !cancel_; ++attempt) {
    storage::Statement st;
    if (storage::Status s = db->prepare("SELECT 1 FROM calibration WHERE calibration_id = ?", st); !s.ok()) return s;
    st.bind(1, calibration.id);
    bool row = false;
    if (storage::Status s = st.step(&row); !s.ok()) return s;
    if (row) return storage::Status::success();
    std::this_thread::sleep_for(std::chrono::milliseconds(100));
  }
  return storage::Status::error(SQLITE_BUSY, "the daemon's writer did not commit calibration version " +
                                                 std::to_string(calibration.id) + " within 30 s");
}

void ReprocessJobs::run(std::int64_t job, storage::ReprocessRequest request, std::weak_ptr<api::Sink> sink, bool progress) {
  std::uint64_t sent_at = 0;
  storage::ReprocessResult result;
  const storage::Status s = storage::reprocess(
      database_, request, clock_,
      [&](const storage::ReprocessProgress& p) {
        if (cancel_) return false;
        const std::uint64_t step = std::max<std::uint64_t>(1, p.samples_total / 100);
        if (progress && (p.samples_done == 0 || p.samples_done >= sent_at + step || p.samples_done == p.samples_total)) {
          sent_at = p.samples_done;
          post(sink, json{{"jsonrpc", "2.0"},
                          {"method", "reprocess_progress"},
                          {"params",
                           {{"job", job}, {"run_id", p.run_id}, {"derivation", p.derivation},
                            {"blocks_done", p.blocks_done}, {"blocks_total", p.blocks_total},
                            {"samples_done", p.samples_done}, {"samples_total", p.samples_total},
                            {"fraction", p.samples_total ? double(p.samples_done) / double(p.samples_total) : 1.0}}}}
                         .dump());
        }
        return true;
      },
      result, [this](int channel, chain::Calibration& c) { return calibration_id(channel, c); });
  json params = {{"job", job}, {"run_id", request.run_id}, {"ok", s.ok()}};
  if (s.ok()) {
    json channels = json::array();
    for (const auto& c : result.channels)
      channels.push_back({{"channel", c.channel}, {"calibration_id", c.calibration_id}, {"quantity", c.quantity},
                          {"unit", c.unit}, {"baseline", c.baseline}, {"total", c.total},
                          {"std_uncertainty", c.std_uncertainty}, {"segments", c.segments}, {"flags", c.flags},
                          {"last_index", c.last_index},
                          {"parent_total", c.parent_total ? json(*c.parent_total) : json(nullptr)}});
    params["result"] = {{"run_id", result.run_id},         {"derivation", result.derivation},
                        {"parent", result.parent},         {"raw_blocks", result.blocks},
                        {"samples", result.samples},       {"raw_index_gaps", result.index_gaps},
                        {"raw_gap_samples", result.gap_samples}, {"run_open", result.run_open},
                        {"changes", json::parse(result.changes, nullptr, false)}, {"channels", channels}};
  } else {
    params["error"] = s.message;
  }
  post(sink, json{{"jsonrpc", "2.0"}, {"method", "reprocess_done"}, {"params", params}}.dump(-1, ' ', false,
                                                                                          json::error_handler_t::replace));
  busy_ = false;
}

}  // namespace accrue::daemon
