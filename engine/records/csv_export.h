// Export of a record as delimited text, the way back from `flyby import`. By default the file
// starts with "#@flyby key=value" metadata lines (format version, resolution, window, channel
// table, provenance as one-line JSON) that `flyby import` reads back, so export -> import
// reproduces the record bit for bit (tags, channels, roles, resolution, window).
#pragma once

#include <cstdint>
#include <ostream>

#include "engine/records/record_reader.h"

namespace flyby::records {

struct CsvExportOptions {
  // Write the "#@flyby" metadata lines before the header.
  bool metadata = true;
  // Field delimiter (',' or '\t' are usual).
  char delimiter = ',';
  // Channel column holds the numeric channel id instead of the name.
  bool channel_ids = false;
};

// Writes the header "time_ps,channel" and one line per tag; returns the number of tags.
std::uint64_t export_csv(RecordReader& reader, std::ostream& out, const CsvExportOptions& options = {});

}  // namespace flyby::records
