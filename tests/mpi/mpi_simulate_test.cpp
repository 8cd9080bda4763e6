// `mpirun -np K flyby simulate` (K = 1, 2, 3) writes the record a one-process run writes, bit
// for bit, and an error on an MPI run is one line with no output left behind. Built only when
// CMake found MPI (tests/CMakeLists.txt); FLYBY_MPIEXEC is the launcher it found.
// Not built under the sanitizers (see tests/CMakeLists.txt for why).
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <string>

#include "engine/records/record_reader.h"
#include "tests/support/record_compare.h"
#include "tests/support/block_driver_config.h"
#include "tests/support/run_cli.h"
#include "tests/support/scratch_dir.h"
#include "tests/support/test_seed.h"

namespace {

using flyby::test::CliResult;
using flyby::test::ScratchDir;

// Runs `mpirun ... -np K <flyby> ARGS` in `cwd` (OpenMP: one thread per rank unless ARGS say).
CliResult run_mpi(int ranks, const std::string& args, const std::string& cwd) {
  const std::string env;
  // run_flyby prefixes the flyby path; put the launcher in front of it through the shell.
  const std::string out = cwd + "/.mpi_stdout", err = cwd + "/.mpi_stderr";
  const std::string cmd = "cd '" + cwd + "' && " + env + "OMP_NUM_THREADS=1 '" FLYBY_MPIEXEC
                          "' --oversubscribe --allow-run-as-root -np " + std::to_string(ranks) + " '" +
                          std::string(FLYBY_EXE) + "' " + args + " >'" + out + "' 2>'" + err + "'";
  const int raw = std::system(cmd.c_str());
  CliResult r;
  if (WIFEXITED(raw)) r.status = WEXITSTATUS(raw);
  else if (WIFSIGNALED(raw)) r.status = 128 + WTERMSIG(raw);
  r.out = flyby::test::read_text(out);
  r.err = flyby::test::read_text(err);
  std::remove(out.c_str());
  std::remove(err.c_str());
  return r;
}

std::size_t count_lines_with(const std::string& text, const std::string& what) {
  std::size_t n = 0, pos = 0;
  while ((pos = text.find(what, pos)) != std::string::npos) {
    ++n;
    pos += what.size();
  }
  return n;
}

void check_ranks(int ranks) {
  const auto seed = flyby::test::seed("mpi simulate");
  ScratchDir d("mpi-sim");
  std::filesystem::create_directories(d / "one");
  std::filesystem::create_directories(d / "mpi");
  std::ofstream((d / "cfg.toml").string()) << flyby::test::block_driver_config(seed);
  // The same arguments in both runs (the command line is part of the record's provenance);
  // two items per block, so every rank gets several blocks and photons are held across blocks.
  const std::string args = "simulate ../cfg.toml -o run.h5 --json --threads 1 --block-items 2";
  const CliResult one = flyby::test::run_flyby(args, (d / "one").string());
  INFO(one.err);
  REQUIRE(one.status == 0);
  const CliResult many = run_mpi(ranks, args, (d / "mpi").string());
  INFO(many.err);
  REQUIRE(many.status == 0);

  const auto a = flyby::records::read_record(d / "one" / "run.h5");
  const auto b = flyby::records::read_record(d / "mpi" / "run.h5");
  REQUIRE(a.tags.size() > 100);
  flyby::test::require_same_record(a, b);

  // One summary (rank 0 only), with the same counts; only wall time, ranks and blocks differ.
  const auto ja = nlohmann::json::parse(one.out);
  const auto jb = nlohmann::json::parse(many.out);
  CHECK(jb["ranks_count"] == ranks);
  CHECK(ja["ranks_count"] == 1);
  for (const char* key : {"atoms_count", "clusters_count", "fallback_clusters_count", "trajectories_count",
                          "jumps_count", "steps_count", "empty_interval_photons_count", "channels", "warnings"})
    CHECK(ja[key] == jb[key]);
  CHECK(jb["fallback_clusters_count"].get<int>() > 0);
  CHECK(jb["blocks_count"].get<int>() >= 2 * ranks);
  // Nothing but the record is left.
  CHECK(d.entries() == std::vector<std::string>{"cfg.toml", "mpi", "one"});
  std::vector<std::string> left;
  for (const auto& e : std::filesystem::directory_iterator(d / "mpi")) left.push_back(e.path().filename().string());
  CHECK(left == std::vector<std::string>{"run.h5"});
}

}  // namespace

TEST_CASE("mpirun -np 1 flyby simulate equals a one-process run bit for bit", "[mpi]") { check_ranks(1); }
TEST_CASE("mpirun -np 2 flyby simulate equals a one-process run bit for bit", "[mpi]") { check_ranks(2); }
TEST_CASE("mpirun -np 3 flyby simulate equals a one-process run bit for bit", "[mpi]") { check_ranks(3); }

TEST_CASE("mpirun flyby simulate errors: one line from rank 0, non-zero exit, no output", "[mpi]") {
  const auto seed = flyby::test::seed("mpi simulate errors");
  ScratchDir d("mpi-err");
  std::ofstream((d / "cfg.toml").string()) << flyby::test::block_driver_config(seed);
  std::ofstream((d / "bad.toml").string()) << flyby::test::block_driver_config(seed) << "unknown_key_s = 1\n";

  SECTION("bad config: every rank fails the same way, rank 0 alone reports it") {
    const CliResult r = run_mpi(3, "simulate bad.toml -o run.h5", d.path().string());
    CHECK(r.status == 2);
    CHECK(count_lines_with(r.err, "flyby: error:") == 1);
    CHECK(count_lines_with(r.err, "unknown_key_s") == 1);
  }
  SECTION("output directory missing: rank 0 fails, the workers are stopped") {
    const CliResult r = run_mpi(3, "simulate cfg.toml -o nodir/run.h5 --block-items 2", d.path().string());
    CHECK(r.status != 0);
    CHECK(count_lines_with(r.err, "flyby: ") == 1);
    CHECK(!std::filesystem::exists(d / "nodir"));
  }
  SECTION("another subcommand under mpirun with several ranks is refused") {
    const CliResult r = run_mpi(2, "info run.h5", d.path().string());
    CHECK(r.status == 2);
    CHECK(count_lines_with(r.err, "only `flyby simulate` runs under mpirun") == 1);
  }
  CHECK(d.entries() == std::vector<std::string>{"bad.toml", "cfg.toml"});
}
