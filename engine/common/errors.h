// The error channels of flyby (STYLE.md guideline 4):
//  * bad input (config, command line, data files) throws InputError, caught once in the CLI,
//    which prints one line and exits non-zero;
//  * numerical trouble is a status in a result struct, not an exception;
//  * broken invariants hit FLYBY_CHECK, which stays on in release builds.
#pragma once

#include <stdexcept>
#include <string>

namespace flyby {

// Base of every error flyby reports to a user as one line.
class Error : public std::runtime_error {
 public:
  using std::runtime_error::runtime_error;
};

// Malformed or unphysical input: a config key, a command-line value, a data file.
// The message names the problem and where (file:line, key, flag).
class InputError : public Error {
 public:
  using Error::Error;
};

// An input/output failure of the operating system or a library (cannot open, disk full).
class IoError : public Error {
 public:
  using Error::Error;
};

// A broken internal invariant: a bug in flyby, never the user's fault.
class InternalError : public Error {
 public:
  using Error::Error;
};

[[noreturn]] void check_failed(const char* expr, const char* file, int line, const std::string& msg);

}  // namespace flyby

// Invariant check that stays on in release builds.
#define FLYBY_CHECK(cond, msg)                                          \
  do {                                                                  \
    if (!(cond)) ::flyby::check_failed(#cond, __FILE__, __LINE__, (msg)); \
  } while (0)
