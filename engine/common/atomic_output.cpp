// Implementation of atomic outputs and of the async-signal-safe cleanup of temporary files.
#include "engine/common/atomic_output.h"

#include <signal.h>
#include <unistd.h>

#include <array>
#include <atomic>
#include <cerrno>
#include <cstring>
#include <mutex>
#include <system_error>

#include "engine/common/errors.h"

namespace flyby {
namespace {

// Fixed-size registry: the signal handler may only touch memory that is never reallocated.
constexpr int kSlots = 64;
constexpr std::size_t kPathMax = 4096;
struct Slot {
  std::atomic<bool> used{false};
  std::array<char, kPathMax> path{};
};
std::array<Slot, kSlots> g_slots;
std::atomic<unsigned long> g_counter{0};

extern "C" void cleanup_handler(int sig) {
  for (auto& s : g_slots) {
    if (s.used.load(std::memory_order_acquire)) ::unlink(s.path.data());
  }
  // Re-raise with the default action so the exit status says "killed by SIGINT".
  ::signal(sig, SIG_DFL);
  ::raise(sig);
}

int acquire_slot(const std::string& p) {
  if (p.size() + 1 > kPathMax) throw IoError("output path too long: " + p);
  for (int i = 0; i < kSlots; ++i) {
    bool expected = false;
    // Claim, then fill: the handler may see a claimed slot holding an older temp name of this
    // process for an instant; that name is already renamed or removed, so unlinking it is a no-op.
    if (g_slots[i].used.compare_exchange_strong(expected, true)) {
      std::memcpy(g_slots[i].path.data(), p.c_str(), p.size() + 1);
      return i;
    }
  }
  throw IoError("too many output files open at once (limit 64)");
}

}  // namespace

void install_interrupt_cleanup() {
  // Checked on every call (not once): a handler someone installed earlier may since have been
  // reset to the default action.
  static std::mutex mutex;
  std::lock_guard<std::mutex> lock(mutex);
  for (int sig : {SIGINT, SIGTERM}) {
    struct sigaction old {};
    if (::sigaction(sig, nullptr, &old) != 0) continue;
    if ((old.sa_flags & SA_SIGINFO) || old.sa_handler != SIG_DFL) continue;
    struct sigaction sa {};
    sa.sa_handler = cleanup_handler;
    sigemptyset(&sa.sa_mask);
    sa.sa_flags = 0;
    ::sigaction(sig, &sa, nullptr);
  }
}

AtomicOutputPath::AtomicOutputPath(const std::filesystem::path& target) : target_(target) {
  install_interrupt_cleanup();
  const std::filesystem::path dir = target_.has_parent_path() ? target_.parent_path() : ".";
  std::error_code ec;
  if (!std::filesystem::is_directory(dir, ec)) {
    throw IoError("cannot write " + target_.string() + ": directory " + dir.string() + " does not exist");
  }
  if (!target_.has_filename()) throw IoError("output path has no file name: " + target_.string());
  const unsigned long n = g_counter.fetch_add(1);
  std::string name = ".";  // built by appends: GCC 12 warns falsely (-Wrestrict) on "." + string
  name += target_.filename().string();
  name += ".part-";
  name += std::to_string(::getpid());
  name += '-';
  name += std::to_string(n);
  temp_ = dir / name;
  slot_ = acquire_slot(temp_.string());
}

AtomicOutputPath::~AtomicOutputPath() {
  if (!committed_) discard();
  if (slot_ >= 0) g_slots[slot_].used.store(false, std::memory_order_release);
}

void AtomicOutputPath::discard() {
  std::error_code ec;
  std::filesystem::remove(temp_, ec);
}

void AtomicOutputPath::commit() {
  if (committed_) return;
  if (::rename(temp_.c_str(), target_.c_str()) != 0) {
    const int err = errno;
    discard();
    throw IoError("cannot rename " + temp_.string() + " to " + target_.string() + ": " +
                  std::strerror(err));
  }
  committed_ = true;
  g_slots[slot_].used.store(false, std::memory_order_release);
  slot_ = -1;
}

AtomicTextFile::AtomicTextFile(const std::filesystem::path& target) : path_(target) {
  out_.open(path_.temp_path(), std::ios::out | std::ios::trunc | std::ios::binary);
  if (!out_) throw IoError("cannot create " + path_.temp_path().string() + ": " + std::strerror(errno));
}

void AtomicTextFile::commit() {
  out_.flush();
  if (!out_) throw IoError("write failed for " + path_.target().string() + " (disk full?)");
  out_.close();
  if (out_.fail()) throw IoError("close failed for " + path_.target().string());
  path_.commit();
}

}  // namespace flyby
