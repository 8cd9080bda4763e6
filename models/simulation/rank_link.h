// The MPI link of the simulate driver: who this process is among the ranks, and the two
// messages rank 0 and a worker rank exchange per time block (docs/simulate.md, "MPI runs").
// Without MPI at build time, or when MPI is not initialized (flyby not started by mpirun), the
// process is rank 0 of 1 and the send/receive functions are never called.
//
// Protocol, per block owned by worker w (in block order): w computes the block, and when rank 0
// asks for it ("proceed") sends its bytes; on "stop" w returns without sending. Rank 0 asks for
// the blocks in time order. Both sides compute a few of their own blocks ahead while the other
// is busy (checking for messages between blocks), so unequal blocks even out, and hold at most
// that many finished blocks (memory stays bounded); an error anywhere stops every rank after its
// current block.
#pragma once

#include <cstdint>
#include <vector>

namespace flyby::simulation {

struct RankInfo {
  int rank = 0;  // this process, 0 .. size−1
  int size = 1;  // processes in MPI_COMM_WORLD (1 without MPI)
};

// MPI_COMM_WORLD's rank and size when MPI is initialized (and not finalized), else {0, 1}.
RankInfo current_ranks();

// Rank 0: ask worker `rank` for its next block (proceed) or tell it to stop.
void send_request(int rank, bool proceed);
// Rank 0: true when worker `rank` has started sending the block it was asked for (no wait).
bool block_waiting(int rank);
// Rank 0: the bytes of the block the worker was just asked for (any size).
std::vector<char> receive_block(int rank);

// Worker: true when a request from rank 0 has arrived (no wait).
bool request_waiting();
// Worker: waits for rank 0's request; true = send the block now, false = stop.
bool wait_for_request();
// Worker: sends a block's bytes to rank 0 (any size; split into messages below 2 GiB).
void send_block(const std::vector<char>& bytes);

}  // namespace flyby::simulation
