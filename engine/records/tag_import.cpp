// Text and binary import of measured time tags (see tag_import.h). Shared by both formats: the
// channel map, the order check (or external sort), "#@flyby" metadata of flyby's own CSV
// export, and the streaming RecordWriter.
#include "engine/records/tag_import.h"

#include <algorithm>
#include <array>
#include <charconv>
#include <cmath>
#include <cstring>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/records/record_writer.h"
#include "engine/records/tag_sorter.h"
#include "engine/records/time_text.h"

namespace flyby::records {
namespace {

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\t' || s.front() == '\r')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\t' || s.back() == '\r')) s.remove_suffix(1);
  return s;
}

std::optional<int> small_int(std::string_view s, int max) {
  if (s.empty() || s.size() > 3) return std::nullopt;
  int v = 0;
  for (char c : s) {
    if (c < '0' || c > '9') return std::nullopt;
    v = v * 10 + (c - '0');
  }
  if (s.size() > 1 && s[0] == '0') return std::nullopt;  // canonical decimal only
  if (v > max) return std::nullopt;
  return v;
}

// Metadata of flyby's CSV export ("#@flyby key=value" lines before the data).
struct ExportMeta {
  std::optional<double> resolution_ps;
  std::optional<std::int64_t> start_ps, duration_ps;
  std::vector<Channel> channels;
  std::string provenance_json;
  bool any = false;
};

class TagSink {
 public:
  TagSink(const std::filesystem::path& output, const ImportOptions& opt, std::string input_name)
      : output_(output), opt_(opt), input_(std::move(input_name)) {
    if (opt_.resolution_ps && !(std::isfinite(*opt_.resolution_ps) && *opt_.resolution_ps > 0)) {
      fail_plain("resolution must be a positive number of ps");
    }
    if (opt_.duration_ps && *opt_.duration_ps < 0) fail_plain("duration must not be negative");
    if (opt_.sort) {
      if (opt_.sort_run_tags < 2) fail_plain("sort run size must be at least 2 tags");
      sorter_.emplace(output_, opt_.sort_run_tags);
    }
  }

  [[noreturn]] void fail_plain(const std::string& msg) const { throw InputError(input_ + ": " + msg); }
  [[noreturn]] void fail_at(const std::string& where, const std::string& msg) const {
    throw InputError(input_ + ":" + where + ": " + msg);
  }

  void set_meta(ExportMeta meta) { meta_ = std::move(meta); }

  // Called once before the first tag: builds the channel table.
  void start() {
    if (started_) return;
    started_ = true;
    if (!opt_.channels.empty()) {
      mode_ = Mode::kExplicit;
      std::array<bool, 256> used{};
      for (const auto& m : opt_.channels) {
        if (m.id) used[*m.id] = true;
      }
      for (const auto& m : opt_.channels) {
        ChannelId id = 0;
        if (m.id) {
          id = *m.id;
        } else if (auto v = small_int(m.token, 255); v && !used[*v]) {
          id = static_cast<ChannelId>(*v);
        } else {
          id = next_free(used);
        }
        used[id] = true;
        for (const auto& e : map_) {
          if (e.token == m.token) fail_plain("channel token " + quote_input(m.token) + " is mapped twice");
        }
        map_.push_back({m.token, id});
        header_.channels.push_back({id, m.name, m.role});
      }
    } else if (!meta_.channels.empty()) {
      mode_ = Mode::kMeta;
      header_.channels = meta_.channels;
      for (const auto& c : meta_.channels) map_.push_back({c.name, c.id});
      // An export with --channel-ids writes ids instead of names: accept those too, unless a
      // channel's name is itself that number.
      for (const auto& c : meta_.channels) {
        const std::string id = std::to_string(c.id);
        if (std::none_of(map_.begin(), map_.end(), [&](const Entry& e) { return e.token == id; })) map_.push_back({id, c.id});
      }
    } else {
      mode_ = Mode::kAuto;
    }
    if (auto p = header_problem(header_)) fail_plain(*p);
  }

  // Resolves a channel token to an id; nullopt = drop the tag.
  std::optional<ChannelId> channel(std::string_view token, const std::string& where_prefix, std::uint64_t where) {
    if (last_ && last_->first == token) return last_->second;
    for (const auto& e : map_) {
      if (e.token == token) {
        last_ = std::make_pair(e.token, e.id);
        return e.id;
      }
    }
    if (mode_ == Mode::kExplicit) {
      if (opt_.drop_unmapped) return std::nullopt;
      fail_at(where_prefix + std::to_string(where), "channel " + quote_input(token) +
                                                        " is not in the channel map (map it with --channel TOKEN=NAME, or pass --drop-unmapped)");
    }
    if (mode_ == Mode::kMeta) {
      fail_at(where_prefix + std::to_string(where), "channel " + quote_input(token) + " is not in the file's #@flyby channel table");
    }
    // Automatic: a new channel named after its token.
    if (!is_valid_channel_name(token)) {
      fail_at(where_prefix + std::to_string(where), "channel " + quote_input(token) +
                                                        " is not a valid channel name (A-Z a-z 0-9 _ . + -, at most 64); map it with --channel TOKEN=NAME");
    }
    if (map_.size() >= 256) fail_at(where_prefix + std::to_string(where), "more than 256 distinct channels");
    std::array<bool, 256> used{};
    for (const auto& e : map_) used[e.id] = true;
    ChannelId id;
    if (auto v = small_int(token, 255); v && !used[*v]) id = static_cast<ChannelId>(*v);
    else id = next_free(used);
    map_.push_back({std::string(token), id});
    const Channel c{id, std::string(token), ChannelRole::kDetector};
    header_.channels.push_back(c);
    if (writer_) writer_->add_channel(c);
    return id;
  }

  void add(std::int64_t t, ChannelId ch, const std::string& where_prefix, std::uint64_t where) {
    ++summary_.input_records;
    if (have_last_time_ && t < last_time_) {
      summary_.was_sorted = false;
      if (!opt_.sort) {
        fail_at(where_prefix + std::to_string(where), "time " + std::to_string(t) + " ps is earlier than the previous tag (" +
                                                          std::to_string(last_time_) +
                                                          " ps): the input is not sorted (pass --sort to sort it)");
      }
    }
    have_last_time_ = true;
    last_time_ = t;
    if (sorter_) {
      sorter_->add(t, ch);
      return;
    }
    ensure_writer();
    writer_->append(t, ch);
  }

  void count_dropped() {
    ++summary_.input_records;
    ++summary_.dropped;
  }

  ImportSummary finish() {
    start();
    if (sorter_) {
      ensure_writer();
      sorter_->finish([this](const TagBlock& b) { writer_->append(b); });
      summary_.sort_runs = sorter_->runs();
    }
    if (!writer_ || writer_->tag_count() == 0) fail_plain("no time tags found");
    summary_.tags = writer_->tag_count();
    writer_->commit();
    summary_.header = writer_->header();
    return summary_;
  }

 private:
  enum class Mode { kExplicit, kMeta, kAuto };
  struct Entry {
    std::string token;
    ChannelId id;
  };

  static ChannelId next_free(const std::array<bool, 256>& used) {
    for (int i = 0; i < 256; ++i) {
      if (!used[i]) return static_cast<ChannelId>(i);
    }
    return 0;  // unreachable: callers check the 256 limit
  }

  void ensure_writer() {
    if (writer_) return;
    RecordHeader h = header_;
    h.resolution_ps = opt_.resolution_ps.value_or(meta_.resolution_ps.value_or(1.0));
    h.provenance = current_record_provenance("import");
    h.provenance.parent = meta_.provenance_json;
    writer_.emplace(output_, h);
    const auto start = opt_.start_ps ? opt_.start_ps : meta_.start_ps;
    const auto dur = opt_.duration_ps ? opt_.duration_ps : meta_.duration_ps;
    if (start && dur) {
      writer_->set_window(*start, *dur);
    } else if (start || dur) {
      fail_plain("give both the window start and its duration, or neither");
    } else {
      writer_->fit_window_to_tags();
    }
  }

  std::filesystem::path output_;
  ImportOptions opt_;
  std::string input_;
  ExportMeta meta_;
  bool started_ = false;
  Mode mode_ = Mode::kAuto;
  std::vector<Entry> map_;
  std::optional<std::pair<std::string, ChannelId>> last_;
  RecordHeader header_;
  std::optional<RecordWriter> writer_;
  std::optional<TagSorter> sorter_;  // with --sort: bounded-memory external sort
  bool have_last_time_ = false;
  std::int64_t last_time_ = 0;
  ImportSummary summary_;
};

TimeScale unit_or_fail(const std::optional<std::string>& text, const std::string& input) {
  auto u = parse_time_unit(*text);
  if (!u) {
    throw InputError(input + ": time unit " + quote_input(*text) +
                     " is not one of ps, ns, us, ms, s (optionally with a factor, e.g. 80.955ps)");
  }
  return *u;
}

// Reads lines of bounded length from a stream.
class LineReader {
 public:
  LineReader(std::istream& in, std::size_t max_len) : in_(in), max_(max_len), buf_(1 << 16) {}
  // Next line without its terminator (and without a trailing '\r'); false at the end.
  bool next(std::string& line, const std::string& input, std::uint64_t lineno) {
    line.clear();
    while (true) {
      const char* b = buf_.data() + beg_;
      const char* e = buf_.data() + end_;
      const char* nl = static_cast<const char*>(std::memchr(b, '\n', static_cast<std::size_t>(e - b)));
      const std::size_t take = static_cast<std::size_t>((nl ? nl : e) - b);
      if (line.size() + take > max_) {
        throw InputError(input + ":" + std::to_string(lineno) + ": line longer than " + std::to_string(max_) +
                         " bytes (not a text file, or a huge header?)");
      }
      line.append(b, take);
      if (nl) {
        beg_ += take + 1;
        break;
      }
      beg_ = end_ = 0;
      if (eof_) {
        if (line.empty()) return false;
        break;
      }
      in_.read(buf_.data(), static_cast<std::streamsize>(buf_.size()));
      end_ = static_cast<std::size_t>(in_.gcount());
      if (end_ == 0) eof_ = true;
      if (in_.bad()) throw IoError(input + ": read error");
    }
    if (!line.empty() && line.back() == '\r') line.pop_back();
    return true;
  }

 private:
  std::istream& in_;
  std::size_t max_;
  std::vector<char> buf_;
  std::size_t beg_ = 0, end_ = 0;
  bool eof_ = false;
};

void split(std::string_view line, char delim, std::vector<std::string_view>& out) {
  out.clear();
  if (delim == ' ') {
    std::size_t i = 0;
    while (i < line.size()) {
      while (i < line.size() && (line[i] == ' ' || line[i] == '\t')) ++i;
      if (i >= line.size()) break;
      std::size_t j = i;
      while (j < line.size() && line[j] != ' ' && line[j] != '\t') ++j;
      out.push_back(line.substr(i, j - i));
      i = j;
    }
    return;
  }
  std::size_t i = 0;
  while (true) {
    const std::size_t j = line.find(delim, i);
    out.push_back(trim(line.substr(i, j == std::string_view::npos ? std::string_view::npos : j - i)));
    if (j == std::string_view::npos) break;
    i = j + 1;
  }
}

// Parses one "#@flyby key=value" line into meta; throws on a malformed one.
void parse_meta_line(std::string_view body, ExportMeta& meta, const std::string& where) {
  const auto eq = body.find('=');
  if (eq == std::string_view::npos) throw InputError(where + ": malformed #@flyby line (expected key=value)");
  const std::string_view key = trim(body.substr(0, eq));
  const std::string_view value = trim(body.substr(eq + 1));
  const std::string v(value);
  meta.any = true;
  auto parse_i64 = [&](std::int64_t& out) {
    const auto r = std::from_chars(v.data(), v.data() + v.size(), out);
    if (r.ec != std::errc() || r.ptr != v.data() + v.size()) {
      throw InputError(where + ": #@flyby " + std::string(key) + " is not an integer: " + quote_input(v));
    }
  };
  if (key == "format_version") {
    if (v != "1") throw InputError(where + ": #@flyby format_version " + quote_input(v) + " is not supported (1)");
  } else if (key == "resolution_ps") {
    char* end = nullptr;
    const double r = std::strtod(v.c_str(), &end);
    if (v.empty() || end != v.c_str() + v.size() || !std::isfinite(r) || !(r > 0)) {
      throw InputError(where + ": #@flyby resolution_ps must be a positive number, found " + quote_input(v));
    }
    meta.resolution_ps = r;
  } else if (key == "start_ps") {
    std::int64_t x;
    parse_i64(x);
    meta.start_ps = x;
  } else if (key == "duration_ps") {
    std::int64_t x;
    parse_i64(x);
    meta.duration_ps = x;
  } else if (key == "channel") {
    // id,name,role
    const auto c1 = v.find(','), c2 = c1 == std::string::npos ? c1 : v.find(',', c1 + 1);
    if (c2 == std::string::npos) throw InputError(where + ": #@flyby channel must be id,name,role");
    const auto id = small_int(trim(std::string_view(v).substr(0, c1)), 255);
    const std::string name(trim(std::string_view(v).substr(c1 + 1, c2 - c1 - 1)));
    const auto role = channel_role_from_string(trim(std::string_view(v).substr(c2 + 1)));
    if (!id || !role || !is_valid_channel_name(name)) {
      throw InputError(where + ": #@flyby channel " + quote_input(v) + " is not id(0-255),name,role");
    }
    meta.channels.push_back({static_cast<ChannelId>(*id), name, *role});
  } else if (key == "provenance") {
    const auto j = nlohmann::json::parse(v, nullptr, false);
    if (j.is_discarded() || !j.is_object()) throw InputError(where + ": #@flyby provenance is not a JSON object");
    meta.provenance_json = v;
  } else {
    throw InputError(where + ": unknown #@flyby key " + quote_input(key));
  }
}

}  // namespace

std::string quote_input(std::string_view text, std::size_t max_len) {
  std::string out = "'";
  for (std::size_t i = 0; i < text.size() && i < max_len; ++i) {
    const unsigned char c = static_cast<unsigned char>(text[i]);
    if (c >= 0x20 && c < 0x7f && c != '\'') {
      out += static_cast<char>(c);
    } else {
      char buf[8];
      std::snprintf(buf, sizeof buf, "\\x%02x", c);
      out += buf;
    }
  }
  if (text.size() > max_len) out += "...";
  return out + "'";
}

std::optional<ChannelMapping> parse_channel_mapping(std::string_view text) {
  const auto eq = text.find('=');
  if (eq == std::string_view::npos || eq == 0) return std::nullopt;
  ChannelMapping m;
  m.token = std::string(text.substr(0, eq));
  std::string_view rest = text.substr(eq + 1);
  const auto colon = rest.find(':');
  m.name = std::string(rest.substr(0, colon));
  if (!is_valid_channel_name(m.name)) return std::nullopt;
  if (colon != std::string_view::npos) {
    const auto role = channel_role_from_string(rest.substr(colon + 1));
    if (!role) return std::nullopt;
    m.role = *role;
  }
  return m;
}

std::optional<BinaryField> parse_binary_field(std::string_view text) {
  BinaryField f;
  std::vector<std::string_view> parts;
  split(text, ':', parts);
  if (parts.size() < 2 || parts.size() > 3) return std::nullopt;
  auto num = [](std::string_view s, std::size_t& out) {
    const auto r = std::from_chars(s.data(), s.data() + s.size(), out);
    return r.ec == std::errc() && r.ptr == s.data() + s.size();
  };
  if (!num(parts[0], f.offset) || !num(parts[1], f.size)) return std::nullopt;
  if (f.size != 1 && f.size != 2 && f.size != 4 && f.size != 8) return std::nullopt;
  if (f.offset > 4096) return std::nullopt;
  if (parts.size() == 3) {
    if (parts[2] == "signed") f.is_signed = true;
    else if (parts[2] == "unsigned") f.is_signed = false;
    else return std::nullopt;
  }
  return f;
}

std::string ImportSummary::brief_report() const {
  std::ostringstream os;
  os << "imported " << tags << " tags in " << header.channels.size() << " channels";
  if (dropped) os << " (" << dropped << " unmapped tags dropped)";
  if (!was_sorted) {
    os << "; input was not sorted and has been sorted";
    if (sort_runs > 0) os << " (external merge of " << sort_runs << " runs)";
  }
  os << "; window " << header.start_ps << " ps + " << header.duration_ps << " ps";
  return os.str();
}

ImportSummary import_text(std::istream& in, const std::string& input_name, const std::filesystem::path& output,
                          const TextImportOptions& options) {
  TagSink sink(output, options.common, input_name);
  if (options.delimiter == '\n' || options.delimiter == '\r' || options.delimiter == '\0') {
    throw InputError(input_name + ": invalid delimiter");
  }
  LineReader reader(in, options.max_line_bytes);
  std::string line;
  std::vector<std::string_view> fields;
  std::uint64_t lineno = 0;
  ExportMeta meta;
  bool header_done = options.header == TextImportOptions::Header::kAbsent;
  bool data_started = false;
  std::optional<std::size_t> time_col, chan_col;
  std::optional<TimeScale> unit;
  if (options.common.time_unit) unit = unit_or_fail(options.common.time_unit, input_name);

  auto position = [](const std::string& spec) -> std::optional<std::size_t> {
    if (spec.empty() || spec.size() > 6 || !std::all_of(spec.begin(), spec.end(), [](char c) { return c >= '0' && c <= '9'; })) {
      return std::nullopt;
    }
    const std::size_t v = std::stoul(spec);
    if (v == 0) return std::nullopt;
    return v - 1;
  };
  time_col = position(options.time_column);
  chan_col = position(options.channel_column);
  if (options.time_column.empty() || options.channel_column.empty()) throw InputError(input_name + ": empty column name");
  const bool by_name = !time_col || !chan_col;
  if (by_name && options.header == TextImportOptions::Header::kAbsent) {
    throw InputError(input_name + ": columns are given by name but the input has no header");
  }

  const std::string line_prefix = "";
  while (reader.next(line, input_name, lineno + 1)) {
    ++lineno;
    if (lineno <= options.skip_lines) continue;
    const std::string_view l = trim(line);
    if (l.empty()) continue;
    if (!data_started && l.rfind("#@flyby ", 0) == 0) {
      parse_meta_line(l.substr(8), meta, input_name + ":" + std::to_string(lineno));
      continue;
    }
    if (!options.comment_prefix.empty() && l.rfind(options.comment_prefix, 0) == 0) continue;
    split(l, options.delimiter, fields);
    if (!header_done) {
      header_done = true;
      bool is_header = options.header == TextImportOptions::Header::kPresent || by_name;
      if (!is_header) {
        // Auto: a header if the time field is not a number.
        std::int64_t dummy;
        const std::size_t tc = *time_col;
        is_header = tc >= fields.size() || parse_time_ps(fields[tc], TimeScale{}, dummy) == TimeParse::kSyntax;
      }
      if (is_header) {
        auto find = [&](const std::string& spec, std::optional<std::size_t>& col) {
          if (col) {
            if (*col >= fields.size()) {
              throw InputError(input_name + ":" + std::to_string(lineno) + ": header has " + std::to_string(fields.size()) +
                               " columns, column " + spec + " does not exist");
            }
            return;
          }
          for (std::size_t i = 0; i < fields.size(); ++i) {
            if (fields[i] == spec) {
              col = i;
              return;
            }
          }
          std::string names;
          for (std::size_t i = 0; i < fields.size() && i < 12; ++i) names += (i ? ", " : "") + quote_input(fields[i], 24);
          throw InputError(input_name + ":" + std::to_string(lineno) + ": no column named " + quote_input(spec) +
                           " in the header (columns: " + names + ")");
        };
        find(options.time_column, time_col);
        find(options.channel_column, chan_col);
        if (!unit) {
          if (auto u = time_unit_from_column_name(fields[*time_col])) unit = *u;
        }
        continue;
      }
    }
    if (!data_started) {
      data_started = true;
      if (!unit) {
        throw InputError(input_name + ": the time unit is unknown: give it (--time-unit ps|ns|us|ms|s) or name the time "
                                      "column with a unit suffix such as time_ps");
      }
      if (meta.any) sink.set_meta(meta);
      sink.start();
    }
    const std::size_t need = std::max(*time_col, *chan_col) + 1;
    if (fields.size() < need) {
      throw InputError(input_name + ":" + std::to_string(lineno) + ": expected at least " + std::to_string(need) +
                       " fields, found " + std::to_string(fields.size()));
    }
    std::int64_t t = 0;
    const TimeParse r = parse_time_ps(fields[*time_col], *unit, t);
    if (r == TimeParse::kSyntax) {
      throw InputError(input_name + ":" + std::to_string(lineno) + ": time field " + quote_input(fields[*time_col]) +
                       " is not a number");
    }
    if (r == TimeParse::kOverflow) {
      throw InputError(input_name + ":" + std::to_string(lineno) + ": time " + quote_input(fields[*time_col]) + " " +
                       unit->text + " does not fit in int64 picoseconds");
    }
    const auto ch = sink.channel(fields[*chan_col], "", lineno);
    if (!ch) {
      sink.count_dropped();
      continue;
    }
    sink.add(t, *ch, "", lineno);
  }
  if (!data_started) throw InputError(input_name + ": no time tags found");
  return sink.finish();
}

ImportSummary import_text_file(const std::filesystem::path& input, const std::filesystem::path& output,
                               const TextImportOptions& options) {
  std::error_code ec;
  if (!std::filesystem::is_regular_file(input, ec)) throw InputError(input.string() + ": no such file");
  std::ifstream in(input, std::ios::binary);
  if (!in) throw InputError(input.string() + ": cannot open for reading");
  TextImportOptions o = options;
  if (o.common.source_name.empty()) o.common.source_name = input.string();
  return import_text(in, input.string(), output, o);
}

ImportSummary import_binary(std::istream& in, const std::string& input_name, const std::filesystem::path& output,
                            const BinaryImportOptions& options) {
  const std::size_t rb = options.record_bytes;
  if (rb < 1 || rb > 4096) throw InputError(input_name + ": record size must be 1..4096 bytes");
  for (const auto* f : {&options.time_field, &options.channel_field}) {
    if ((f->size != 1 && f->size != 2 && f->size != 4 && f->size != 8) || f->offset + f->size > rb) {
      throw InputError(input_name + ": field at offset " + std::to_string(f->offset) + " with " + std::to_string(f->size) +
                       " bytes does not fit in a record of " + std::to_string(rb) + " bytes (field sizes 1, 2, 4, 8)");
    }
  }
  if (!options.common.time_unit) throw InputError(input_name + ": binary input needs the time unit (--time-unit)");
  const TimeScale unit = unit_or_fail(options.common.time_unit, input_name);
  TagSink sink(output, options.common, input_name);

  // Skip the header.
  std::vector<char> skip(4096);
  std::size_t left = options.header_bytes;
  while (left > 0) {
    in.read(skip.data(), static_cast<std::streamsize>(std::min(left, skip.size())));
    const auto got = static_cast<std::size_t>(in.gcount());
    if (got == 0) {
      throw InputError(input_name + ": file is shorter than the " + std::to_string(options.header_bytes) + "-byte header");
    }
    left -= got;
  }
  sink.start();
  const std::size_t per_read = std::max<std::size_t>(1, (std::size_t{1} << 20) / rb);
  std::vector<unsigned char> buf(per_read * rb);
  std::uint64_t record = 0;
  auto field = [](const unsigned char* p, const BinaryField& f) -> std::uint64_t {
    std::uint64_t v = 0;
    for (std::size_t i = 0; i < f.size; ++i) v |= static_cast<std::uint64_t>(p[f.offset + i]) << (8 * i);
    return v;
  };
  char token[24];
  while (true) {
    in.read(reinterpret_cast<char*>(buf.data()), static_cast<std::streamsize>(buf.size()));
    const auto got = static_cast<std::size_t>(in.gcount());
    if (in.bad()) throw IoError(input_name + ": read error");
    if (got == 0) break;
    if (got % rb != 0 && !in.eof()) throw IoError(input_name + ": short read");
    const std::size_t n = got / rb;
    for (std::size_t k = 0; k < n; ++k, ++record) {
      const unsigned char* p = buf.data() + k * rb;
      const std::uint64_t raw_t = field(p, options.time_field);
      std::int64_t t = 0;
      TimeParse r;
      if (options.time_field.is_signed) {
        const unsigned bits = 8 * static_cast<unsigned>(options.time_field.size);
        std::int64_t s = static_cast<std::int64_t>(raw_t);
        if (bits < 64 && (raw_t >> (bits - 1)) & 1) s = static_cast<std::int64_t>(raw_t | (~std::uint64_t{0} << bits));
        r = scale_count_ps(s, unit, t);
      } else {
        r = scale_count_ps(raw_t, unit, t);
      }
      if (r != TimeParse::kOk) {
        throw InputError(input_name + ":record " + std::to_string(record) + ": time count " + std::to_string(raw_t) + " " +
                         unit.text + " does not fit in int64 picoseconds");
      }
      std::uint64_t raw_c = field(p, options.channel_field);
      std::string_view tok;
      if (options.channel_field.is_signed) {
        const unsigned bits = 8 * static_cast<unsigned>(options.channel_field.size);
        std::int64_t s = static_cast<std::int64_t>(raw_c);
        if (bits < 64 && (raw_c >> (bits - 1)) & 1) s = static_cast<std::int64_t>(raw_c | (~std::uint64_t{0} << bits));
        const auto res = std::to_chars(token, token + sizeof token, s);
        tok = std::string_view(token, static_cast<std::size_t>(res.ptr - token));
      } else {
        const auto res = std::to_chars(token, token + sizeof token, raw_c);
        tok = std::string_view(token, static_cast<std::size_t>(res.ptr - token));
      }
      const auto ch = sink.channel(tok, "record ", record);
      if (!ch) {
        sink.count_dropped();
        continue;
      }
      sink.add(t, *ch, "record ", record);
    }
    if (got % rb != 0) {
      throw InputError(input_name + ": file ends inside record " + std::to_string(record) + " (" + std::to_string(got % rb) +
                       " trailing bytes; record size " + std::to_string(rb) + "): truncated or wrong record size");
    }
  }
  return sink.finish();
}

ImportSummary import_binary_file(const std::filesystem::path& input, const std::filesystem::path& output,
                                 const BinaryImportOptions& options) {
  std::error_code ec;
  if (!std::filesystem::is_regular_file(input, ec)) throw InputError(input.string() + ": no such file");
  std::ifstream in(input, std::ios::binary);
  if (!in) throw InputError(input.string() + ": cannot open for reading");
  BinaryImportOptions o = options;
  if (o.common.source_name.empty()) o.common.source_name = input.string();
  return import_binary(in, input.string(), output, o);
}

}  // namespace flyby::records
