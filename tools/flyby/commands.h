// Registry of the flyby subcommands. Each subcommand lives in its own tools/flyby/cmd_<name>.cpp
// and registers itself with a static CommandRegistrar, so adding a subcommand touches no other
// file. main.cpp adds every registered subcommand to the CLI11 app in ascending `order`.
#pragma once

#include <CLI/CLI.hpp>
#include <utility>
#include <vector>

namespace flyby::cli {

using RegisterFn = void (*)(CLI::App& app);

// All registered subcommands as (order, function).
std::vector<std::pair<int, RegisterFn>>& command_registry();

// Usage, at namespace scope in cmd_<name>.cpp:
//   const flyby::cli::CommandRegistrar kRegisterLevels{10, &register_levels};
struct CommandRegistrar {
  CommandRegistrar(int order, RegisterFn fn) { command_registry().emplace_back(order, fn); }
};

}  // namespace flyby::cli
