// When does an atom interact? Interaction intervals and clusters of atoms present together
// (DESIGN.md §2, issue 4 item 7).
//
// Every coupling element is a Gaussian tube: the resonator mode (axis ẑ through the origin,
// waist w0) and each side drive (its beam axis, waist w) have a transverse field envelope
// exp(−ρ²/w²). An atom interacts with an element while that envelope exceeds `cutoff`
// (default 1e-3, i.e. ρ < w √ln(1/cutoff) ≈ 2.63 w); the standing-wave factor cos(kz) is not
// part of the cutoff, because nodes are crossed, not left. The interaction interval of an atom is
// the hull [earliest entry, latest exit] over all elements. A stationary atom inside any element
// interacts for the whole run.
//
// Clusters: atoms whose intervals overlap (transitively) form one cluster, simulated as one
// joint trajectory (each atom attached at its entry, detached at its exit). Gaps between
// clusters are intervals with no atom. make_clusters is a pure function of the arrival list.
#pragma once

#include <cstdint>
#include <limits>
#include <optional>
#include <vector>

#include "models/geometry/quantization_frame.h"

namespace flyby::source {

using geometry::Vec3;

struct GaussianTube {
  Vec3 point_um = Vec3::Zero();      // a point on the axis, lab, µm
  Vec3 direction = Vec3::UnitZ();    // axis direction (normalized on use)
  double waist_um = 0.0;             // 1/e² intensity radius (field envelope exp(−ρ²/w²)), µm
};

struct Interval {
  double begin_us = -std::numeric_limits<double>::infinity();
  double end_us = std::numeric_limits<double>::infinity();
  double duration_us() const { return end_us - begin_us; }
};

// Radius at which exp(−ρ²/w²) = cutoff: w √ln(1/cutoff).
double cutoff_radius_um(double waist_um, double cutoff);

// Interval in which an atom at r0 (µm) at t_ref (µs) with velocity v (m/s = µm/µs) has some
// element envelope above cutoff; nullopt if never. Infinite ends for an atom at rest inside.
std::optional<Interval> interaction_interval(const std::vector<GaussianTube>& elements, const Vec3& r0_um,
                                             const Vec3& velocity_m_per_s, double t_ref_us, double cutoff);

struct ClusterMember {
  std::size_t atom = 0;              // index into the arrival list
  Interval interval;
};

struct Cluster {
  Interval span;                     // union hull of the members' intervals
  std::vector<ClusterMember> members;  // sorted by entry time, ties by atom index
};

// Largest number of the cluster's atoms present at the same time (sweep over entries and exits;
// an exit at the same instant as an entry is processed first). The joint Hilbert-space dimension
// of the cluster is at most (modes) × (atom dimension)^max_simultaneous — what the engine compares
// with run.max_cluster_dimension_count.
int max_simultaneous(const Cluster& cluster);

// Groups atoms with overlapping intervals. intervals[i] is atom i's interval (nullopt: never
// interacts, skipped). Two intervals that only touch (end == begin) are separate clusters.
std::vector<Cluster> make_clusters(const std::vector<std::optional<Interval>>& intervals);

}  // namespace flyby::source
