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

constexpr int kOrderTag = 7101;
constexpr int kSizeTag = 7102;
constexpr int kDataTag = 7103;
// Bytes per MPI message: MPI counts are int, so a large block goes in several messages.
constexpr std::size_t kMaxMessageBytes = std::size_t(1) << 30;

void check(int rc, const char* what) {
  if (rc != MPI_SUCCESS) throw InternalError(std::string("MPI error in ") + what);
}

// The worker's message in flight: its size and bytes stay alive until the sends complete.
struct Outgoing {
  unsigned long long size = 0;
  std::vector<char> bytes;
  std::vector<MPI_Request> requests;
};
Outgoing& outgoing() {
  static Outgoing o;  // only the main thread of a worker sends
  return o;
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

void send_order(int rank, const Order& order) {
  unsigned long long msg[2] = {static_cast<unsigned long long>(order.kind), order.block};
  check(MPI_Send(msg, 2, MPI_UNSIGNED_LONG_LONG, rank, kOrderTag, MPI_COMM_WORLD), "send_order");
}

std::optional<int> message_waiting() {
  int flag = 0;
  MPI_Status st;
  check(MPI_Iprobe(MPI_ANY_SOURCE, kSizeTag, MPI_COMM_WORLD, &flag, &st), "message_waiting");
  if (!flag) return std::nullopt;
  return st.MPI_SOURCE;
}

int wait_for_message() {
  MPI_Status st;
  check(MPI_Probe(MPI_ANY_SOURCE, kSizeTag, MPI_COMM_WORLD, &st), "wait_for_message");
  return st.MPI_SOURCE;
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

bool order_waiting() {
  int flag = 0;
  check(MPI_Iprobe(0, kOrderTag, MPI_COMM_WORLD, &flag, MPI_STATUS_IGNORE), "order_waiting");
  return flag != 0;
}

Order receive_order() {
  unsigned long long msg[2] = {0, 0};
  check(MPI_Recv(msg, 2, MPI_UNSIGNED_LONG_LONG, 0, kOrderTag, MPI_COMM_WORLD, MPI_STATUS_IGNORE), "receive_order");
  FLYBY_CHECK(msg[0] <= static_cast<unsigned long long>(Order::Kind::kStopAfterError), "unknown order from MPI rank 0");
  return {static_cast<Order::Kind>(msg[0]), msg[1]};
}

void finish_sends() {
  Outgoing& o = outgoing();
  if (!o.requests.empty())
    check(MPI_Waitall(int(o.requests.size()), o.requests.data(), MPI_STATUSES_IGNORE), "finish_sends");
  o.requests.clear();
}

void send_block(std::vector<char> bytes) {
  finish_sends();
  Outgoing& o = outgoing();
  o.bytes = std::move(bytes);
  o.size = o.bytes.size();
  o.requests.emplace_back();
  check(MPI_Isend(&o.size, 1, MPI_UNSIGNED_LONG_LONG, 0, kSizeTag, MPI_COMM_WORLD, &o.requests.back()), "send_block");
  for (std::size_t off = 0; off < o.bytes.size(); off += kMaxMessageBytes) {
    const int len = int(std::min<std::size_t>(kMaxMessageBytes, o.bytes.size() - off));
    o.requests.emplace_back();
    check(MPI_Isend(o.bytes.data() + off, len, MPI_BYTE, 0, kDataTag, MPI_COMM_WORLD, &o.requests.back()),
          "send_block");
  }
}

#else  // no MPI at build time: always one process.

RankInfo current_ranks() { return {}; }
void send_order(int, const Order&) { throw InternalError("send_order without MPI"); }
std::optional<int> message_waiting() { throw InternalError("message_waiting without MPI"); }
int wait_for_message() { throw InternalError("wait_for_message without MPI"); }
std::vector<char> receive_block(int) { throw InternalError("receive_block without MPI"); }
bool order_waiting() { throw InternalError("order_waiting without MPI"); }
Order receive_order() { throw InternalError("receive_order without MPI"); }
void send_block(std::vector<char>) { throw InternalError("send_block without MPI"); }
void finish_sends() {}

#endif

}  // namespace flyby::simulation
