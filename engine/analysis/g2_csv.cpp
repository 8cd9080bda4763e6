// Correlation CSV writer and reader (see g2_csv.h).
#include "engine/analysis/g2_csv.h"

#include <charconv>
#include <cmath>
#include <fstream>
#include <iomanip>
#include <ostream>
#include <sstream>

#include "engine/common/errors.h"

namespace flyby::analysis {

void write_g2_csv(std::ostream& out, const CorrelationHistogram& h,
                  const std::vector<std::pair<std::string, std::string>>& comments) {
  for (const auto& [k, v] : comments) {
    std::string value = v;
    for (char& c : value)
      if (c == '\n' || c == '\r') c = ' ';
    out << "# " << k << ": " << value << "\n";
  }
  out << "tau_ns,counts,g2,g2_err\n";
  out << std::setprecision(17);
  for (std::size_t b = 0; b < h.counts.size(); ++b) {
    // τ in ns from integer ps: exact decimal, no rounding noise in the file.
    const std::int64_t t = h.tau_ps[b];
    const std::int64_t whole = t / 1000, frac = std::abs(t % 1000);
    std::ostringstream tau;
    if (t < 0 && whole == 0) tau << '-';
    tau << whole;
    if (frac) {
      std::ostringstream f;
      f << std::setw(3) << std::setfill('0') << frac;
      std::string fs = f.str();
      while (!fs.empty() && fs.back() == '0') fs.pop_back();
      tau << '.' << fs;
    }
    out << tau.str() << ',' << h.counts[b] << ',' << h.g2[b] << ',' << h.g2_err[b] << '\n';
  }
}

G2Csv read_g2_csv(const std::filesystem::path& path) {
  std::ifstream in(path);
  if (!in) throw InputError(path.string() + ": cannot open");
  G2Csv out;
  std::string line;
  int lineno = 0;
  int i_tau = -1, i_g2 = -1, i_err = -1, i_counts = -1;
  std::size_t ncols = 0;
  bool header = false;
  auto where = [&] { return path.string() + ":" + std::to_string(lineno) + ": "; };
  while (std::getline(in, line)) {
    ++lineno;
    if (!line.empty() && line.back() == '\r') line.pop_back();
    if (line.empty()) continue;
    if (line[0] == '#') {
      const auto colon = line.find(':');
      auto trim = [](std::string s) {
        const auto a = s.find_first_not_of(" \t");
        const auto b = s.find_last_not_of(" \t");
        return a == std::string::npos ? std::string{} : s.substr(a, b - a + 1);
      };
      if (colon != std::string::npos)
        out.comments.emplace_back(trim(line.substr(1, colon - 1)), trim(line.substr(colon + 1)));
      continue;
    }
    std::vector<std::string> cells;
    std::stringstream ss(line);
    std::string cell;
    while (std::getline(ss, cell, ',')) cells.push_back(cell);
    if (!line.empty() && line.back() == ',') cells.emplace_back();
    if (!header) {
      for (std::size_t i = 0; i < cells.size(); ++i) {
        if (cells[i] == "tau_ns") i_tau = static_cast<int>(i);
        else if (cells[i] == "g2") i_g2 = static_cast<int>(i);
        else if (cells[i] == "g2_err") i_err = static_cast<int>(i);
        else if (cells[i] == "counts") i_counts = static_cast<int>(i);
      }
      if (i_tau < 0 || i_g2 < 0 || i_err < 0)
        throw InputError(where() + "header must name the columns tau_ns, g2 and g2_err, got '" + line + "'");
      ncols = cells.size();
      header = true;
      continue;
    }
    if (cells.size() != ncols)
      throw InputError(where() + "expected " + std::to_string(ncols) + " columns, got " + std::to_string(cells.size()));
    auto num = [&](int i, const char* name) {
      const std::string& c = cells[static_cast<std::size_t>(i)];
      double v = 0;
      const auto [p, ec] = std::from_chars(c.data(), c.data() + c.size(), v);
      if (ec != std::errc() || p != c.data() + c.size() || !std::isfinite(v))
        throw InputError(where() + "column " + name + ": '" + c + "' is not a finite number");
      return v;
    };
    out.data.tau_us.push_back(num(i_tau, "tau_ns") * 1e-3);
    out.data.g2.push_back(num(i_g2, "g2"));
    const double e = num(i_err, "g2_err");
    if (e < 0) throw InputError(where() + "g2_err must be >= 0");
    out.data.g2_err.push_back(e);
    if (i_counts >= 0) out.counts.push_back(num(i_counts, "counts"));
  }
  if (!header) throw InputError(path.string() + ": no header line tau_ns,counts,g2,g2_err found");
  if (out.data.tau_us.empty()) throw InputError(path.string() + ": no data rows");
  return out;
}

}  // namespace flyby::analysis
