// Process-wide provenance record.
#include "engine/common/provenance.h"

#include <unistd.h>

#include <array>
#include <chrono>
#include <ctime>
#include <mutex>

#include "flyby/version.h"

namespace flyby {
namespace {

std::mutex g_mutex;
std::string g_command_line;
std::string g_start_date;

std::string quote_arg(const std::string& a) {
  if (!a.empty() && a.find_first_of(" \t\n'\"\\$`*?;&|<>()[]{}") == std::string::npos) return a;
  std::string q = "'";
  for (char c : a) {
    if (c == '\'') q += "'\\''";
    else q += c;
  }
  return q + "'";
}

std::string now_utc() {
  const std::time_t t = std::chrono::system_clock::to_time_t(std::chrono::system_clock::now());
  std::tm tm{};
  gmtime_r(&t, &tm);
  std::array<char, 32> buf{};
  std::strftime(buf.data(), buf.size(), "%Y-%m-%dT%H:%M:%SZ", &tm);
  return buf.data();
}

}  // namespace

void set_command_line(int argc, const char* const* argv) {
  std::string line;
  for (int i = 0; i < argc; ++i) {
    if (i) line += ' ';
    line += quote_arg(argv[i]);
  }
  std::lock_guard<std::mutex> lock(g_mutex);
  g_command_line = line;
  g_start_date = now_utc();
}

Provenance current_provenance() {
  std::array<char, 256> host{};
  if (gethostname(host.data(), host.size() - 1) != 0) host[0] = '\0';
  std::lock_guard<std::mutex> lock(g_mutex);
  return Provenance{version_string(), g_command_line, host.data(),
                    g_start_date.empty() ? now_utc() : g_start_date};
}

}  // namespace flyby
