// Import of measured time tags into a flyby record: delimited text (CSV, TSV, whitespace) with a
// time and a channel column, or raw little-endian binary records with a user-described layout.
// Nothing vendor-specific: the user says where the fields are and what unit the time has.
//
// Both readers stream with bounded memory, sorting too (an external merge sort). Every problem of the input
// throws InputError with one line "<file>:<line or byte offset>: <problem>"; the output is then
// never created (the writer's temporary file is removed).
#pragma once

#include <cstdint>
#include <filesystem>
#include <istream>
#include <optional>
#include <string>
#include <vector>

#include "engine/records/record_format.h"

namespace flyby::records {

// One entry of the channel map: tags whose channel field reads `token` go to channel
// (id, name, role). Without an explicit id, a token that is an integer 0..255 keeps that value
// as id, other tokens get the smallest unused id.
struct ChannelMapping {
  std::string token;
  std::string name;
  ChannelRole role = ChannelRole::kDetector;
  std::optional<ChannelId> id;
};

// Parses "TOKEN=NAME[:ROLE]" (the CLI's --channel). nullopt if malformed.
std::optional<ChannelMapping> parse_channel_mapping(std::string_view text);

struct ImportOptions {
  // Unit of the time values ("ps", "ns", "us", "ms", "s" or a factor like "80.955ps"). For text
  // input it may come from the time column's header name (time_ps, time_ns, ...) instead.
  std::optional<std::string> time_unit;
  // Sort the tags (stable, by time) instead of refusing unsorted input. Memory stays bounded:
  // runs of sort_run_tags tags are sorted in memory and spilled to a hidden file next to the
  // output, then merged (engine/records/tag_sorter.h).
  bool sort = false;
  // Tags per in-memory sort run (16 bytes each; 2^24 = 256 MiB), >= 2.
  std::size_t sort_run_tags = std::size_t{1} << 24;
  // Channel map; empty = automatic (from "#@flyby channel=" lines of a flyby export, else every
  // distinct token becomes a channel named after it, role detector).
  std::vector<ChannelMapping> channels;
  // With an explicit map: skip tags whose token is not in it (default: refuse the input).
  bool drop_unmapped = false;
  // Tagger resolution, ps; default from a flyby export's metadata, else 1 ps.
  std::optional<double> resolution_ps;
  // Acquisition window; default from metadata, else the smallest window holding every tag.
  std::optional<std::int64_t> start_ps;
  std::optional<std::int64_t> duration_ps;
  // Source description stored in the provenance (the input file name).
  std::string source_name;
};

struct TextImportOptions {
  ImportOptions common;
  // Field delimiter; ' ' means any run of spaces and tabs.
  char delimiter = ',';
  // Lines starting with this prefix (after leading blanks) are skipped; "" = none.
  std::string comment_prefix = "#";
  // Lines skipped unconditionally at the start, before anything else.
  std::size_t skip_lines = 0;
  enum class Header { kAuto, kPresent, kAbsent };
  // kAuto: the first line that is not skipped is a header if its time field is not a number.
  Header header = Header::kAuto;
  // Column by 1-based position ("1") or by header name ("time_ps").
  std::string time_column = "1";
  std::string channel_column = "2";
  // Longest accepted line, bytes.
  std::size_t max_line_bytes = std::size_t{1} << 20;
};

struct BinaryField {
  std::size_t offset = 0;     // byte offset inside the record
  std::size_t size = 8;       // 1, 2, 4 or 8 bytes, little-endian
  bool is_signed = false;     // two's complement
};

// Parses "OFFSET:SIZE[:signed|unsigned]" (the CLI's --time-field / --channel-field).
std::optional<BinaryField> parse_binary_field(std::string_view text);

struct BinaryImportOptions {
  ImportOptions common;
  std::size_t record_bytes = 16;  // size of one record, 1 .. 4096
  std::size_t header_bytes = 0;   // bytes skipped at the start of the file
  BinaryField time_field{0, 8, false};
  BinaryField channel_field{8, 1, false};
};

struct ImportSummary {
  std::uint64_t tags = 0;            // tags written
  std::uint64_t dropped = 0;         // tags skipped (unmapped channel, with drop_unmapped)
  std::uint64_t input_records = 0;   // data lines or binary records read
  bool was_sorted = true;            // input already in time order
  std::size_t sort_runs = 0;         // runs spilled to disk by the external sort (0: sorted in memory)
  RecordHeader header;               // as written
  std::string brief_report() const;
};

// Text import from `in` (named `input_name` in messages) to the record `output`.
ImportSummary import_text(std::istream& in, const std::string& input_name, const std::filesystem::path& output,
                          const TextImportOptions& options);
ImportSummary import_text_file(const std::filesystem::path& input, const std::filesystem::path& output,
                               const TextImportOptions& options);
// Binary import from `in`.
ImportSummary import_binary(std::istream& in, const std::string& input_name, const std::filesystem::path& output,
                            const BinaryImportOptions& options);
ImportSummary import_binary_file(const std::filesystem::path& input, const std::filesystem::path& output,
                                 const BinaryImportOptions& options);

// Printable, length-limited rendering of untrusted input for error messages (one line).
std::string quote_input(std::string_view text, std::size_t max_len = 40);

}  // namespace flyby::records
