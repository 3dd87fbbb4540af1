// Reader's derivation queries: provenance of each derivation of a run and the
// choice of the derivation a query reads (see schema.sql, table derivation).
#include "storage/reader.hpp"

namespace accrue::storage {

Status Reader::derivations(std::int64_t run_id, std::vector<DerivationInfo>& out) {
  out.clear();
  Statement st;
  if (Status s = db_->prepare(
          "SELECT derivation, parent, created_utc, who, reason, changes, state, COALESCE(finished_utc, '')"
          " FROM derivation WHERE run_id = ? ORDER BY derivation",
          st);
      !s.ok())
    return s;
  st.bind(1, run_id);
  for (bool row = true;;) {
    if (Status s = st.step(&row); !s.ok()) return s;
    if (!row) break;
    DerivationInfo d;
    d.run_id = run_id;
    d.derivation = int(st.column_int(0));
    if (!st.column_is_null(1)) d.parent = int(st.column_int(1));
    d.created_utc = st.column_text(2);
    d.who = st.column_text(3);
    d.reason = st.column_text(4);
    d.changes = st.column_text(5);
    d.state = st.column_text(6);
    d.finished_utc = st.column_text(7);
    out.push_back(std::move(d));
  }
  Statement ch;
  if (Status s = db_->prepare(
          "SELECT d.derivation, d.channel, d.calibration_id, d.baseline, COALESCE(d.settings, ''),"
          " COALESCE(d.start_state, ''), d.last_index, d.total, d.std_uncertainty, COALESCE(d.segments, 0),"
          " COALESCE(d.flags, 0), c.quantity, c.unit, c.quantity_per_volt"
          " FROM derivation_channel d JOIN calibration c USING (calibration_id)"
          " WHERE d.run_id = ? ORDER BY d.derivation, d.channel",
          ch);
      !s.ok())
    return s;
  ch.bind(1, run_id);
  for (bool row = true;;) {
    if (Status s = ch.step(&row); !s.ok()) return s;
    if (!row) break;
    const int derivation = int(ch.column_int(0));
    DerivationChannelInfo c;
    c.channel = int(ch.column_int(1));
    c.calibration_id = ch.column_int(2);
    c.baseline = ch.column_text(3);
    c.settings = ch.column_text(4);
    c.start_state = ch.column_text(5);
    if (!ch.column_is_null(6)) c.last_index = std::uint64_t(ch.column_int(6));
    if (!ch.column_is_null(7)) c.total = ch.column_double(7);
    if (!ch.column_is_null(8)) c.std_uncertainty = ch.column_double(8);
    c.segments = std::uint32_t(ch.column_int(9));
    c.flags = std::uint32_t(ch.column_int(10));
    c.quantity = ch.column_text(11);
    c.unit = ch.column_text(12);
    c.quantity_per_volt = ch.column_double(13);
    for (auto& d : out)
      if (d.derivation == derivation) d.channels.push_back(c);
  }
  return Status::success();
}

Status Reader::resolve_derivation(std::int64_t run_id, std::optional<int> wanted, int& out) {
  Statement st;
  if (Status s = db_->prepare(
          "SELECT MAX(derivation) FROM derivation WHERE run_id = ?1 AND state IN ('recorded', 'complete')"
          " AND (?2 IS NULL OR derivation = ?2)",
          st);
      !s.ok())
    return s;
  st.bind(1, run_id);
  if (wanted) st.bind(2, std::int64_t(*wanted));
  else st.bind_null(2);
  bool row = false;
  if (Status s = st.step(&row); !s.ok()) return s;
  if (!row || st.column_is_null(0)) {
    return Status::error(SQLITE_NOTFOUND, wanted ? "run " + std::to_string(run_id) + " has no derivation " +
                                                       std::to_string(*wanted) + " that can be read"
                                                 : "run " + std::to_string(run_id) + " has no derivation to read");
  }
  out = int(st.column_int(0));
  return Status::success();
}

}  // namespace accrue::storage
