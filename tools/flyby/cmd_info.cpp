// `flyby info RUN.h5 [--json]`: channels, counts, rates, window, resolution and provenance of a
// record, after validating every tag (or only the header with --quick).
#include <iostream>

#include "engine/records/record_info.h"
#include "tools/flyby/commands.h"

namespace {

struct InfoArgs {
  std::string input;
  bool json = false, quick = false;
};

void run_info(const InfoArgs& a) {
  const auto info = flyby::records::inspect_record(a.input, !a.quick);
  if (a.json) {
    std::cout << info.to_json().dump(2, ' ', false, nlohmann::json::error_handler_t::replace) << "\n";
  } else {
    std::cout << info.text_report();
  }
}

void register_info(CLI::App& app) {
  auto args = std::make_shared<InfoArgs>();
  CLI::App* c = app.add_subcommand("info", "Show channels, counts, rates, duration, resolution and provenance of a record");
  c->add_option("RUN", args->input, "Record file (.h5)")->required();
  c->add_flag("--json", args->json, "Print JSON instead of text");
  c->add_flag("--quick", args->quick, "Check the header only, do not read every tag");
  c->callback([args] { run_info(*args); });
}

const flyby::cli::CommandRegistrar kRegisterInfo{52, &register_info};

}  // namespace
