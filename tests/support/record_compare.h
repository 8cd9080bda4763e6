// Bit-identity of two simulated records (tests of reproducibility across threads, time blocks
// and MPI ranks): same tags, channel table, window and provenance — except the start date,
// which differs between any two runs by nature.
#pragma once

#include <catch2/catch.hpp>

#include "engine/records/record_format.h"

namespace flyby::test {

inline void require_same_record(const records::RecordData& a, const records::RecordData& b) {
  REQUIRE(a.tags.size() == b.tags.size());
  REQUIRE(a.tags.time_ps == b.tags.time_ps);
  REQUIRE(a.tags.channel == b.tags.channel);
  REQUIRE(a.header.channels.size() == b.header.channels.size());
  for (std::size_t c = 0; c < a.header.channels.size(); ++c) {
    CHECK(a.header.channels[c].id == b.header.channels[c].id);
    CHECK(a.header.channels[c].name == b.header.channels[c].name);
    CHECK(a.header.channels[c].role == b.header.channels[c].role);
  }
  CHECK(a.header.resolution_ps == b.header.resolution_ps);
  CHECK(a.header.start_ps == b.header.start_ps);
  CHECK(a.header.duration_ps == b.header.duration_ps);
  const auto& p = a.header.provenance;
  const auto& q = b.header.provenance;
  CHECK(p.flyby_version == q.flyby_version);
  CHECK(p.command_line == q.command_line);
  CHECK(p.host == q.host);
  CHECK(p.source == q.source);
  CHECK(p.config_text == q.config_text);
  CHECK(p.seed == q.seed);
  CHECK(p.parent == q.parent);
}

}  // namespace flyby::test
