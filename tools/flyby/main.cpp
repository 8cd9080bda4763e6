// Entry point of the `flyby` command-line program: builds the subcommand tree, and is the one
// place where user-facing errors are caught and turned into one line and a non-zero exit.
#include <algorithm>
#include <cstdlib>
#include <exception>
#include <iostream>

#include "engine/common/errors.h"
#include "engine/common/provenance.h"
#include "flyby/version.h"
#include "tools/flyby/commands.h"

namespace flyby::cli {

std::vector<std::pair<int, RegisterFn>>& command_registry() {
  static std::vector<std::pair<int, RegisterFn>> registry;
  return registry;
}

}  // namespace flyby::cli

int main(int argc, char** argv) {
  flyby::set_command_line(argc, argv);

  CLI::App app{
      "flyby: simulate atoms crossing a resonator mode with quantum trajectories, write "
      "lab-shaped time-tag records, and analyze simulated or measured records."};
  app.set_version_flag("--version", std::string(flyby::version_string()));
  app.require_subcommand(1);
  app.fallthrough(false);

  auto& registry = flyby::cli::command_registry();
  std::stable_sort(registry.begin(), registry.end(),
                   [](const auto& a, const auto& b) { return a.first < b.first; });
  for (const auto& [order, fn] : registry) fn(app);

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    return app.exit(e);
  } catch (const flyby::InputError& e) {
    std::cerr << "flyby: error: " << e.what() << "\n";
    return 2;
  } catch (const flyby::IoError& e) {
    std::cerr << "flyby: i/o error: " << e.what() << "\n";
    return 3;
  } catch (const flyby::InternalError& e) {
    std::cerr << "flyby: " << e.what() << "\n";
    return 70;
  } catch (const std::exception& e) {
    std::cerr << "flyby: unexpected error: " << e.what() << "\n";
    return 70;
  }
  return 0;
}
