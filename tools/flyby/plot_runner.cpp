// Runs a plotting helper script without a shell (fork/execv), see plot_runner.h.
#include "tools/flyby/plot_runner.h"

#include <sys/wait.h>
#include <unistd.h>

#include <cstdlib>

#include "engine/common/atomic_output.h"
#include "engine/common/errors.h"

#ifndef FLYBY_PLOT_DIR
#define FLYBY_PLOT_DIR "tools/plot"
#endif

namespace flyby::cli {

void run_plot_script(const std::string& script, std::vector<std::string> args, const std::filesystem::path& figure) {
  std::string ext = figure.extension().string();
  if (!ext.empty()) ext = ext.substr(1);
  if (ext != "png" && ext != "svg" && ext != "pdf")
    throw InputError("figure '" + figure.string() + "': use a .png, .svg or .pdf file name");
  const char* py_env = std::getenv("FLYBY_PYTHON");
  const std::string python = py_env && *py_env ? py_env : "/usr/bin/python3";
  const char* dir_env = std::getenv("FLYBY_PLOT_DIR");
  const std::filesystem::path dir = dir_env && *dir_env ? dir_env : FLYBY_PLOT_DIR;
  const std::filesystem::path path = dir / script;
  if (!std::filesystem::exists(path))
    throw IoError("plot helper " + path.string() + " not found (set FLYBY_PLOT_DIR to the tools/plot folder)");

  AtomicOutputPath out(figure);
  args.insert(args.begin(), path.string());
  args.insert(args.begin(), python);
  args.push_back("--out");
  args.push_back(out.temp_path().string());
  args.push_back("--format");
  args.push_back(ext);
  std::vector<char*> argv;
  for (auto& a : args) argv.push_back(a.data());
  argv.push_back(nullptr);
  const pid_t pid = fork();
  if (pid < 0) throw IoError("cannot start " + python + " for the figure");
  if (pid == 0) {
    execv(python.c_str(), argv.data());
    _exit(127);
  }
  int status = 0;
  while (waitpid(pid, &status, 0) < 0) {
    if (errno != EINTR) throw IoError("waiting for the plot helper failed");
  }
  if (!WIFEXITED(status) || WEXITSTATUS(status) != 0) {
    out.discard();
    if (WIFEXITED(status) && WEXITSTATUS(status) == 127)
      throw IoError("cannot run " + python + " (set FLYBY_PYTHON to a python3 with matplotlib)");
    throw IoError("plot helper " + script + " failed; figure " + figure.string() + " not written");
  }
  if (!std::filesystem::exists(out.temp_path()))
    throw IoError("plot helper " + script + " wrote no figure");
  out.commit();
}

}  // namespace flyby::cli
