// Exact conversion of measured time values to int64 picoseconds. Text such as "1.234567890123"
// in seconds, or raw tagger counts of 80.955 ps, are converted with integer decimal arithmetic
// (no binary floating point), rounding half away from zero to the nearest ps, so an import of
// an exported file is bit-exact and long runs keep ps precision.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>

namespace flyby::records {

// A time unit: one count is mantissa * 10^exp10 ps (e.g. "ns" = 1e3, "80.955ps" = 80955e-3).
struct TimeScale {
  std::int64_t mantissa = 1;
  int exp10 = 0;
  std::string text = "ps";  // as given by the user, for messages
};

// Parses "ps", "ns", "us" (or "µs"), "ms", "s", optionally preceded by a positive decimal factor
// ("80.955ps", "2.5ns", "1e-3s"). nullopt if malformed or not positive.
std::optional<TimeScale> parse_time_unit(std::string_view text);

// Unit from a column name with a unit suffix: "time_ps", "t_ns", "time_us", "time_ms", "time_s".
std::optional<TimeScale> time_unit_from_column_name(std::string_view name);

enum class TimeParse { kOk, kSyntax, kOverflow };

// Decimal text (optional sign, digits, optional fraction, optional exponent) times the unit, to
// the nearest ps. At most 19 significant digits are used exactly; further digits only round.
TimeParse parse_time_ps(std::string_view text, const TimeScale& unit, std::int64_t& out_ps);

// An integer count times the unit, to the nearest ps.
TimeParse scale_count_ps(std::int64_t count, const TimeScale& unit, std::int64_t& out_ps);
TimeParse scale_count_ps(std::uint64_t count, const TimeScale& unit, std::int64_t& out_ps);

}  // namespace flyby::records
