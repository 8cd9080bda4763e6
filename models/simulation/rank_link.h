// The MPI link of the simulate driver: who this process is among the ranks, and the messages
// rank 0 and the worker ranks exchange (docs/simulate.md, "MPI runs").
// Without MPI at build time, or when MPI is not initialized (flyby not started by mpirun), the
// process is rank 0 of 1 and the send/receive functions are never called.
//
// Protocol (dynamic hand-out of time blocks): rank 0 sends each worker the indices of blocks to
// compute ("orders"), a few ahead, so a worker never waits for rank 0 between blocks. A worker
// computes its orders first in, first out and sends each block's bytes when done (without
// waiting for rank 0 to take them); rank 0 hands the next block to whichever worker returned
// one, computes blocks itself in between, and merges the blocks in time order. At the end, or
// after an error anywhere, rank 0 sends every worker a stop order, and the worker answers with
// a closing message (no more messages follow it). Messages between two ranks arrive in the
// order they were sent (MPI's non-overtaking rule), so a block's bytes are identified by the
// order of the worker's orders.
#pragma once

#include <cstdint>
#include <optional>
#include <vector>

namespace flyby::simulation {

struct RankInfo {
  int rank = 0;  // this process, 0 .. size−1
  int size = 1;  // processes in MPI_COMM_WORLD (1 without MPI)
};

// MPI_COMM_WORLD's rank and size when MPI is initialized (and not finalized), else {0, 1}.
RankInfo current_ranks();

// An order from rank 0 to a worker.
struct Order {
  enum class Kind : std::uint8_t { kCompute, kStop, kStopAfterError } kind = Kind::kCompute;
  std::uint64_t block = 0;  // kCompute: the block to compute
};

// Rank 0: send worker `rank` an order.
void send_order(int rank, const Order& order);
// Rank 0: the worker whose next message has arrived (no wait), if any.
std::optional<int> message_waiting();
// Rank 0: waits until some worker's next message has arrived; returns that worker.
int wait_for_message();
// Rank 0: the bytes of worker `rank`'s next message (any size; waits for it).
std::vector<char> receive_block(int rank);

// Worker: true when an order from rank 0 has arrived (no wait).
bool order_waiting();
// Worker: waits for rank 0's next order.
Order receive_order();
// Worker: sends a message's bytes to rank 0 (any size; split into messages below 2 GiB)
// without waiting for rank 0 to receive them; the bytes are kept until then. The previous
// message is completed first.
void send_block(std::vector<char> bytes);
// Worker: waits until every message sent has been received (before leaving).
void finish_sends();

}  // namespace flyby::simulation
