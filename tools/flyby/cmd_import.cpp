// `flyby import FILE -o RUN.h5`: measured time tags (delimited text or raw little-endian binary
// with a user-described record layout) into a flyby record. See docs/record-format.md and the
// README section "Measured data".
#include <iostream>

#include "engine/common/errors.h"
#include "engine/records/tag_import.h"
#include "tools/flyby/commands.h"

namespace {

struct ImportArgs {
  std::string input, output, format = "auto";
  // text
  std::string delimiter = ",", comment_prefix = "#", header = "auto", time_column = "1", channel_column = "2";
  std::size_t skip_lines = 0;
  // binary
  std::size_t record_bytes = 0, header_bytes = 0;
  std::string time_field = "0:8:unsigned", channel_field = "8:1:unsigned";
  // common
  std::string time_unit;
  std::vector<std::string> channels;
  bool drop_unmapped = false, sort = false;
  std::size_t sort_run_tags = std::size_t{1} << 24;
  std::optional<double> resolution_ps;
  std::optional<std::int64_t> start_ps, duration_ps;
};

char parse_delimiter(const std::string& d) {
  if (d == "tab" || d == "\\t") return '\t';
  if (d == "space" || d == "whitespace") return ' ';
  if (d == "comma") return ',';
  if (d == "semicolon") return ';';
  if (d.size() == 1 && d[0] != '\n' && d[0] != '\r' && d[0] != '"') return d[0];
  throw flyby::InputError("--delimiter " + flyby::records::quote_input(d) + ": use one character, or tab, space, comma, semicolon");
}

void run_import(const ImportArgs& a) {
  using namespace flyby::records;
  ImportOptions common;
  if (!a.time_unit.empty()) common.time_unit = a.time_unit;
  common.sort = a.sort;
  common.sort_run_tags = a.sort_run_tags;
  common.drop_unmapped = a.drop_unmapped;
  common.resolution_ps = a.resolution_ps;
  common.start_ps = a.start_ps;
  common.duration_ps = a.duration_ps;
  for (const auto& c : a.channels) {
    auto m = parse_channel_mapping(c);
    if (!m) {
      throw flyby::InputError("--channel " + quote_input(c) +
                              ": expected TOKEN=NAME or TOKEN=NAME:ROLE (NAME from A-Z a-z 0-9 _ . + -; ROLE detector, herald or marker)");
    }
    common.channels.push_back(*m);
  }
  if (a.drop_unmapped && common.channels.empty()) throw flyby::InputError("--drop-unmapped needs at least one --channel");

  std::string format = a.format;
  if (format == "auto") format = a.record_bytes > 0 ? "binary" : "text";
  ImportSummary s;
  if (format == "text") {
    TextImportOptions o;
    o.common = common;
    o.delimiter = parse_delimiter(a.delimiter);
    o.comment_prefix = a.comment_prefix;
    o.skip_lines = a.skip_lines;
    if (a.header == "auto") o.header = TextImportOptions::Header::kAuto;
    else if (a.header == "yes") o.header = TextImportOptions::Header::kPresent;
    else if (a.header == "no") o.header = TextImportOptions::Header::kAbsent;
    else throw flyby::InputError("--header must be auto, yes or no");
    o.time_column = a.time_column;
    o.channel_column = a.channel_column;
    s = import_text_file(a.input, a.output, o);
  } else if (format == "binary") {
    if (a.record_bytes == 0) throw flyby::InputError("binary import needs --record-bytes");
    BinaryImportOptions o;
    o.common = common;
    o.record_bytes = a.record_bytes;
    o.header_bytes = a.header_bytes;
    const auto tf = parse_binary_field(a.time_field);
    const auto cf = parse_binary_field(a.channel_field);
    if (!tf) throw flyby::InputError("--time-field " + quote_input(a.time_field) + ": expected OFFSET:SIZE[:signed|unsigned], SIZE 1, 2, 4 or 8");
    if (!cf) throw flyby::InputError("--channel-field " + quote_input(a.channel_field) + ": expected OFFSET:SIZE[:signed|unsigned], SIZE 1, 2, 4 or 8");
    o.time_field = *tf;
    o.channel_field = *cf;
    s = import_binary_file(a.input, a.output, o);
  } else {
    throw flyby::InputError("--format must be text, binary or auto");
  }
  std::cout << "flyby import: " << s.brief_report() << " -> " << a.output << "\n";
}

void register_import(CLI::App& app) {
  auto args = std::make_shared<ImportArgs>();
  CLI::App* c = app.add_subcommand("import", "Convert measured time tags (text or raw binary) into a flyby record");
  c->add_option("FILE", args->input, "Input file with one time tag per line (text) or per record (binary)")->required();
  c->add_option("-o,--output", args->output, "Output record (.h5); written atomically")->required();
  c->add_option("--format", args->format, "Input format: text, binary, or auto (binary when --record-bytes is given)")
      ->capture_default_str();
  auto* g = c->add_option_group("text input");
  g->add_option("--delimiter", args->delimiter, "Field delimiter: one character, or tab, space (any run of blanks), comma, semicolon")
      ->capture_default_str();
  g->add_option("--comment-prefix", args->comment_prefix, "Lines starting with this are skipped (\"\" for none)")->capture_default_str();
  g->add_option("--skip-lines", args->skip_lines, "Lines skipped unconditionally at the start")->capture_default_str();
  g->add_option("--header", args->header, "First line is a header: auto (if its time field is not a number), yes, no")
      ->capture_default_str();
  g->add_option("--time-column", args->time_column, "Time column: 1-based position or header name")->capture_default_str();
  g->add_option("--channel-column", args->channel_column, "Channel column: 1-based position or header name")->capture_default_str();
  auto* b = c->add_option_group("binary input (little-endian records)");
  b->add_option("--record-bytes", args->record_bytes, "Size of one record in bytes (1..4096)");
  b->add_option("--header-bytes", args->header_bytes, "Bytes skipped at the start of the file");
  b->add_option("--time-field", args->time_field, "Time field OFFSET:SIZE[:signed|unsigned], SIZE 1/2/4/8 bytes")
      ->capture_default_str();
  b->add_option("--channel-field", args->channel_field, "Channel field OFFSET:SIZE[:signed|unsigned]")->capture_default_str();
  c->add_option("--time-unit", args->time_unit,
                "Unit of the time values: ps, ns, us, ms, s, or a factor like 80.955ps (text input may take it from a "
                "header such as time_ns)");
  c->add_option("--channel", args->channels,
                "Map a channel value to a channel: TOKEN=NAME[:ROLE], ROLE detector (default), herald or marker; repeat "
                "per channel. Without it every distinct value becomes a channel named after it");
  c->add_flag("--drop-unmapped", args->drop_unmapped, "Skip tags whose channel is not in the --channel map");
  c->add_flag("--sort", args->sort,
              "Sort unsorted input (default: refuse it); memory stays bounded: runs are sorted in memory, spilled to a "
              "hidden file next to the output and merged");
  c->add_option("--sort-run-tags", args->sort_run_tags, "Tags per in-memory sort run (16 bytes each)")->capture_default_str();
  c->add_option("--resolution-ps", args->resolution_ps, "Tagger resolution in ps (default 1, or from a flyby export)");
  c->add_option("--start-ps", args->start_ps, "Start of the acquisition window, ps (with --duration-ps)");
  c->add_option("--duration-ps", args->duration_ps, "Length of the acquisition window, ps (default: first to last tag)");
  c->callback([args] { run_import(*args); });
}

const flyby::cli::CommandRegistrar kRegisterImport{50, &register_import};

}  // namespace
