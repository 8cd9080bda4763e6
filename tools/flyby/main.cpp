// Entry point of the `flyby` command-line program: builds the subcommand tree, and is the one
// place where user-facing errors are caught and turned into one line and a non-zero exit.
//
// MPI (when built with it): MPI is initialized only when the process was started by an MPI
// launcher (mpirun/mpiexec set OMPI_COMM_WORLD_SIZE, PMIX_RANK or PMI_RANK), so a plain
// `flyby ...` never touches the MPI runtime. Under mpirun only rank 0 prints errors, and only
// `flyby simulate` may run with more than one process (models/simulation/simulation.h).
#include <algorithm>
#include <cstdlib>
#include <cstring>
#include <exception>
#include <iostream>
#include <string>

#ifdef FLYBY_HAVE_MPI
#include <mpi.h>
#endif

#include "engine/common/errors.h"
#include "engine/common/provenance.h"
#include "flyby/version.h"
#include "tools/flyby/commands.h"

namespace flyby::cli {

std::vector<std::pair<int, RegisterFn>>& command_registry() {
  static std::vector<std::pair<int, RegisterFn>> registry;
  return registry;
}

}  // namespace flyby::cli

namespace {

// MPI for the lifetime of main() when launched by an MPI launcher; rank 0 of 1 otherwise.
class MpiSession {
 public:
  MpiSession(int& argc, char**& argv) {
#ifdef FLYBY_HAVE_MPI
    const bool launched = std::getenv("OMPI_COMM_WORLD_SIZE") || std::getenv("PMIX_RANK") || std::getenv("PMI_RANK");
    if (!launched) return;
    // Only the main thread calls MPI (outside OpenMP regions).
    int provided = 0;
    MPI_Init_thread(&argc, &argv, MPI_THREAD_FUNNELED, &provided);
    active_ = true;
    MPI_Comm_rank(MPI_COMM_WORLD, &rank_);
    MPI_Comm_size(MPI_COMM_WORLD, &size_);
#else
    (void)argc;
    (void)argv;
#endif
  }
  ~MpiSession() {
#ifdef FLYBY_HAVE_MPI
    if (active_) MPI_Finalize();
#endif
  }
  MpiSession(const MpiSession&) = delete;
  MpiSession& operator=(const MpiSession&) = delete;
  int rank() const { return rank_; }
  int size() const { return size_; }

 private:
  bool active_ = false;
  int rank_ = 0, size_ = 1;
};

// The subcommand named on the command line (first argument not starting with '-'), or "".
std::string subcommand_name(int argc, char** argv) {
  for (int i = 1; i < argc; ++i)
    if (argv[i][0] != '-') return argv[i];
  return "";
}

}  // namespace

int main(int argc, char** argv) {
  flyby::set_command_line(argc, argv);
  MpiSession mpi(argc, argv);
  // Ranks other than 0 stay silent about errors: rank 0 reports them (also a worker's).
  std::ostream null_stream(nullptr);  // discards everything (badbit set)
  std::ostream& err = mpi.rank() == 0 ? std::cerr : null_stream;
  if (mpi.size() > 1 && subcommand_name(argc, argv) != "simulate") {
    err << "flyby: error: only `flyby simulate` runs under mpirun with more than one process\n";
    return 2;
  }

  CLI::App app{
      "flyby: simulate atoms crossing a resonator mode with quantum trajectories, write "
      "lab-shaped time-tag records, and analyze simulated or measured records."};
  app.set_version_flag("--version", std::string(flyby::version_string()));
  app.require_subcommand(1);
  app.fallthrough(false);

  auto& registry = flyby::cli::command_registry();
  std::stable_sort(registry.begin(), registry.end(),
                   [](const auto& a, const auto& b) { return a.first < b.first; });
  for (const auto& [order, fn] : registry) fn(app);

  try {
    app.parse(argc, argv);
  } catch (const CLI::ParseError& e) {
    if (mpi.rank() != 0) return e.get_exit_code();
    return app.exit(e);
  } catch (const flyby::InputError& e) {
    err << "flyby: error: " << e.what() << "\n";
    return 2;
  } catch (const flyby::IoError& e) {
    err << "flyby: i/o error: " << e.what() << "\n";
    return 3;
  } catch (const flyby::InternalError& e) {
    err << "flyby: " << e.what() << "\n";
    return 70;
  } catch (const std::exception& e) {
    err << "flyby: unexpected error: " << e.what() << "\n";
    return 70;
  }
  return 0;
}
