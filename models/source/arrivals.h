// Atom arrivals of a run: Poisson arrivals of beam atoms, or stationary atoms (DESIGN.md §2, §5).
//
// Rate. Either the flux R (atoms/s through the beam) is given, or the mean atom number N̄ in the
// mode, defined as the time-averaged number of atoms whose distance from the resonator axis is
// less than w0 (the 1/e² intensity radius, where |g| = g0/e). Atoms cross that cylinder on a
// chord 2√(w0² − b²) (impact parameter b) at transverse speed v|d⊥| (d⊥: the part of the beam
// direction perpendicular to ẑ), so N̄ = R ⟨chord⟩ ⟨1/v⟩ / |d⊥| with ⟨1/v⟩ flux-weighted;
// divergence is neglected in this conversion.
//
// Reproducibility. Lab time is cut into blocks of block_us; block k draws from
// make_stream(seed, kArrivals, k): exponential waiting times from the block start (a Poisson
// process restarted at fixed times is still Poisson), then per atom its speed, position,
// divergence and initial sublevel. Any window of the run is generated from the blocks that
// overlap it, so every thread or rank sees the same atoms. Atom id = key·2²⁴ + j with key = k
// for run blocks (k < 2³⁷) and key = 2³⁷ + n for the n-th block before t = 0 (generated so that
// atoms already in the mode at t = 0 are present).
// Stationary atoms use streams with index 2⁶² + i and are present for the whole run.
#pragma once

#include <cstdint>
#include <optional>
#include <vector>

#include "models/source/atomic_beam.h"
#include "models/source/interaction.h"

namespace flyby::source {

struct Arrival {
  std::uint64_t id = 0;              // unique within the run (see the file comment)
  double t_ref_us = 0.0;             // time of crossing the reference plane (closest approach to the mode centre)
  Vec3 position_um = Vec3::Zero();   // position at t_ref, lab, µm
  Vec3 velocity_m_per_s = Vec3::Zero();
  int initial_sublevel = 0;          // ground sublevel index (initial_populations.h)
  std::optional<Interval> interval;  // interaction interval; nullopt: never interacts
};

struct ArrivalOptions {
  double block_us = 100.0;           // length of the lab-time blocks that own a stream, µs, > 0
  double cutoff = 1e-3;              // envelope cutoff of the interaction interval, (0, 1)
};

// Mean atom number in the mode for a given flux (see the file comment); mode_waist_um = w0.
double mean_atoms_in_mode(const BeamSpec& beam, double flux_per_s, double mode_waist_um);
// Arrival rate per µs from whichever of flux / mean atom number the spec gives. Throws
// flyby::InputError when the mean atom number is given but there is no mode (waist ≤ 0).
double arrival_rate_per_us(const BeamSpec& beam, std::optional<double> mode_waist_um);

class BeamArrivals {
 public:
  // elements: the Gaussian tubes defining interaction (resonator first, then drives).
  // populations: ground-sublevel probabilities (resolve_populations).
  BeamArrivals(BeamSpec beam, double rate_per_us, std::vector<GaussianTube> elements, std::vector<double> populations,
               std::uint64_t seed, ArrivalOptions options = {});

  // All atoms of run block k ≥ 0 (covering [k·B, (k+1)·B)), in time order, with intervals.
  std::vector<Arrival> block(std::uint64_t k) const;
  // Atoms of pre-run block n ≥ 1 (covering [−n·B, −(n−1)·B)), so the run starts filled.
  std::vector<Arrival> pre_run_block(std::uint64_t n) const;
  // Atoms whose interaction interval overlaps [t0, t1) (t0 ≥ −padding), in order of t_ref.
  std::vector<Arrival> window(double t0_us, double t1_us) const;
  // How far before a window an atom can arrive and still interact in it, µs.
  double padding_us() const { return padding_us_; }
  double rate_per_us() const { return rate_per_us_; }

 private:
  BeamSpec beam_;
  BeamAxes axes_;
  double rate_per_us_;
  std::vector<GaussianTube> elements_;
  std::vector<double> populations_;
  std::uint64_t seed_;
  ArrivalOptions options_;
  double padding_us_ = 0.0;
  std::vector<Arrival> generate(std::uint64_t key, double t_start_us) const;
};

// Stationary atoms at fixed positions, present during [0, duration_us).
std::vector<Arrival> stationary_arrivals(const std::vector<Vec3>& positions_um, const std::vector<double>& populations,
                                         std::uint64_t seed, double duration_us);

}  // namespace flyby::source
