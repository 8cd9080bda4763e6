// MPI point-to-point messages of the simulate driver (see rank_link.h). Only the calling
// (main) thread talks MPI, so MPI_THREAD_FUNNELED is enough (tools/flyby/main.cpp).
#include "models/simulation/rank_link.h"

#include <algorithm>
#include <climits>

#include "engine/common/errors.h"

#ifdef FLYBY_HAVE_MPI
#include <mpi.h>
#endif

namespace flyby::simulation {

#ifdef FLYBY_HAVE_MPI
namespace {

constexpr int kRequestTag = 7101;
constexpr int kSizeTag = 7102;
constexpr int kDataTag = 7103;
// Bytes per MPI message: MPI counts are int, so a large block goes in several messages.
constexpr std::size_t kMaxMessageBytes = std::size_t(1) << 30;

void check(int rc, const char* what) {
  if (rc != MPI_SUCCESS) throw InternalError(std::string("MPI error in ") + what);
}

}  // namespace

RankInfo current_ranks() {
  int initialized = 0, finalized = 0;
  MPI_Initialized(&initialized);
  MPI_Finalized(&finalized);
  RankInfo r;
  if (!initialized || finalized) return r;
  MPI_Comm_rank(MPI_COMM_WORLD, &r.rank);
  MPI_Comm_size(MPI_COMM_WORLD, &r.size);
  return r;
}

void send_request(int rank, bool proceed) {
  int flag = proceed ? 1 : 0;
  check(MPI_Send(&flag, 1, MPI_INT, rank, kRequestTag, MPI_COMM_WORLD), "send_request");
}

bool block_waiting(int rank) {
  int flag = 0;
  check(MPI_Iprobe(rank, kSizeTag, MPI_COMM_WORLD, &flag, MPI_STATUS_IGNORE), "block_waiting");
  return flag != 0;
}

std::vector<char> receive_block(int rank) {
  unsigned long long n = 0;
  check(MPI_Recv(&n, 1, MPI_UNSIGNED_LONG_LONG, rank, kSizeTag, MPI_COMM_WORLD, MPI_STATUS_IGNORE), "receive_block");
  std::vector<char> bytes(n);
  for (std::size_t off = 0; off < n; off += kMaxMessageBytes) {
    const int len = int(std::min<std::size_t>(kMaxMessageBytes, n - off));
    check(MPI_Recv(bytes.data() + off, len, MPI_BYTE, rank, kDataTag, MPI_COMM_WORLD, MPI_STATUS_IGNORE),
          "receive_block");
  }
  return bytes;
}

bool request_waiting() {
  int flag = 0;
  check(MPI_Iprobe(0, kRequestTag, MPI_COMM_WORLD, &flag, MPI_STATUS_IGNORE), "request_waiting");
  return flag != 0;
}

bool wait_for_request() {
  int flag = 0;
  check(MPI_Recv(&flag, 1, MPI_INT, 0, kRequestTag, MPI_COMM_WORLD, MPI_STATUS_IGNORE), "wait_for_request");
  return flag != 0;
}

void send_block(const std::vector<char>& bytes) {
  unsigned long long n = bytes.size();
  check(MPI_Send(&n, 1, MPI_UNSIGNED_LONG_LONG, 0, kSizeTag, MPI_COMM_WORLD), "send_block");
  for (std::size_t off = 0; off < bytes.size(); off += kMaxMessageBytes) {
    const int len = int(std::min<std::size_t>(kMaxMessageBytes, bytes.size() - off));
    check(MPI_Send(bytes.data() + off, len, MPI_BYTE, 0, kDataTag, MPI_COMM_WORLD), "send_block");
  }
}

#else  // no MPI at build time: always one process.

RankInfo current_ranks() { return {}; }
void send_request(int, bool) { throw InternalError("send_request without MPI"); }
bool block_waiting(int) { throw InternalError("block_waiting without MPI"); }
std::vector<char> receive_block(int) { throw InternalError("receive_block without MPI"); }
bool request_waiting() { throw InternalError("request_waiting without MPI"); }
bool wait_for_request() { throw InternalError("wait_for_request without MPI"); }
void send_block(const std::vector<char>&) { throw InternalError("send_block without MPI"); }

#endif

}  // namespace flyby::simulation
