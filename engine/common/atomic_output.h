// Atomic output files: a result is written under a temporary name in the target's directory and
// renamed onto the target only when complete, so an exception, a crash or Ctrl-C never leaves a
// file under the final name that looks complete. On SIGINT/SIGTERM every live temporary file of
// the process is unlinked before the signal's default action runs.
#pragma once

#include <filesystem>
#include <fstream>
#include <string>

namespace flyby {

// Owns the temporary path for one output. The temporary file is created by the user of the
// class (e.g. HDF5 or an ofstream) at temp_path(); commit() renames it to target(). If the
// object is destroyed without commit(), the temporary file is removed.
class AtomicOutputPath {
 public:
  // Registers the temporary path for signal cleanup. Throws IoError if the target's directory
  // does not exist or too many outputs are open at once (the registry has a fixed size so that
  // the signal handler needs no allocation).
  explicit AtomicOutputPath(const std::filesystem::path& target);
  ~AtomicOutputPath();
  AtomicOutputPath(const AtomicOutputPath&) = delete;
  AtomicOutputPath& operator=(const AtomicOutputPath&) = delete;

  const std::filesystem::path& target() const { return target_; }
  // "<dir>/.<name>.part-<pid>-<n>": hidden, unique per process and output.
  const std::filesystem::path& temp_path() const { return temp_; }
  bool committed() const { return committed_; }

  // Renames the temporary file onto the target (atomic on POSIX within one file system).
  // Throws IoError on failure; the temporary file is then removed.
  void commit();
  // Removes the temporary file now (idempotent).
  void discard();

 private:
  std::filesystem::path target_;
  std::filesystem::path temp_;
  int slot_ = -1;
  bool committed_ = false;
};

// A text output (CSV, JSON, Markdown) written atomically: write to stream(), then commit().
class AtomicTextFile {
 public:
  explicit AtomicTextFile(const std::filesystem::path& target);
  std::ofstream& stream() { return out_; }
  // Flushes, checks the stream state (IoError on a write failure such as a full disk), renames.
  void commit();

 private:
  AtomicOutputPath path_;
  std::ofstream out_;
};

// Installs the SIGINT/SIGTERM cleanup handler if those signals still have their default
// action (a handler installed by someone else, e.g. an MPI runtime, is left alone). Called
// automatically by every AtomicOutputPath constructor; idempotent.
void install_interrupt_cleanup();

}  // namespace flyby
