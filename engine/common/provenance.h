// What every output file records about how it was made (version, command line, host, date).
// The CLI stores the command line once at start-up; writers read it from here.
#pragma once

#include <string>
#include <vector>

namespace flyby {

struct Provenance {
  std::string version;       // flyby version string, with git commit
  std::string command_line;  // the full command line, arguments shell-quoted where needed
  std::string host;          // host name of the machine that ran the command
  std::string date_utc;      // ISO 8601 UTC time the command started, e.g. 2026-12-02T00:19:31Z
};

// Called once by the CLI's main(); later calls replace the stored line.
void set_command_line(int argc, const char* const* argv);

// The provenance of the running process.
Provenance current_provenance();

}  // namespace flyby
