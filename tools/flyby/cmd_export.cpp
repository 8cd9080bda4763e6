// `flyby export RUN.h5 --csv [-o out.csv]`: a record as delimited text, with "#@flyby"
// metadata lines that `flyby import` reads back for a bit-exact round trip.
#include <iostream>

#include "engine/common/atomic_output.h"
#include "engine/common/errors.h"
#include "engine/records/csv_export.h"
#include "engine/records/record_info.h"
#include "tools/flyby/commands.h"

namespace {

struct ExportArgs {
  std::string input, output;
  bool csv = false, no_metadata = false, channel_ids = false;
  std::string delimiter = ",";
};

void run_export(const ExportArgs& a) {
  using namespace flyby::records;
  if (!a.csv) throw flyby::InputError("choose the output format: --csv");
  CsvExportOptions o;
  o.metadata = !a.no_metadata;
  o.channel_ids = a.channel_ids;
  if (a.delimiter == "tab") o.delimiter = '\t';
  else if (a.delimiter == "," || a.delimiter == ";" || a.delimiter == "comma" || a.delimiter == "semicolon") {
    o.delimiter = a.delimiter == "semicolon" ? ';' : a.delimiter == "comma" ? ',' : a.delimiter[0];
  } else {
    throw flyby::InputError("--delimiter must be comma, semicolon or tab");
  }
  if (a.output.empty() || a.output == "-") {
    // stdout cannot be renamed into place: verify the whole record first, so a corrupt file
    // fails before the first line is printed.
    inspect_record(a.input, true);
    RecordReader r(a.input);
    export_csv(r, std::cout, o);
    std::cout.flush();
    if (!std::cout) throw flyby::IoError("write to standard output failed");
    return;
  }
  RecordReader r(a.input);
  flyby::AtomicTextFile out(a.output);
  const auto n = export_csv(r, out.stream(), o);
  out.commit();
  std::cerr << "flyby export: " << n << " tags -> " << a.output << "\n";
}

void register_export(CLI::App& app) {
  auto args = std::make_shared<ExportArgs>();
  CLI::App* c = app.add_subcommand("export", "Write a flyby record as CSV (the way back from flyby import)");
  c->add_option("RUN", args->input, "Record file (.h5)")->required();
  c->add_flag("--csv", args->csv, "CSV output: header time_ps,channel and one line per tag");
  c->add_option("-o,--output", args->output, "Output file (default: standard output); written atomically");
  c->add_flag("--no-metadata", args->no_metadata, "Omit the #@flyby metadata lines (resolution, window, channels, provenance)");
  c->add_flag("--channel-ids", args->channel_ids, "Write numeric channel ids instead of channel names");
  c->add_option("--delimiter", args->delimiter, "comma, semicolon or tab")->capture_default_str();
  c->callback([args] { run_export(*args); });
}

const flyby::cli::CommandRegistrar kRegisterExport{51, &register_export};

}  // namespace
