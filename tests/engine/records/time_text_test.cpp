// Exact decimal conversion of time values to picoseconds (engine/records/time_text.h). Expected
// values are worked out by hand in the comments (decimal arithmetic, round half away from zero).
#include <catch2/catch.hpp>

#include "engine/records/time_text.h"

using namespace flyby::records;

namespace {
std::int64_t ps(const char* text, const char* unit) {
  const auto u = parse_time_unit(unit);
  REQUIRE(u);
  std::int64_t out = 0;
  REQUIRE(parse_time_ps(text, *u, out) == TimeParse::kOk);
  return out;
}
}  // namespace

TEST_CASE("decimal times convert exactly to ps", "[records]") {
  CHECK(ps("1.5", "ns") == 1500);
  CHECK(ps("-2.5", "ps") == -3);  // half away from zero
  CHECK(ps("2.4999", "ps") == 2);
  CHECK(ps("1e3", "ns") == 1'000'000);
  CHECK(ps("0.000000001234567", "s") == 1235);  // 1234.567 ps
  CHECK(ps("3600.000000000001", "s") == 3'600'000'000'000'001);  // one hour + 1 ps: beyond double precision
  CHECK(ps("12345678901234.567890123", "ps") == 12345678901235);  // 19 significant digits kept
  CHECK(ps("+7", "us") == 7'000'000);
  CHECK(ps("1.25E-2", "ms") == 12'500'000);
  CHECK(ps("000123", "ps") == 123);
  CHECK(ps("9223372036854775807", "ps") == INT64_MAX);
  CHECK(ps("-9223372036854775808", "ps") == INT64_MIN);
  // Scaled counts: 12345 * 80.955 ps = 999389.475 ps -> 999389.
  CHECK(ps("12345", "80.955ps") == 999389);
  std::int64_t out = 0;
  const auto u = *parse_time_unit("80.955ps");
  CHECK(scale_count_ps(std::uint64_t{12345}, u, out) == TimeParse::kOk);
  CHECK(out == 999389);
  CHECK(scale_count_ps(std::int64_t{-2}, *parse_time_unit("2.5ps"), out) == TimeParse::kOk);
  CHECK(out == -5);
}

TEST_CASE("malformed and overflowing times are reported", "[records]") {
  const auto u = *parse_time_unit("s");
  std::int64_t out = 0;
  for (const char* bad : {"", "-", ".", "1.2.3", "1e", "abc", "1,5", "0x10", "1 2", "nan", "inf"}) {
    INFO(bad);
    CHECK(parse_time_ps(bad, u, out) == TimeParse::kSyntax);
  }
  CHECK(parse_time_ps("9300000", u, out) == TimeParse::kOverflow);  // 9.3e18 ps > int64
  CHECK(parse_time_ps("9223372036854775808", *parse_time_unit("ps"), out) == TimeParse::kOverflow);
  CHECK(parse_time_ps("1e99999", u, out) == TimeParse::kOverflow);
  CHECK(parse_time_ps("1e-99999", u, out) == TimeParse::kOk);
  CHECK(out == 0);
  CHECK(scale_count_ps(~std::uint64_t{0}, *parse_time_unit("ns"), out) == TimeParse::kOverflow);
  for (const char* bad : {"", "sec", "-1ns", "0ps", "1.2.3ns", "ns2", "x ps"}) {
    INFO(bad);
    CHECK(!parse_time_unit(bad));
  }
  CHECK(parse_time_unit("\xC2\xB5s")->exp10 == 6);
  CHECK(time_unit_from_column_name("time_ns")->exp10 == 3);
  CHECK(!time_unit_from_column_name("time"));
}
