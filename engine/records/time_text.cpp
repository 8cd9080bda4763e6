// Integer decimal arithmetic for exact time conversion (see time_text.h).
#include "engine/records/time_text.h"

#include <limits>

namespace flyby::records {
namespace {

using i128 = __int128;
using u128 = unsigned __int128;

constexpr int kMaxDigits = 19;

struct Decimal {
  bool negative = false;
  std::uint64_t mantissa = 0;  // at most 19 significant digits
  int exp10 = 0;
};

// Parses a decimal number; false on a syntax error.
bool parse_decimal(std::string_view s, Decimal& d) {
  std::size_t i = 0;
  if (i < s.size() && (s[i] == '+' || s[i] == '-')) d.negative = s[i++] == '-';
  int digits = 0, sig = 0;
  bool any = false, round_up = false, dropped = false;
  auto take = [&](char c, bool fraction) {
    any = true;
    const int v = c - '0';
    if (sig == 0 && v == 0) {
      if (fraction) --d.exp10;
      return;
    }
    if (sig < kMaxDigits) {
      d.mantissa = d.mantissa * 10 + static_cast<std::uint64_t>(v);
      ++sig;
      if (fraction) --d.exp10;
    } else {
      if (!dropped) round_up = v >= 5;
      dropped = true;
      if (!fraction) ++d.exp10;
    }
    ++digits;
  };
  while (i < s.size() && s[i] >= '0' && s[i] <= '9') take(s[i++], false);
  if (i < s.size() && s[i] == '.') {
    ++i;
    while (i < s.size() && s[i] >= '0' && s[i] <= '9') take(s[i++], true);
  }
  if (!any) return false;
  if (i < s.size() && (s[i] == 'e' || s[i] == 'E')) {
    ++i;
    bool eneg = false;
    if (i < s.size() && (s[i] == '+' || s[i] == '-')) eneg = s[i++] == '-';
    if (i >= s.size()) return false;
    int e = 0;
    while (i < s.size() && s[i] >= '0' && s[i] <= '9') {
      if (e < 100000) e = e * 10 + (s[i] - '0');
      ++i;
    }
    d.exp10 += eneg ? -e : e;
  }
  if (i != s.size()) return false;
  if (round_up) ++d.mantissa;  // 10^19 still fits in uint64
  (void)digits;
  return true;
}

// value = m * 10^e rounded half away from zero to an integer; false on overflow of int64.
TimeParse to_ps(bool negative, u128 m, int e, std::int64_t& out) {
  if (m == 0) {
    out = 0;
    return TimeParse::kOk;
  }
  const u128 limit = static_cast<u128>(std::numeric_limits<std::int64_t>::max()) + (negative ? 1 : 0);
  if (e >= 0) {
    if (e > 19) return TimeParse::kOverflow;
    for (int k = 0; k < e; ++k) {
      if (m > limit / 10) return TimeParse::kOverflow;
      m *= 10;
    }
  } else {
    if (e < -38) {
      m = 0;
    } else {
      u128 p = 1;
      for (int k = 0; k < -e; ++k) p *= 10;
      const u128 q = m / p, r = m % p;
      m = q + (r * 2 >= p ? 1 : 0);
    }
  }
  if (m > limit) return TimeParse::kOverflow;
  out = negative ? static_cast<std::int64_t>(-static_cast<i128>(m)) : static_cast<std::int64_t>(m);
  return TimeParse::kOk;
}

}  // namespace

std::optional<TimeScale> parse_time_unit(std::string_view text) {
  struct Suffix {
    std::string_view name;
    int exp10;
  };
  static constexpr Suffix kSuffixes[] = {{"ps", 0}, {"ns", 3}, {"us", 6}, {"\xC2\xB5s", 6}, {"ms", 9}, {"s", 12}};
  for (const auto& s : kSuffixes) {
    if (text.size() < s.name.size() || text.substr(text.size() - s.name.size()) != s.name) continue;
    std::string_view factor = text.substr(0, text.size() - s.name.size());
    // "s" is also the tail of "ps", "ns", ...: those matched earlier in the list.
    TimeScale u;
    u.text = std::string(text);
    u.exp10 = s.exp10;
    if (!factor.empty()) {
      Decimal d;
      if (!parse_decimal(factor, d) || d.negative || d.mantissa == 0) return std::nullopt;
      // Keep the factor's mantissa below 10^15 so products stay inside 128 bits.
      while (d.mantissa >= 1'000'000'000'000'000ULL) {
        d.mantissa = (d.mantissa + 5) / 10;
        ++d.exp10;
      }
      u.mantissa = static_cast<std::int64_t>(d.mantissa);
      u.exp10 += d.exp10;
      if (u.exp10 < -60 || u.exp10 > 60) return std::nullopt;
    }
    return u;
  }
  return std::nullopt;
}

std::optional<TimeScale> time_unit_from_column_name(std::string_view name) {
  const auto pos = name.rfind('_');
  if (pos == std::string_view::npos) return std::nullopt;
  const std::string_view suffix = name.substr(pos + 1);
  if (suffix != "ps" && suffix != "ns" && suffix != "us" && suffix != "ms" && suffix != "s") return std::nullopt;
  return parse_time_unit(suffix);
}

TimeParse parse_time_ps(std::string_view text, const TimeScale& unit, std::int64_t& out_ps) {
  Decimal d;
  if (!parse_decimal(text, d)) return TimeParse::kSyntax;
  if (d.exp10 < -100000 || d.exp10 > 100000) return TimeParse::kOverflow;
  const u128 m = static_cast<u128>(d.mantissa) * static_cast<u128>(unit.mantissa);
  return to_ps(d.negative, m, d.exp10 + unit.exp10, out_ps);
}

TimeParse scale_count_ps(std::uint64_t count, const TimeScale& unit, std::int64_t& out_ps) {
  const u128 m = static_cast<u128>(count) * static_cast<u128>(unit.mantissa);
  return to_ps(false, m, unit.exp10, out_ps);
}

TimeParse scale_count_ps(std::int64_t count, const TimeScale& unit, std::int64_t& out_ps) {
  const bool neg = count < 0;
  const u128 mag = neg ? static_cast<u128>(-static_cast<i128>(count)) : static_cast<u128>(count);
  return to_ps(neg, mag * static_cast<u128>(unit.mantissa), unit.exp10, out_ps);
}

}  // namespace flyby::records
