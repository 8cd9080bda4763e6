// `flyby simulate`: assembles a checked scenario into engine trajectories (one per interaction
// cluster), runs them in parallel, adds the empty-resonator light between clusters, sends the
// merged photon stream through the detector chain and writes a time-tag record. docs/simulate.md
// describes what a run does; this header is the contract.
//
// Reproducibility: cluster trajectories draw from make_stream(seed, kTrajectory, id of the first
// atom of the cluster) (fallback sub-clusters: 2⁶³ | atom id; empty intervals: 2⁶² | interval
// index), the detector chain from make_stream(seed, kDetector, 8c + k); results are merged by
// index, so the record is bit-identical for any thread count.
#pragma once

#include <algorithm>
#include <cstdint>
#include <functional>
#include <optional>
#include <string>
#include <vector>

#include "engine/trajectory/model.h"
#include "models/config/scenario_config.h"
#include "models/detectors/detector_chain.h"

namespace flyby::simulation {

struct Options {
  // Output record path (written atomically: temporary name, renamed when complete).
  std::string output_path;
  // Lab time simulated, s, > 0; unset = run.duration_s of the config.
  std::optional<double> duration_s;
  // Master seed; unset = run.seed_id of the config.
  std::optional<std::uint64_t> seed;
  // OpenMP threads for the cluster trajectories; 0 = OpenMP default. Never changes the result.
  int threads = 0;
  // Called now and then with (trajectories done, trajectories total); on MPI rank 0 only, from
  // any thread, serialized.
  std::function<void(std::size_t, std::size_t)> progress;
  // Work items (trajectories and empty-resonator pieces) per time block — the unit handed to an
  // MPI rank, and what bounds the photons held in memory; 0 = automatic (docs/simulate.md).
  // Never changes the result.
  std::size_t block_items = 0;
};

struct ChannelSummary {
  std::string name;
  std::uint64_t photons = 0;        // photons that reached the detector (from the trajectories and empty intervals)
  std::uint64_t recorded = 0;       // tags written (incl. dark counts and afterpulses)
};

struct Summary {
  bool ok = true;                   // false: some trajectory stopped early (message says why)
  std::string message;
  std::uint64_t seed = 0;
  double duration_s = 0.0;
  std::size_t atoms = 0;            // atoms that interact during the run
  std::size_t clusters = 0;         // interaction clusters (joint trajectories planned)
  std::size_t fallback_clusters = 0;  // clusters above the dimension cap, run as single-atom sub-clusters
  // Cluster methods (docs/simulate.md, "Cluster methods"): joint trajectories on the full basis,
  // on the excitation-truncated basis (fallback_clusters above counts the independent-atom ones).
  std::size_t exact_clusters = 0;
  std::size_t truncated_clusters = 0;
  std::size_t uncoupled_clusters = 0;  // no shared mode: one exact trajectory per atom
  // Atoms-only joint trajectories with the resonator modes adiabatically eliminated (bad cavity).
  std::size_t eliminated_clusters = 0;
  // Largest validity ratio of an eliminated cluster (elimination_validity: should be ≪ 1).
  std::optional<double> elimination_ratio_max;
  std::optional<int> max_excitation;  // K used by the truncated clusters (if any)
  double excitation_leak_max = 0.0;   // largest estimated leaked norm of a truncated trajectory
  double attach_dropped_max = 0.0;    // largest norm fraction dropped when a factor was attached above K
  long pruned_levels = 0;             // unreachable sublevels left out, summed over clusters (exact)
  std::size_t trajectories = 0;     // trajectories actually integrated
  int max_simultaneous_atoms = 0;   // most atoms in one joint trajectory at one time
  long jumps = 0;                   // quantum jumps of all trajectories (detected and undetected)
  long steps = 0;                   // integrator steps (adaptive + exact evaluations)
  std::uint64_t empty_interval_photons = 0;  // Poisson photons of the driven empty resonator
  double top_fock_population_max = 0.0;
  std::vector<std::string> warnings;  // distinct warnings of the trajectories (Fock, model approximations)
  std::vector<ChannelSummary> channels;
  std::string frame_description;    // the rotating frame chosen (see docs/simulate.md)
  double wall_time_s = 0.0;
  int threads = 1;                  // OpenMP threads per rank
  int ranks = 1;                    // MPI ranks (1 without MPI)
  std::size_t blocks = 0;           // time blocks the run was cut into
  // CPU seconds (all threads) each rank spent computing its blocks (rank 0's summary only):
  // Σ / (ranks · max) is the load balance, independent of other load on the machine.
  std::vector<double> rank_compute_cpu_s;
  // Wall seconds per phase of the run, as seen by rank 0's main thread (docs/performance.md).
  // Set-up, planning, merge, detector chain and record are serial; the main thread waits while
  // the blocks are computed (by rank 0's computing thread with its OpenMP threads, and by the
  // other ranks); compute_s overlaps the other phases.
  struct PhaseTimes {
    double setup_s = 0.0;    // per-scenario matrices, detector chain and record set-up
    double plan_s = 0.0;     // arrivals, clusters, work items and blocks (on every rank)
    double wait_s = 0.0;     // waiting for the next block in time order (and receiving it)
    double merge_s = 0.0;    // per-item statistics and the time-ordered photon merge
    double detect_s = 0.0;   // detector chain
    double write_s = 0.0;    // record writer, incl. the final commit
    double compute_s = 0.0;  // this process's own blocks being computed (in the background)
  } phase_wall_s;

  std::string brief_report() const;
  std::string full_report() const;
  std::string to_json() const;      // machine-readable (units in the field names)
};

// Runs the whole simulation and writes the record (models/simulation/run_driver.cpp). Throws
// flyby::InputError on bad input (nothing is left under the output name).
//
// Time blocks and MPI: the trajectories (in order of their start time) and the empty-resonator
// pieces are cut into consecutive blocks. When MPI is initialized with more than one rank, block
// b is computed by rank b mod K; rank 0 receives the blocks in order and streams the photons,
// merged in time order, through the detector chain into the record writer, so only a few blocks
// of photons are in memory (also for one process). Every rank must call simulate() with the
// same scenario and options; the record (written by rank 0 only) is bit-identical for any rank
// and thread count. On ranks other than 0 the returned summary holds the plan only. An error on
// any rank reaches rank 0, which removes its temporary output and rethrows it; the other ranks
// stop after their current block.
Summary simulate(const config::CheckedScenario& scenario, const Options& options);

// --- pieces exposed for tests -------------------------------------------------------------

// Detuning (rad/µs, from the reference transition) of the frame every field is written in: the
// first resonator drive if there is one, else the first side drive, else 0 (resonator/reference).
double frame_detuning_rad_per_us(const config::CheckedScenario& scenario);

// Steady coherent amplitudes α_i of the two resonator modes driven by the resonator drives with
// no atom, in the frame of frame_detuning_rad_per_us at time t_us. Each drive d contributes
// −i E_d e^{−iδ_d t}/(κ + i(ω_i − ω_d)), δ_d = Δ_d − Δ_frame (exact for one drive frequency).
std::array<std::complex<double>, 2> empty_resonator_amplitudes(const config::CheckedScenario& scenario, double t_us,
                                                               const std::vector<double>& drive_levels = {});

// Photon rate per µs of each detected resonator channel (index into config.detectors order; 0
// for free-space channels) of the empty driven resonator: |Σ_i c_i α_i|².
std::vector<double> empty_resonator_rates_per_us(const config::CheckedScenario& scenario);

struct ClusterAtom {
  source::Arrival arrival;
  source::Interval interval;
};

// How one interaction cluster is integrated (docs/simulate.md, "Cluster methods").
enum class ClusterMethod {
  kExact,        // joint trajectory on the full tensor product (after exact pruning)
  kTruncated,    // joint trajectory keeping states with ≤ K excitations (weak drive; leak reported)
  kEliminated,   // atoms only, resonator modes adiabatically eliminated (bad-cavity approximation)
  kIndependent,  // every atom alone with its own copy of the modes (approximation, see the docs)
  kUncoupled,    // no resonator: atoms share no subsystem, so one trajectory per atom is exact
};
const char* to_string(ClusterMethod m);

// Basis choices of a cluster model.
struct ClusterBasis {
  // Keep only states with at most this many excitations (photons + excited atoms); unset: all.
  std::optional<int> max_excitation;
  // Leave out sublevels no operator reaches from the initial states (exact; engine
  // trajectory::prune_unreachable_levels).
  bool prune_unreachable = true;
  // Adiabatic elimination of the resonator modes (bad-cavity limit, docs/simulate.md): the basis
  // holds the atoms only; each mode's field becomes α_i(t) − S_i/(Δ_i − iκ) with S_i = Σ_j g_j A_ij.
  bool eliminate_modes = false;
};

// How well the bad-cavity elimination applies to `atoms_together` atoms (docs/simulate.md):
// the mode must follow the atoms, N g² ≪ κ² + Δ² (collective), and every atomic rate must be slow
// on the scale of κ (rate). g is the largest coupling of one atom to a mode (peak g0 times the
// largest singular value of the mode-projected lowering operator); Δ the mode's detuning from the
// frame; the atomic rates are Γ, the side-drive Rabi frequencies, the largest detuning of a
// coupled transition from the frame (Zeeman and hyperfine offsets included) and, for a beam, the
// inverse transit time 2⟨v⟩/w0 (fast atoms).
struct EliminationValidity {
  double collective_ratio = 0.0;  // N g_max² / min_i (κ² + Δ_i²)
  double rate_ratio = 0.0;        // largest atomic rate / κ
  double ratio() const { return std::max(collective_ratio, rate_ratio); }
};
EliminationValidity elimination_validity(const config::CheckedScenario& scenario, int atoms_together);
// Automatic planning picks the elimination only when ratio() is at most this (docs/simulate.md,
// measured error table: ≈ 0.01 in g2(0) ≈ 0.5 of the transmitted light, 2 %, at this ratio).
constexpr double kEliminationMaxRatio = 0.05;

struct ClusterPlan {
  ClusterMethod method = ClusterMethod::kExact;
  ClusterBasis basis;
  double dimension = 0.0;  // basis size of the joint trajectory with `atoms_together` atoms (before pruning)
  std::optional<double> validity_ratio;  // kEliminated: elimination_validity(…).ratio()
};

// Method for a cluster with at most `atoms_together` atoms present at once: without a resonator
// and without feedback rules the atoms share nothing (each has its own free-space channels) and
// run one by one (exact);
// otherwise (run.cluster_method = "auto") the full basis if
// its dimension ≤ run.max_cluster_dimension_count and run.max_excitation_count is unset; the
// excitation-truncated basis if run.max_excitation_count is set, or (with K = 2) when the full
// basis is too large; when even that exceeds the cap, the eliminated modes if the atoms-only
// basis fits and elimination_validity(…).ratio() ≤ kEliminationMaxRatio; independent atoms
// otherwise. run.cluster_method = "exact" / "truncated" / "eliminated" / "independent" forces a
// method for clusters of ≥ 2 atoms that share a resonator ("eliminated" also for single atoms;
// uncoupled atoms stay uncoupled).
ClusterPlan plan_cluster(const config::CheckedScenario& scenario, int atoms_together);

// build_cluster_model with the per-scenario atom matrices computed once (for the run driver).
struct ClusterModelBuilder {
  int atom_dimension = 0;  // sublevels per atom (+1 'lost' state when there is loss)
  // Same arguments and result as build_cluster_model; keeps a reference to the scenario.
  std::function<trajectory::Model(const std::vector<ClusterAtom>&, double, double, std::vector<int>&,
                                  const ClusterBasis&)>
      build;
  // Same as plan_cluster(scenario, atoms_together), without recomputing the atom matrices.
  std::function<ClusterPlan(int)> plan;
};

// The engine model of one cluster over [start_us, end_us): modes (if any), atoms attached at
// entry and detached at exit, Hamiltonian, channels, feedback hook. `channel_of[k]` gets, for
// engine channel k, the detector channel index or −1 when undetected. Atoms' excited sublevels
// carry one excitation, mode states n (space::Subsystem::excitation).
trajectory::Model build_cluster_model(const config::CheckedScenario& scenario, const std::vector<ClusterAtom>& atoms,
                                      double start_us, double end_us, std::vector<int>& channel_of);
trajectory::Model build_cluster_model(const config::CheckedScenario& scenario, const std::vector<ClusterAtom>& atoms,
                                      double start_us, double end_us, std::vector<int>& channel_of,
                                      const ClusterBasis& basis);
ClusterModelBuilder cluster_model_builder(const config::CheckedScenario& scenario);

}  // namespace flyby::simulation
