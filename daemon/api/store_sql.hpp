#pragma once
// SQL pieces StoreQueries' files share: index clamping and the derivation a
// query reads. Internal to daemon/api.
#include <algorithm>
#include <climits>
#include <cstdint>
#include <optional>

#include "storage/database.hpp"

namespace accrue::daemon::api {

inline std::int64_t clamp64(std::uint64_t v) { return std::int64_t(std::min<std::uint64_t>(v, INT64_MAX)); }

// The derivation a query reads: ?9 when bound, else the run's (?1) newest usable one.
#define ACCRUE_READ_DERIVATION \
  "COALESCE(?9, (SELECT MAX(derivation) FROM derivation WHERE run_id = ?1 AND state IN ('recorded', 'complete')))"
inline void bind_derivation(storage::Statement& st, std::optional<int> derivation) {
  if (derivation) st.bind(9, std::int64_t(*derivation));
  else st.bind_null(9);
}

}  // namespace accrue::daemon::api
