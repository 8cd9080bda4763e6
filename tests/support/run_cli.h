// Runs the flyby program (FLYBY_EXE) through the shell and captures its exit status, standard
// output and standard error, for tests of the command-line behaviour.
#pragma once

#include <sys/wait.h>

#include <cstdio>
#include <fstream>
#include <sstream>
#include <string>

namespace flyby::test {

struct CliResult {
  int status = -1;  // exit code; 128 + signal if killed
  std::string out, err;
};

inline std::string read_text(const std::string& path) {
  std::ifstream f(path, std::ios::binary);
  std::ostringstream s;
  s << f.rdbuf();
  return s.str();
}

// `args` is appended to the program path as is (quote it yourself). Runs in `cwd`.
inline CliResult run_flyby(const std::string& args, const std::string& cwd) {
  const std::string out = cwd + "/.cli_stdout", err = cwd + "/.cli_stderr";
  const std::string cmd = "cd '" + cwd + "' && '" + std::string(FLYBY_EXE) + "' " + args + " >'" + out + "' 2>'" + err + "'";
  const int raw = std::system(cmd.c_str());
  CliResult r;
  if (WIFEXITED(raw)) r.status = WEXITSTATUS(raw);
  else if (WIFSIGNALED(raw)) r.status = 128 + WTERMSIG(raw);
  r.out = read_text(out);
  r.err = read_text(err);
  std::remove(out.c_str());
  std::remove(err.c_str());
  return r;
}

}  // namespace flyby::test
