// `flyby config`: the scenario-config reference and checker.
//   flyby config --list            every key with type, unit and default
//   flyby config --explain KEY     one key in full (KEY may omit the section if unambiguous)
//   flyby config --check FILE      parse, validate and build the scenario; print what it implies
//   flyby config --markdown        the key reference as markdown (configs/README.md is made from it)
#include <iostream>
#include <memory>
#include <optional>
#include <string>

#include "engine/common/errors.h"
#include "models/config/config_keys.h"
#include "models/config/scenario_config.h"
#include "tools/flyby/commands.h"

namespace {

struct ConfigArgs {
  bool list = false;
  bool markdown = false;
  std::string explain;
  std::string check;
};

void run_config(const ConfigArgs& a) {
  using namespace flyby::config;
  if (a.list) {
    for (const auto& k : config_keys()) {
      std::cout << k.path << "  (" << to_string(k.type);
      if (!k.unit.empty()) std::cout << ", " << k.unit;
      if (!k.default_value.empty()) std::cout << ", default " << k.default_value;
      std::cout << ")\n";
    }
  }
  if (a.markdown) std::cout << markdown_reference();
  if (!a.explain.empty()) {
    const KeySpec* k = find_key(a.explain);
    if (!k) {
      // Allow the bare key name when it is unique across sections.
      const KeySpec* only = nullptr;
      int hits = 0;
      for (const auto& key : config_keys()) {
        const auto dot = key.path.rfind('.');
        if (key.path.substr(dot + 1) == a.explain) {
          only = &key;
          ++hits;
        }
      }
      if (hits == 1) k = only;
      if (hits > 1) {
        std::string alts;
        for (const auto& key : config_keys()) {
          if (key.path.substr(key.path.rfind('.') + 1) == a.explain) alts += (alts.empty() ? "" : ", ") + key.path;
        }
        throw flyby::InputError("--explain " + a.explain + ": ambiguous, one of: " + alts);
      }
    }
    if (!k) {
      std::string msg = "--explain: unknown key '" + a.explain + "'";
      // Nearest over every key, comparing the part after the section.
      std::optional<std::string> near;
      std::size_t best = std::string::npos;
      const std::string name = a.explain.substr(a.explain.rfind('.') == std::string::npos ? 0 : a.explain.rfind('.') + 1);
      for (const auto& key : config_keys()) {
        const std::size_t d = edit_distance(name, key.path.substr(key.path.rfind('.') + 1));
        if (d < best) {
          best = d;
          near = key.path;
        }
      }
      if (near && best <= name.size() / 2 + 1) msg += "; did you mean '" + *near + "'?";
      msg += " (see flyby config --list)";
      throw flyby::InputError(msg);
    }
    std::cout << explain(*k);
  }
  if (!a.check.empty()) {
    const ScenarioConfig cfg = load_config_file(a.check);
    const CheckedScenario s = check_scenario(cfg);
    std::cout << a.check << ": ok\n" << s.summary();
  }
}

void register_config(CLI::App& app) {
  auto args = std::make_shared<ConfigArgs>();
  auto* cmd = app.add_subcommand("config", "Scenario config reference (--list, --explain KEY, --markdown) and checker (--check FILE)");
  cmd->add_flag("--list", args->list, "List every config key with type, unit and default");
  cmd->add_option("--explain", args->explain, "Explain one key, e.g. resonator.kappa_MHz");
  cmd->add_option("--check", args->check, "Validate a scenario config file and print what it implies")
      ->check(CLI::ExistingFile);
  cmd->add_flag("--markdown", args->markdown, "Print the key reference as markdown");
  cmd->callback([args] {
    if (!args->list && !args->markdown && args->explain.empty() && args->check.empty()) {
      throw flyby::InputError("flyby config: give --list, --explain KEY, --check FILE or --markdown");
    }
    run_config(*args);
  });
}

}  // namespace

const flyby::cli::CommandRegistrar kRegisterConfig{20, &register_config};
