// Runs the matplotlib helper scripts of tools/plot/ (Python only draws; every number comes from
// the C++ analysis). The figure is written atomically: the script writes a temporary file that
// is renamed onto the target only when the script succeeded.
#pragma once

#include <filesystem>
#include <string>
#include <vector>

namespace flyby::cli {

// Runs `<python> <plot dir>/<script> <args...> --out <temp> ` and renames the temporary file
// onto `figure`. The figure format (png, svg, pdf) follows the extension of `figure`.
// Python: $FLYBY_PYTHON or /usr/bin/python3; plot dir: $FLYBY_PLOT_DIR or the source tree's
// tools/plot. IoError if the script cannot run or fails, InputError for an unknown extension.
void run_plot_script(const std::string& script, std::vector<std::string> args, const std::filesystem::path& figure);

}  // namespace flyby::cli
