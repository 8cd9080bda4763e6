// `flyby levels` end to end: the README demo command works, --json has the documented keys
// and the REFERENCES.md strengths, and impossible requests exit non-zero with one line on
// stderr naming the allowed values (BRIEF.md error rules).
#include <catch2/catch.hpp>

#include <nlohmann/json.hpp>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <fstream>
#include <sstream>
#include <string>
#include <sys/wait.h>
#include <unistd.h>

namespace {

struct Run {
  int exit_code = -1;
  std::string out, err;
};

std::string slurp(const std::string& path) {
  std::ifstream f(path);
  std::stringstream s;
  s << f.rdbuf();
  return s.str();
}

// Runs `flyby <args>` and captures exit code, stdout and stderr.
Run run_flyby(const std::string& args) {
  char out_path[] = "/tmp/flyby_cli_out_XXXXXX";
  char err_path[] = "/tmp/flyby_cli_err_XXXXXX";
  const int fo = mkstemp(out_path), fe = mkstemp(err_path);
  REQUIRE(fo >= 0);
  REQUIRE(fe >= 0);
  close(fo);
  close(fe);
  const std::string cmd = std::string(FLYBY_EXE) + " " + args + " >" + out_path + " 2>" + err_path;
  const int status = std::system(cmd.c_str());
  Run r;
  r.exit_code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  r.out = slurp(out_path);
  r.err = slurp(err_path);
  std::remove(out_path);
  std::remove(err_path);
  return r;
}

int count_lines(const std::string& s) {
  int n = 0;
  for (char c : s) n += (c == '\n');
  return n;
}

}  // namespace

TEST_CASE("flyby levels demo command prints the table", "[cli][levels]") {
  const Run r = run_flyby("levels --species Rb87 --line D2 --ground 2 --excited 1,2,3 --field-G 1.5");
  INFO(r.err);
  REQUIRE(r.exit_code == 0);
  CHECK(r.out.find("87Rb D2") != std::string::npos);
  CHECK(r.out.find("7/10") != std::string::npos);  // S(F=2 → F′=3), REFERENCES.md
  CHECK(r.out.find("loss") != std::string::npos);
  CHECK(r.err.empty());
}

TEST_CASE("flyby levels --json has the documented keys and values", "[cli][levels]") {
  const Run r = run_flyby("levels --species Rb87 --line D2 --ground 2 --excited 1,2,3 --field-G 1.5 --json");
  INFO(r.err);
  REQUIRE(r.exit_code == 0);
  const auto j = nlohmann::json::parse(r.out);
  REQUIRE(j.at("ground").size() == 1);
  REQUIRE(j.at("excited").size() == 3);
  const auto& g = j.at("ground")[0];
  CHECK(g.at("F").get<int>() == 2);
  // g_F(87Rb F=2) = 0.4998364 (REFERENCES.md [derived]).
  CHECK(std::abs(g.at("gF").get<double>() - 0.4998364) <= 5.0001e-8);
  REQUIRE(g.at("m").size() == 5);
  REQUIRE(g.at("shift_MHz").size() == 5);
  // Adjacent sublevels split by g_F μB B = 0.4998364 · 1.39962449361 MHz/G · 1.5 G.
  const double d = g.at("shift_MHz")[1].get<double>() - g.at("shift_MHz")[0].get<double>();
  CHECK(std::abs(d - 0.4998364 * 1.39962449361 * 1.5) <= 1e-7);
  // S_FF′ for F=2 → F′=1,2,3: 1/20, 1/4, 7/10 (REFERENCES.md).
  const double S[] = {0.05, 0.25, 0.7};
  REQUIRE(j.at("strengths").size() == 3);
  for (int k = 0; k < 3; ++k) {
    CHECK(j.at("strengths")[k].at("F").get<int>() == 2);
    CHECK(j.at("strengths")[k].at("Fp").get<int>() == k + 1);
    CHECK(std::abs(j.at("strengths")[k].at("S").get<double>() - S[k]) <= 1e-14);
  }
  // Branching: every F′ to both ground F of 87Rb, the F=1 entries marked as not in the model.
  REQUIRE(j.at("branching").size() == 6);
  for (const auto& b : j.at("branching")) {
    CHECK(b.at("in_model").get<bool>() == (b.at("F").get<int>() == 2));
  }
}

TEST_CASE("flyby levels rejects impossible requests with one line", "[cli][levels]") {
  struct Case {
    const char* args;
    const char* must_contain;
  };
  for (const Case& c : {Case{"levels --species Rb86", "Rb87, Rb85, Cs133, Na23, K39"},
                        Case{"levels --species Rb87 --ground 3", "allowed: 1, 2"},
                        Case{"levels --species Cs133 --excited 6", "allowed: 2, 3, 4, 5"},
                        Case{"levels --species Rb87 --line D3", "D1, D2"},
                        Case{"levels --species Rb87 --ground x", "--ground"},
                        Case{"levels --species Rb87 --field-G -2", "field"},
                        Case{"levels --custom-ground-F 1 --custom-excited-F 3 --custom-ground-gF 0.5 "
                             "--custom-excited-gF 0.5 --custom-gamma-MHz 6 --custom-wavelength-nm 780",
                             "allowed F'"}}) {
    const Run r = run_flyby(c.args);
    INFO(c.args << "\nstderr: " << r.err);
    CHECK(r.exit_code != 0);
    CHECK(count_lines(r.err) == 1);
    CHECK(r.err.find(c.must_contain) != std::string::npos);
    CHECK(r.out.empty());
  }
}

TEST_CASE("flyby levels --help explains the options", "[cli][levels]") {
  const Run r = run_flyby("levels --help");
  REQUIRE(r.exit_code == 0);
  for (const char* s : {"--species", "--line", "--ground", "--excited", "--field-G", "--breit-rabi", "--json",
                        "--custom-ground-F", "branching"}) {
    CHECK(r.out.find(s) != std::string::npos);
  }
}
