// Waiting-time quantum-jump integrator: stretches, exact and adaptive propagators, root finding
// of the jump time, channel choice, events and the Fock monitor. See integrator.h.
#include "engine/trajectory/integrator.h"

#include <Eigen/Eigenvalues>
#include <algorithm>
#include <atomic>
#include <boost/math/tools/toms748_solve.hpp>
#include <boost/numeric/odeint.hpp>
#include <cmath>
#include <cstring>
#include <limits>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/operators/content_key.h"
#include "engine/trajectory/excitation_leak.h"
#include "engine/trajectory/phase_factors.h"

namespace flyby::trajectory {

using operators::SparseMatrix;
using StateVec = std::vector<double>;
namespace odeint = boost::numeric::odeint;

namespace {

constexpr Complex kI{0.0, 1.0};

// Everything fixed during one stretch: layout, control values and the matrices built from them.
// Cache-line aligned (with its shared_ptr count, which every lookup touches) so that the
// stretches of two threads never share a line (docs/performance.md, two-level workload).
struct alignas(64) Stretch {
  std::vector<SubsystemId> present;
  std::vector<Complex> controls;
  space::Layout layout;
  SparseMatrix heff_const;  // time-independent part of H_eff = H − (i/2) Σ C†C
  // Right-hand side of dψ/dt = −i H_eff(t) ψ = R0 ψ + Σ_g φ_g(t) R_g ψ, with R0 = −i·heff_const and
  // R_g = −i Σ_{k in g} (constant·control)_k H_k summed over the terms that share one time
  // function and conjugation flag; φ_g = f(t) or conj f(t). Each distinct f is evaluated once per
  // right-hand side (fns), so c·O + c*·O† or one coupling used by two modes cost one call.
  SparseMatrix rhs_const;
  std::vector<const operators::TimeFunction*> fns;
  struct TimedGroup {
    std::size_t fn = 0;      // index into fns
    bool conjugate = false;  // φ = conj f(t)
    SparseMatrix rhs;        // R_g
    double norm = 0;         // ‖Σ (constant·control)_k H_k‖_F, for the first step size
  };
  std::vector<TimedGroup> timed;
  // Channels with a time-dependent part (channels::Channel::timed): C(t) = channel_ops[k] +
  // Σ_g φ_g(t) M_g. Their −(i/2) C†C is applied in the right-hand side as C†(Cψ), so no product
  // of two coefficients is formed; their constant part is not in heff_const / decay.
  struct TimedChannel {
    std::size_t k = 0;  // index into channel_ops / channel_ids
    std::vector<std::pair<std::size_t, bool>> fn;  // (index into fns, conjugate) per part
    std::vector<SparseMatrix> parts, parts_adj;    // M_g and M_g†
    SparseMatrix constant_adj;                     // channel_ops[k]†
    double norm = 0;                               // ‖C(t0)‖_F², for the first step size
  };
  std::vector<TimedChannel> timed_channels;
  bool timed_any() const { return !timed.empty() || !timed_channels.empty(); }
  // The same right-hand side fused into one compressed-row matrix per *sector*: a connected
  // component of the graph of R0 and every R_g (states i, j joined when some R has an (i, j)
  // entry). −i H_eff(t) never moves amplitude between sectors, so a state that is exactly zero
  // outside some sectors stays so, and the adaptive stretch integrates only the states of the
  // sectors it occupies (e.g. the two parity classes (−1)^{m + n₁ + n₂} of an atom on a π drive
  // with a resonator along B: half the states). Exact, not an approximation: the skipped
  // amplitudes are zeros, and each kept row sums the same products as the full matrix.
  struct FusedRhs {
    std::vector<int> row_start;  // compact rows, CSR offsets into the entries
    std::vector<int> col;        // compact column index
    std::vector<int> slot;       // 0: R0, g + 1: R_g (multiplied by φ_g(t))
    std::vector<double> val;     // re, re, im, im per entry (duplicated for two-lane products)
  };
  struct Sector {
    std::vector<long> states;  // full indices (increasing) of the sector's states
    FusedRhs rhs;
  };
  // Everything the matrices above were built from (stretch_signature): a later trajectory of
  // another Integrator whose stretch has the same signature reuses them, rebinding only the
  // model-owned parts (time functions, layout, truncation estimate). `owner` is the Integrator
  // the model-owned parts currently belong to.
  std::vector<double> signature;
  std::uint64_t owner = 0;
  // Every time-dependent group has a partner with the same function, the opposite conjugation
  // and the adjoint matrix, so H(t) is Hermitian for any function values (a reused stretch needs
  // no new Hermiticity check).
  bool hermitian_by_structure = false;
  std::vector<int> sector_of;       // per state
  std::vector<Sector> sectors;      // one per connected component
  Sector all;                       // every state (used when ψ occupies several sectors)
  SparseMatrix decay;  // Σ C†C: −d‖ψ‖²/dt = ⟨ψ|Σ C†C|ψ⟩ (the exact path's Newton derivative)
  std::vector<int> channel_ids;
  std::vector<SparseMatrix> channel_ops;
  std::vector<std::pair<SubsystemId, int>> modes;  // (mode id, index of its top Fock state)
  // Per mode, the increasing positions of the states with that mode in its top Fock state: the
  // Fock monitor's sum Σ |ψ_i|² after every step, in the order space::Layout::local_population
  // sums (the same bits), without its per-state index arithmetic.
  std::vector<std::vector<long>> top_fock_states;
  bool exact = false;
  Eigen::MatrixXcd v, v_inv;
  // When Σ C†C is diagonal with real entries (atoms decaying by Γ Σ_q A_q†A_q = Γ·P_e, modes by
  // 2κ a†a): the rates d_i > 0 and, for those rows only, row i of R0 = −i H_eff (compressed rows,
  // [Re, Im] per entry), so an evaluation gets ⟨ψ|Σ C†C|ψ⟩ = Σ d_i|ψ_i|² and its derivative
  // 2 Re Σ d_i ψ_i* (R0 ψ)_i without general sparse products. Empty otherwise.
  struct DiagonalDecay {
    std::vector<int> row;         // states with d_i > 0
    std::vector<double> rate;     // d_i
    std::vector<int> start, col;  // R0 entries of those rows
    std::vector<double> val;      // re, im per entry
  };
  std::optional<DiagonalDecay> diagonal_decay;
  // V in the lane layout of dense_apply (phase_factors.h), for the product V·x of every evaluation.
  std::vector<double> v_lanes;
  std::vector<double> v_inv_lanes;  // V⁻¹ the same way, for the coefficients V⁻¹ψ0 of each leg
  Eigen::VectorXcd lambda;
  std::shared_ptr<ExcitationLeak> leak;  // set when the layout is excitation-restricted
  Eigen::VectorXd lambda_re, lambda_im;  // Re λ, Im λ (≤ 0) of the eigenvalues of H_eff
  double lambda_scale = 0;               // max |λ|
};

}  // namespace

// Scratch vectors reused across jumps and trajectories of one thread (no allocation per jump).
struct Buffers {
  Vector coef, x, tmp, dtmp;
  std::vector<double> xlanes;
  std::vector<Vector> cpsi;
  std::vector<double> weights;
};

struct alignas(64) StretchCache {  // per thread, written at every lookup: own cache lines
  Buffers buffers;
  // Most recently used last. Entries of earlier Integrators stay: a new one whose stretch has
  // the same signature (e.g. the next atom of a beam, same sublevels and couplings, other
  // arrival time) reuses their matrices and decompositions.
  std::vector<std::shared_ptr<Stretch>> entries;
  static constexpr std::size_t kCapacity = 16;
};

Workspace::Workspace() : cache_(std::make_unique<StretchCache>()) {}
Workspace::~Workspace() = default;
Workspace::Workspace(Workspace&&) noexcept = default;
Workspace& Workspace::operator=(Workspace&&) noexcept = default;

const char* to_string(Status s) {
  switch (s) {
    case Status::kSuccess: return "success";
    case Status::kFockCutoffExceeded: return "Fock cutoff exceeded";
    case Status::kStepLimit: return "step limit reached";
    case Status::kNumericalFailure: return "numerical failure";
  }
  return "unknown";
}

std::string Summary::brief_report() const {
  std::ostringstream o;
  o << "trajectory: " << to_string(status) << ", " << jumps << " jumps, " << steps() << " steps, norm error "
    << norm_error_estimate << ", top Fock population " << top_fock_population_max;
  if (!message.empty()) o << " (" << message << ")";
  return o.str();
}

std::string Summary::full_report() const {
  std::ostringstream o;
  o << "status                  " << to_string(status) << "\n"
    << "message                 " << (message.empty() ? "-" : message) << "\n"
    << "end time (us)           " << end_us << "\n"
    << "jumps                   " << jumps << "\n"
    << "adaptive steps          " << adaptive_steps << "\n"
    << "exponential evaluations " << exponential_evaluations << "\n"
    << "exact stretches         " << exact_stretches << "\n"
    << "adaptive stretches      " << adaptive_stretches << "\n"
    << "eigendecompositions     " << eigendecompositions << "\n"
    << "norm error estimate     " << norm_error_estimate << "\n"
    << "top Fock population max " << top_fock_population_max << "\n";
  if (max_excitation)
    o << "max excitation          " << *max_excitation << "\n"
      << "excitation leak max     " << excitation_leak_max << "\n"
      << "attach dropped max      " << attach_dropped_max << "\n";
  for (const auto& w : warnings) o << "warning                 " << w << "\n";
  return o.str();
}

std::optional<std::string> Options::validate() const {
  auto bad = [](const char* f, const char* why) { return std::string("trajectory option ") + f + ": " + why; };
  if (!(rtol > 0 && rtol <= 0.1)) return bad("rtol", "must be in (0, 0.1]");
  if (!(atol > 0)) return bad("atol", "must be > 0");
  if (max_step_us && !(*max_step_us > 0)) return bad("max_step_us", "must be > 0");
  if (!(jump_time_tolerance_us > 0)) return bad("jump_time_tolerance_us", "must be > 0");
  if (!(max_eigenvector_condition >= 1)) return bad("max_eigenvector_condition", "must be >= 1");
  if (max_exact_dimension < 1) return bad("max_exact_dimension", "must be >= 1");
  if (!(fock_warning_population > 0 && fock_warning_population <= fock_error_population &&
        fock_error_population <= 1))
    return bad("fock_*_population", "need 0 < warning <= error <= 1");
  if (!std::is_sorted(sample_times_us.begin(), sample_times_us.end()))
    return bad("sample_times_us", "must be sorted");
  for (double t : sample_times_us)
    if (!std::isfinite(t)) return bad("sample_times_us", "must be finite");
  if (max_steps < 1) return bad("max_steps", "must be >= 1");
  return std::nullopt;
}

namespace {

// State of one running trajectory that the propagators update.
struct Run {
  const Options* options;
  Buffers* buffers;
  Summary summary;
  bool fock_warned = false;
  double last_wait_us = 0;  // previous exact waiting time: the first bracket guess
  // First guess of an exact leg's waiting time: a least-squares line τ ≈ α + β·h(0) through the
  // earlier (h(0) = ln(‖ψ0‖²/r), τ) pairs of this trajectory, weights decaying by kWaitFitDecay
  // per jump. For a driven atom that starts each wait in the ground state, τ is close to linear
  // in h(0) (a lag plus h(0)/rate), so the guess is within ≈ 10 % where the previous waiting time
  // is off by ≈ 60 % (docs/performance.md): one or two evaluations fewer per jump. Only a guess:
  // the bracketed iteration below decides the root.
  static constexpr double kWaitFitDecay = 0.98;
  double fit_w = 0, fit_x = 0, fit_y = 0, fit_xx = 0, fit_xy = 0;
  void add_wait(double h0, double tau) {
    fit_w = kWaitFitDecay * fit_w + 1;
    fit_x = kWaitFitDecay * fit_x + h0;
    fit_y = kWaitFitDecay * fit_y + tau;
    fit_xx = kWaitFitDecay * fit_xx + h0 * h0;
    fit_xy = kWaitFitDecay * fit_xy + h0 * tau;
  }
  // The fitted waiting time for h(0) = h0, or nothing before three jumps or when the h(0) seen so
  // far are too alike to give a slope.
  std::optional<double> fitted_wait(double h0) const {
    if (fit_w < 2.5) return std::nullopt;
    const double mx = fit_x / fit_w, my = fit_y / fit_w;
    const double vx = fit_xx / fit_w - mx * mx;
    if (!(vx > 1e-3 * mx * mx)) return std::nullopt;
    const double tau = my + (fit_xy / fit_w - mx * my) / vx * (h0 - mx);
    if (!(tau > 0) || !std::isfinite(tau)) return std::nullopt;
    return tau;
  }
  double last_step_us = 0;  // step the adaptive controller proposed last: the next stretch starts there

  void monitor(const Stretch& s, const Vector& psi) {
    if (s.modes.empty()) return;
    const double n2 = psi.squaredNorm();
    if (!(n2 > 0)) return;
    for (const auto& states : s.top_fock_states) {
      double sum = 0;
      for (long i : states) sum += std::norm(psi[i]);
      const double p = sum / n2;
      if (p > summary.top_fock_population_max) summary.top_fock_population_max = p;
    }
  }
};

// Connected components of the right-hand side's graph and the fused matrix of each (see Stretch).
void build_sectors(Stretch& s) {
  const long n = s.rhs_const.rows();
  std::vector<const SparseMatrix*> mats{&s.rhs_const};
  for (const auto& g : s.timed) mats.push_back(&g.rhs);
  std::vector<long> parent(static_cast<std::size_t>(n));
  for (long i = 0; i < n; ++i) parent[std::size_t(i)] = i;
  auto find = [&](long i) {
    while (parent[std::size_t(i)] != i) i = parent[std::size_t(i)] = parent[std::size_t(parent[std::size_t(i)])];
    return i;
  };
  for (const auto* m : mats)
    for (long i = 0; i < n; ++i)
      for (SparseMatrix::InnerIterator it(*m, i); it; ++it) {
        const long a = find(i), b = find(it.col());
        if (a != b) parent[std::size_t(std::max(a, b))] = std::min(a, b);
      }
  s.sector_of.assign(std::size_t(n), -1);
  std::vector<int> root_sector(std::size_t(n), -1);
  s.sectors.clear();
  for (long i = 0; i < n; ++i) {
    const long r = find(i);
    if (root_sector[std::size_t(r)] < 0) {
      root_sector[std::size_t(r)] = int(s.sectors.size());
      s.sectors.emplace_back();
    }
    s.sector_of[std::size_t(i)] = root_sector[std::size_t(r)];
    s.sectors[std::size_t(root_sector[std::size_t(r)])].states.push_back(i);
  }
  s.all.states.resize(std::size_t(n));
  for (long i = 0; i < n; ++i) s.all.states[std::size_t(i)] = i;
  // Entries of row i from every matrix, by column then slot, with compact column indices.
  std::vector<long> compact(std::size_t(n), -1);
  auto fuse = [&](Stretch::Sector& sec) {
    for (std::size_t k = 0; k < sec.states.size(); ++k) compact[std::size_t(sec.states[k])] = long(k);
    Stretch::FusedRhs& f = sec.rhs;
    f.row_start.assign(1, 0);
    struct E {
      long col;
      int slot;
      Complex v;
    };
    std::vector<E> row;
    for (long i : sec.states) {
      row.clear();
      for (std::size_t q = 0; q < mats.size(); ++q)
        for (SparseMatrix::InnerIterator it(*mats[q], i); it; ++it)
          if (it.value() != Complex(0.0)) row.push_back({compact[std::size_t(it.col())], int(q), it.value()});
      std::sort(row.begin(), row.end(), [](const E& a, const E& b) { return a.col != b.col ? a.col < b.col : a.slot < b.slot; });
      for (const auto& e : row) {
        f.col.push_back(int(e.col));
        f.slot.push_back(e.slot);
        f.val.push_back(e.v.real());
        f.val.push_back(e.v.real());
        f.val.push_back(e.v.imag());
        f.val.push_back(e.v.imag());
      }
      f.row_start.push_back(int(f.col.size()));
    }
  };
  for (auto& sec : s.sectors) fuse(sec);
  if (s.sectors.size() == 1) {
    s.all.rhs = s.sectors[0].rhs;
  } else {
    fuse(s.all);
  }
}

// What build_stretch's matrices depend on, as numbers (exact comparison, no hashing): the
// options that decide the propagator, the present subsystems and their bases, the controls, and
// every Hamiltonian term and channel active in the layout (coefficient constant, control,
// conjugation, which distinct time function — by order of first use, not identity — and the
// operator's weights and local matrices, nonzeros only).
std::vector<double> stretch_signature(const Model& m, const Options& opt, const space::Layout& layout,
                                      const std::vector<Complex>& controls) {
  std::vector<double> sig;
  auto cplx = [&](Complex c) {
    sig.push_back(c.real());
    sig.push_back(c.imag());
  };
  const auto as_is = [](space::SubsystemId id) { return double(id); };
  auto op_sig = [&](const operators::Operator& op) { operators::append_content_key(op, as_is, sig); };
  sig.push_back(opt.exact_exponential ? 1.0 : 0.0);
  sig.push_back(double(opt.max_exact_dimension));
  sig.push_back(opt.max_eigenvector_condition);
  sig.push_back(m.max_excitation ? double(*m.max_excitation) : -1.0);
  sig.push_back(double(layout.present().size()));
  for (auto id : layout.present()) {
    const auto& sub = m.subsystems[std::size_t(id)];
    sig.push_back(double(id));
    sig.push_back(sub.kind == space::SubsystemKind::kMode ? 1.0 : 0.0);
    sig.push_back(double(sub.dimension));
    for (int k = 0; k < sub.dimension; ++k) sig.push_back(double(sub.excitation_of(k)) + (sub.is_allowed(k) ? 0.0 : 0.5));
  }
  sig.push_back(double(controls.size()));
  for (auto c : controls) cplx(c);
  std::vector<const operators::TimeFunction*> fns;
  for (const auto& term : m.hamiltonian.terms()) {
    if (!term.op.active_in(layout)) continue;
    const auto& c = term.coefficient;
    cplx(c.constant);
    sig.push_back(c.control ? double(*c.control) : -1.0);
    sig.push_back(c.conjugate ? 1.0 : 0.0);
    double fi = -1.0;
    if (c.time_dependent()) {
      const auto* f = c.time_fn.get();
      fi = double(std::find(fns.begin(), fns.end(), f) - fns.begin());
      if (std::size_t(fi) == fns.size()) fns.push_back(f);
    }
    sig.push_back(fi);
    op_sig(term.op);
  }
  sig.push_back(-2.0);
  for (std::size_t k = 0; k < m.channels.size(); ++k) {
    if (!m.channels[k].op.active_in(layout)) continue;
    sig.push_back(double(k));
    op_sig(m.channels[k].op);
  }
  return sig;
}

// The distinct time functions of the terms active in `layout`, in order of first use (the
// order build_stretch numbers them in).
std::vector<const operators::TimeFunction*> stretch_time_functions(const Model& m, const space::Layout& layout) {
  std::vector<const operators::TimeFunction*> fns;
  for (const auto& term : m.hamiltonian.terms()) {
    if (!term.op.active_in(layout) || !term.coefficient.time_dependent()) continue;
    const auto* f = term.coefficient.time_fn.get();
    if (std::find(fns.begin(), fns.end(), f) == fns.end()) fns.push_back(f);
  }
  return fns;
}

// y = M·x for a compressed-row complex sparse matrix, row by row with the entries in stored
// order, in real arithmetic: the same sums as Eigen's product for finite numbers, without its
// per-product NaN checks of std::complex and the zero fill of the result (these products of the
// channel operators after each jump took a sixth of the time of small atoms).
static_assert(SparseMatrix::IsRowMajor, "sparse_apply walks rows");
void sparse_apply(const SparseMatrix& m, const Vector& x, Vector& y) {
  y.resize(m.rows());
  const int* start = m.outerIndexPtr();
  const int* nnz = m.innerNonZeroPtr();  // null when compressed
  const int* col = m.innerIndexPtr();
  const Complex* val = m.valuePtr();
  const Complex* xp = x.data();
  for (long i = 0; i < m.rows(); ++i) {
    double re = 0, im = 0;
    const int end = nnz ? start[i] + nnz[i] : start[i + 1];
    for (int k = start[i]; k < end; ++k) {
      const double vr = val[k].real(), vi = val[k].imag();
      const double xr = xp[col[k]].real(), xi = xp[col[k]].imag();
      re += vr * xr - vi * xi;
      im += vr * xi + vi * xr;
    }
    y[i] = Complex(re, im);
  }
}

// Stretch::DiagonalDecay of a decay matrix, or nothing when it has an off-diagonal or a complex
// entry.
std::optional<Stretch::DiagonalDecay> diagonal_decay(const SparseMatrix& decay, const SparseMatrix& rhs) {
  Stretch::DiagonalDecay d;
  d.start.push_back(0);
  for (long i = 0; i < decay.outerSize(); ++i) {
    double rate = 0;
    for (SparseMatrix::InnerIterator it(decay, i); it; ++it) {
      if (it.value() == Complex(0.0)) continue;
      if (it.col() != i || it.value().imag() != 0.0 || !(it.value().real() > 0)) return std::nullopt;
      rate = it.value().real();
    }
    if (rate == 0) continue;
    d.row.push_back(int(i));
    d.rate.push_back(rate);
    for (SparseMatrix::InnerIterator it(rhs, i); it; ++it) {
      d.col.push_back(int(it.col()));
      d.val.push_back(it.value().real());
      d.val.push_back(it.value().imag());
    }
    d.start.push_back(int(d.col.size()));
  }
  return d;
}

std::shared_ptr<Stretch> build_stretch(const Model& m, const Options& opt, const std::vector<SubsystemId>& present,
                                       const std::vector<Complex>& controls, double t_us, Summary& summary) {
  auto s = std::make_shared<Stretch>();
  s->present = present;
  s->controls = controls;
  s->layout = space::Layout(&m.subsystems, present, m.max_excitation);
  s->leak = ExcitationLeak::build(m, s->layout, controls);
  const long n = s->layout.dimension();
  SparseMatrix h(n, n), decay(n, n);
  std::vector<SparseMatrix> timed_h;  // Σ (constant·control)_k H_k per group, before the −i
  for (const auto& term : m.hamiltonian.terms()) {
    if (!term.op.active_in(s->layout)) continue;
    SparseMatrix op = operators::to_sparse(term.op, s->layout);
    const auto& c = term.coefficient;
    if (c.time_dependent()) {
      const operators::TimeFunction* f = c.time_fn.get();
      std::size_t fi = std::size_t(std::find(s->fns.begin(), s->fns.end(), f) - s->fns.begin());
      if (fi == s->fns.size()) s->fns.push_back(f);
      std::size_t g = 0;
      while (g < s->timed.size() && !(s->timed[g].fn == fi && s->timed[g].conjugate == c.conjugate)) ++g;
      if (g == s->timed.size()) {
        s->timed.push_back({fi, c.conjugate, SparseMatrix(n, n), 0.0});
        timed_h.push_back(SparseMatrix(n, n));
      }
      timed_h[g] += c.control_factor(controls) * op;
    } else {
      h += c.constant_value(controls) * op;
    }
  }
  for (std::size_t g = 0; g < s->timed.size(); ++g) {
    timed_h[g].prune(Complex(0.0));
    s->timed[g].norm = timed_h[g].norm();
    s->timed[g].rhs = -kI * timed_h[g];
  }
  s->hermitian_by_structure = true;
  for (std::size_t g = 0; g < s->timed.size() && s->hermitian_by_structure; ++g) {
    bool paired = false;
    for (std::size_t q = 0; q < s->timed.size() && !paired; ++q) {
      if (s->timed[q].fn != s->timed[g].fn || s->timed[q].conjugate == s->timed[g].conjugate) continue;
      const double diff = SparseMatrix(timed_h[q] - SparseMatrix(timed_h[g].adjoint())).norm();
      paired = diff <= 1e-12 * std::max(1.0, timed_h[g].norm());
    }
    s->hermitian_by_structure = paired;
  }
  // Hermiticity of H at the stretch start (a model error, not numerical trouble).
  {
    SparseMatrix ht = h;
    std::vector<Complex> fv;
    for (const auto* f : s->fns) fv.push_back((*f)(t_us));
    for (std::size_t g = 0; g < s->timed.size(); ++g) {
      const Complex phi = s->timed[g].conjugate ? std::conj(fv[s->timed[g].fn]) : fv[s->timed[g].fn];
      ht += phi * timed_h[g];
    }
    SparseMatrix adj = ht.adjoint();
    const double diff = SparseMatrix(ht - adj).norm();
    if (!(diff <= 1e-10 * std::max(1.0, ht.norm())))
      throw InputError("model Hamiltonian is not Hermitian at t = " + std::to_string(t_us) +
                       " us (||H - H^dagger|| = " + std::to_string(diff) + ")");
  }
  for (std::size_t k = 0; k < m.channels.size(); ++k) {
    const auto& ch = m.channels[k];
    if (ch.time_dependent()) {
      // Constant (incl. control-only) terms go into the constant part; each distinct time function
      // gives one part M_g.
      SparseMatrix c0 = ch.op.active_in(s->layout) ? operators::to_sparse(ch.op, s->layout) : SparseMatrix(n, n);
      Stretch::TimedChannel tc;
      bool active = ch.op.active_in(s->layout);
      for (const auto& term : ch.timed.terms()) {
        if (!term.op.active_in(s->layout)) continue;
        active = true;
        SparseMatrix op = operators::to_sparse(term.op, s->layout);
        const auto& c = term.coefficient;
        if (!c.time_dependent()) {
          c0 += c.constant_value(controls) * op;
          continue;
        }
        const operators::TimeFunction* f = c.time_fn.get();
        std::size_t fi = std::size_t(std::find(s->fns.begin(), s->fns.end(), f) - s->fns.begin());
        if (fi == s->fns.size()) s->fns.push_back(f);
        std::size_t g = 0;
        while (g < tc.fn.size() && tc.fn[g] != std::make_pair(fi, c.conjugate)) ++g;
        if (g == tc.fn.size()) {
          tc.fn.emplace_back(fi, c.conjugate);
          tc.parts.push_back(SparseMatrix(n, n));
        }
        tc.parts[g] += c.control_factor(controls) * op;
      }
      if (!active) continue;
      c0.prune(Complex(0.0));
      if (tc.parts.empty()) {
        decay += SparseMatrix(SparseMatrix(c0.adjoint()) * c0);
      } else {
        tc.k = s->channel_ops.size();
        tc.constant_adj = c0.adjoint();
        SparseMatrix at0 = c0;
        for (std::size_t g = 0; g < tc.parts.size(); ++g) {
          tc.parts[g].prune(Complex(0.0));
          tc.parts_adj.push_back(tc.parts[g].adjoint());
          const Complex f0 = (*s->fns[tc.fn[g].first])(t_us);
          at0 += (tc.fn[g].second ? std::conj(f0) : f0) * tc.parts[g];
        }
        tc.norm = at0.squaredNorm();
        s->timed_channels.push_back(std::move(tc));
      }
      s->channel_ids.push_back(int(k));
      s->channel_ops.push_back(std::move(c0));
      continue;
    }
    if (!ch.op.active_in(s->layout)) continue;
    SparseMatrix c = operators::to_sparse(ch.op, s->layout);
    decay += SparseMatrix(SparseMatrix(c.adjoint()) * c);
    s->channel_ids.push_back(int(k));
    s->channel_ops.push_back(std::move(c));
  }
  s->heff_const = h - Complex(0.0, 0.5) * decay;
  s->heff_const.prune(Complex(0.0));
  s->rhs_const = -kI * s->heff_const;
  build_sectors(*s);
  s->decay = decay;
  s->decay.prune(Complex(0.0));
  for (auto id : present)
    if (m.subsystems[id].kind == space::SubsystemKind::kMode) s->modes.emplace_back(id, m.subsystems[id].dimension - 1);
  for (const auto& [id, top] : s->modes) {
    std::vector<long> states;
    const long stride = s->layout.stride_of(id), dim = s->layout.dimension_of(id);
    for (long i = 0; i < n; ++i)
      if ((s->layout.full_index(i) / stride) % dim == top) states.push_back(i);
    s->top_fock_states.push_back(std::move(states));
  }
  if (!s->timed_any() && opt.exact_exponential && n <= opt.max_exact_dimension) {
    Eigen::MatrixXcd dense = Eigen::MatrixXcd(s->heff_const);
    Eigen::ComplexEigenSolver<Eigen::MatrixXcd> es(dense);
    ++summary.eigendecompositions;
    if (es.info() == Eigen::Success) {
      s->v = es.eigenvectors();
      s->lambda = es.eigenvalues();
      s->lambda_re = s->lambda.real();
      s->lambda_im = s->lambda.imag();
      s->lambda_scale = s->lambda.cwiseAbs().maxCoeff();
      Eigen::PartialPivLU<Eigen::MatrixXcd> lu(s->v);
      s->v_inv = lu.inverse();
      s->v_lanes = dense_lanes(s->v.data(), n);
      s->v_inv_lanes = dense_lanes(s->v_inv.data(), n);
      const double cond = s->v.norm() * s->v_inv.norm() / double(n);
      s->exact = std::isfinite(cond) && cond <= opt.max_eigenvector_condition;
      s->diagonal_decay = diagonal_decay(s->decay, s->rhs_const);
    }
  }
  return s;
}

// Result of propagating over [t0, t1] with threshold r.
struct Leg {
  std::optional<double> jump_us;
  bool failed = false;
};

struct Tolerance {
  double tol;
  bool operator()(double a, double b) const { return std::abs(b - a) <= tol; }
};

Leg propagate_exact(const Stretch& s, Run& run, Vector& psi, double t0, double t1, double r) {
  Leg leg;
  const double total = t1 - t0;
  const double n0 = psi.squaredNorm();
  if (n0 - r <= 0) {
    leg.jump_us = t0;
    return leg;
  }
  if (total <= 0) return leg;
  Buffers& w = *run.buffers;
  const long n = psi.size();
  w.coef.resize(n);
  w.x.resize(n);
  w.tmp.resize(n);
  w.dtmp.resize(n);
  dense_apply(s.v_inv_lanes.data(), n, psi.data(), w.coef.data(), w.xlanes);
  const double logr = std::log(r);
  // h(τ) = ln‖ψ(τ)‖² − ln r is decreasing, with h′(τ) = −P/‖ψ‖², P = ⟨ψ|Σ C†C|ψ⟩, exact from
  // ψ(τ), and h″ = −P′/‖ψ‖² − h′² with P′ = 2 Re⟨Σ C†C ψ|ψ′⟩, ψ′ = −i H_eff ψ: one sparse
  // product (only the decaying rows when Σ C†C is diagonal), no further exponential. For a
  // constant decay rate h is linear and the iteration converges in one or two steps.
  double nn = 0;
  auto eval = [&](double tau, double& h, double& hp, double& hpp) {
    // e^{−iλτ} = e^{Im λ·τ} (cos(Re λ·τ) − i sin(Re λ·τ)), two eigenvalues at a time.
    phase_factors(s.lambda_re.data(), s.lambda_im.data(), tau, w.coef.data(), w.x.data(), n);
    dense_apply(s.v_lanes.data(), n, w.x.data(), w.tmp.data(), w.xlanes);
    ++run.summary.exponential_evaluations;
    run.monitor(s, w.tmp);
    double p = 0, pp = 0;  // P and P′
    if (s.diagonal_decay) {
      const Stretch::DiagonalDecay& d = *s.diagonal_decay;
      const double* y = reinterpret_cast<const double*>(w.tmp.data());
      nn = 0;
      for (long i = 0; i < n; ++i) nn += y[2 * i] * y[2 * i] + y[2 * i + 1] * y[2 * i + 1];
      for (std::size_t k = 0; k < d.row.size(); ++k) {
        const long i = d.row[k];
        double ar = 0, ai = 0;  // (R0 ψ)_i
        for (int e = d.start[k]; e < d.start[k + 1]; ++e) {
          const double vr = d.val[std::size_t(2 * e)], vi = d.val[std::size_t(2 * e + 1)];
          const double xr = y[2 * d.col[std::size_t(e)]], xi = y[2 * d.col[std::size_t(e)] + 1];
          ar += vr * xr - vi * xi;
          ai += vr * xi + vi * xr;
        }
        const double yr = y[2 * i], yi = y[2 * i + 1];
        p += d.rate[k] * (yr * yr + yi * yi);
        pp += d.rate[k] * (yr * ar + yi * ai);
      }
      pp *= 2;
    } else {
      nn = w.tmp.squaredNorm();
      sparse_apply(s.decay, w.tmp, w.dtmp);
      sparse_apply(s.rhs_const, w.tmp, w.x);  // ψ′ (x is free again)
      p = w.tmp.dot(w.dtmp).real();
      pp = 2 * w.dtmp.dot(w.x).real();
    }
    h = std::log(nn) - logr;
    hp = -p / nn;
    hpp = -pp / nn - hp * hp;
  };
  const double tol = run.options->jump_time_tolerance_us;
  // Bracket [a, b] with h(a) > 0 ≥ h(b) (b unknown until found); safeguarded Halley iteration: a
  // step outside the bracket is replaced by bisection, and before b is known by doubling. The
  // first guess is the fitted waiting time (Run::fitted_wait), else Newton's step from τ = 0 or
  // the previous waiting time.
  double a = 0;
  std::optional<double> b;
  sparse_apply(s.decay, psi, w.dtmp);
  const double ha0 = std::log(n0) - logr, hpa0 = -psi.dot(w.dtmp).real() / n0;
  double tau = 0;
  if (const auto fit = run.fitted_wait(ha0))
    tau = *fit;
  else
    tau = hpa0 < 0 ? -ha0 / hpa0 : (run.last_wait_us > 0 ? run.last_wait_us : (s.lambda_scale > 0 ? 1.0 / s.lambda_scale : total));
  tau = std::min(std::max(tau, tol), total);
  for (int it = 0;; ++it) {
    double h = 0, hp = 0, hpp = 0;
    eval(tau, h, hp, hpp);
    if (!std::isfinite(nn)) {
      leg.failed = true;
      return leg;
    }
    if (h > 0) {
      a = tau;
      if (tau >= total) {  // no jump in this stretch; tmp holds ψ(total)
        psi = w.tmp;
        return leg;
      }
    } else {
      b = tau;
    }
    // Halley step τ − 2hh′/(2h′² − hh″) (cubic convergence) when its denominator is safely
    // positive (the step at most twice Newton's), else Newton's τ − h/h′ (evaluations per jump:
    // docs/performance.md).
    double step_to = std::nan("");
    if (std::isfinite(h) && hp < 0) {
      const double den = 2 * hp * hp - h * hpp;
      step_to = (std::isfinite(den) && den > hp * hp) ? tau - 2 * h * hp / den : tau - h / hp;
    }
    double next;
    if (b) {
      next = (step_to > a && step_to < *b) ? step_to : 0.5 * (a + *b);
      if (*b - a <= tol) break;
    } else {
      next = step_to > tau ? std::min(step_to, total) : std::min(2 * tau, total);
    }
    if ((std::isfinite(step_to) && std::abs(step_to - tau) <= 0.5 * tol) || it >= 200) break;
    tau = next;
  }
  psi = w.tmp;
  leg.jump_us = t0 + tau;
  run.last_wait_us = tau;
  run.add_wait(ha0, tau);
  run.summary.norm_error_estimate = std::max(run.summary.norm_error_estimate, std::abs(nn - r) / r);
  return leg;
}

// out = Σ_slot φ_slot · M_slot · in for a fused compressed-row matrix (Stretch::FusedRhs). This
// loop is where moving atoms spend most of their time (docs/performance.md), so it is written
// with two-lane vectors (GCC/Clang vector extensions, plain SSE2 on x86-64): an amplitude is one
// [re, im] lane pair, and w·x = w_r·[x_r, x_i] + w_i·[−x_i, x_r] with xs = [−x_i, x_r] formed once
// per call, so an entry costs two lane-wise products and additions with no shuffles; the slot
// factor φ scales w first (one product per lane when every φ is real, the usual case for
// Gaussian envelopes and standing waves). Lane-wise operations in a fixed order: the result does
// not depend on the vector unit. `xs` is scratch of the size of `in`.
using Lanes = double __attribute__((vector_size(16)));

Lanes load2(const double* p) {
  Lanes v;
  std::memcpy(&v, p, sizeof v);
  return v;
}

void fused_apply(const Stretch::FusedRhs& f, const Complex* phi, std::size_t slots, const double* in, double* xs,
                 double* out) {
  const long rows = long(f.row_start.size()) - 1;
  for (long j = 0; j < rows; ++j) {
    xs[2 * j] = -in[2 * j + 1];
    xs[2 * j + 1] = in[2 * j];
  }
  bool real = true;
  for (std::size_t q = 0; q < slots; ++q) real = real && phi[q].imag() == 0.0;
  const int* rs = f.row_start.data();
  const int* col = f.col.data();
  const int* slot = f.slot.data();
  const double* val = f.val.data();
  if (real) {
    double pr[64];
    const bool small = slots <= 64;
    for (std::size_t q = 0; q < slots && small; ++q) pr[q] = phi[q].real();
    for (long i = 0; i < rows; ++i) {
      Lanes a = {0, 0}, b = {0, 0};
      for (int k = rs[i]; k < rs[i + 1]; ++k) {
        const double p = small ? pr[slot[k]] : phi[slot[k]].real();
        const Lanes wr = load2(val + 4 * k) * p, wi = load2(val + 4 * k + 2) * p;
        a += wr * load2(in + 2 * col[k]);
        b += wi * load2(xs + 2 * col[k]);
      }
      std::memcpy(out + 2 * i, &(a += b), sizeof a);
    }
    return;
  }
  for (long i = 0; i < rows; ++i) {
    Lanes a = {0, 0}, b = {0, 0};
    for (int k = rs[i]; k < rs[i + 1]; ++k) {
      const double qr = phi[slot[k]].real(), qi = phi[slot[k]].imag();
      const Lanes vr = load2(val + 4 * k), vi = load2(val + 4 * k + 2);
      const Lanes wr = vr * qr - vi * qi, wi = vi * qr + vr * qi;
      a += wr * load2(in + 2 * col[k]);
      b += wi * load2(xs + 2 * col[k]);
    }
    std::memcpy(out + 2 * i, &(a += b), sizeof a);
  }
}

// out = M·in (accumulate = false) or out += φ·M·in, for a compressed row-major sparse matrix in
// real arithmetic (std::complex products call the NaN-checking __muldc3). Used for the
// time-dependent channels, which are outside the fused kernel.
void csr_apply(const SparseMatrix& m, const double* in, double* out, bool accumulate, Complex phi = 1.0) {
  const auto* outer = m.outerIndexPtr();
  const auto* inner = m.innerIndexPtr();
  const double* val = reinterpret_cast<const double*>(m.valuePtr());
  const double pr = phi.real(), pi = phi.imag();
  for (long i = 0; i < m.rows(); ++i) {
    double ar = 0, ai = 0;
    for (auto k = outer[i]; k < outer[i + 1]; ++k) {
      const double vr = val[2 * k], vi = val[2 * k + 1];
      const double xr = in[2 * inner[k]], xi = in[2 * inner[k] + 1];
      ar += vr * xr - vi * xi;
      ai += vr * xi + vi * xr;
    }
    if (accumulate) {
      out[2 * i] += pr * ar - pi * ai;
      out[2 * i + 1] += pr * ai + pi * ar;
    } else {
      out[2 * i] = ar;
      out[2 * i + 1] = ai;
    }
  }
}

Leg propagate_adaptive(const Stretch& s, Run& run, Vector& psi, double t0, double t1, double r) {
  Leg leg;
  const double g0 = psi.squaredNorm() - r;
  if (g0 <= 0) {
    leg.jump_us = t0;
    return leg;
  }
  if (t1 <= t0) return leg;
  // The sector ψ occupies (exact zeros elsewhere stay zero), or all states.
  const Stretch::Sector* sec = &s.all;
  {
    int only = -1;
    for (long i = 0; i < psi.size(); ++i) {
      if (psi[i] == Complex(0.0)) continue;
      const int c = s.sector_of[std::size_t(i)];
      if (only < 0) {
        only = c;
      } else if (c != only) {
        only = -2;
        break;
      }
    }
    // Time-dependent channels (C†C of the eliminated modes) are not in the sector graph: their
    // stretches integrate every state.
    if (only >= 0 && s.timed_channels.empty()) sec = &s.sectors[std::size_t(only)];
  }
  const bool whole = sec->states.size() == std::size_t(psi.size());
  const long n = long(sec->states.size());
  std::vector<Complex> fv(s.fns.size());
  std::vector<Complex> phi(s.timed.size() + 1, Complex(1.0));
  std::vector<double> xs(2 * std::size_t(n));
  StateVec cy(s.timed_channels.empty() ? 0 : 2 * n);  // C(t)ψ of a time-dependent channel
  auto system = [&](const StateVec& x, StateVec& dxdt, double t) {
    for (std::size_t k = 0; k < fv.size(); ++k) fv[k] = (*s.fns[k])(t);
    for (std::size_t g = 0; g < s.timed.size(); ++g)
      phi[g + 1] = s.timed[g].conjugate ? std::conj(fv[s.timed[g].fn]) : fv[s.timed[g].fn];
    fused_apply(sec->rhs, phi.data(), phi.size(), x.data(), xs.data(), dxdt.data());
    // −i·(−(i/2) C†C)ψ = −(1/2) C†(Cψ) for each time-dependent channel (whole state: `sec` is
    // `all`, compact index = full index).
    for (const auto& tc : s.timed_channels) {
      csr_apply(s.channel_ops[tc.k], x.data(), cy.data(), false);
      for (std::size_t g = 0; g < tc.parts.size(); ++g) {
        const Complex f = fv[tc.fn[g].first];
        csr_apply(tc.parts[g], x.data(), cy.data(), true, tc.fn[g].second ? std::conj(f) : f);
      }
      csr_apply(tc.constant_adj, cy.data(), dxdt.data(), true, -0.5);
      for (std::size_t g = 0; g < tc.parts.size(); ++g) {
        const Complex f = fv[tc.fn[g].first];
        csr_apply(tc.parts_adj[g], cy.data(), dxdt.data(), true, -0.5 * (tc.fn[g].second ? f : std::conj(f)));
      }
    }
  };
  StateVec x(2 * n);
  if (whole) {
    Eigen::Map<Vector>(reinterpret_cast<Complex*>(x.data()), n) = psi;
  } else {
    for (long k = 0; k < n; ++k) {
      x[std::size_t(2 * k)] = psi[sec->states[std::size_t(k)]].real();
      x[std::size_t(2 * k + 1)] = psi[sec->states[std::size_t(k)]].imag();
    }
  }
  const Options& opt = *run.options;
  auto stepper = odeint::make_dense_output(opt.atol, opt.rtol, opt.max_step_us.value_or(0.0),
                                           odeint::runge_kutta_dopri5<StateVec>());
  // Start from the step the controller reached before (a jump or an event rarely changes the
  // fastest frequency much; a too long step is simply rejected and shortened), else — the first
  // adaptive stretch of a trajectory, e.g. an atom entering — from the starting step of Hairer,
  // Nørsett & Wanner, Solving Ordinary Differential Equations I, 2nd ed., Sec. II.4 (two
  // right-hand sides; the error norm of the controller, order p = 4 of the error estimate). A
  // guess of 1 % of 1/‖H_eff‖ spent five or six steps growing by the controller's factor 5 per
  // step at every atom.
  double dt0 = run.last_step_us;
  if (!(dt0 > 0)) {
    StateVec f0(2 * n), x1(2 * n), f1(2 * n);
    system(x, f0, t0);
    double d0 = 0, d1 = 0;
    for (std::size_t i = 0; i < x.size(); ++i) {
      const double sc = opt.atol + opt.rtol * std::abs(x[i]);
      d0 = std::max(d0, std::abs(x[i]) / sc);
      d1 = std::max(d1, std::abs(f0[i]) / sc);
    }
    const double h0 = (d0 < 1e-5 || d1 < 1e-5) ? 1e-6 * (t1 - t0) : 0.01 * d0 / d1;
    for (std::size_t i = 0; i < x.size(); ++i) x1[i] = x[i] + h0 * f0[i];
    system(x1, f1, t0 + h0);
    double d2 = 0;
    for (std::size_t i = 0; i < x.size(); ++i)
      d2 = std::max(d2, std::abs(f1[i] - f0[i]) / (opt.atol + opt.rtol * std::abs(x[i])) / h0);
    const double dmax = std::max(d1, d2);
    const double h1 = dmax <= 1e-15 ? std::max(1e-6 * (t1 - t0), h0 * 1e-3) : std::pow(0.01 / dmax, 1.0 / 5.0);
    dt0 = std::min(100 * h0, h1);
  }
  dt0 = std::min(t1 - t0, dt0);
  if (opt.max_step_us) dt0 = std::min(dt0, *opt.max_step_us);
  stepper.initialize(x, t0, dt0);
  StateVec xi(2 * n);
  auto norm2 = [n](const StateVec& v) {
    return Eigen::Map<const Vector>(reinterpret_cast<const Complex*>(v.data()), n).squaredNorm();
  };
  auto to_psi = [&](const StateVec& v) {
    if (whole) {
      psi = Eigen::Map<const Vector>(reinterpret_cast<const Complex*>(v.data()), n);
    } else {
      for (long k = 0; k < n; ++k) psi[sec->states[std::size_t(k)]] = Complex(v[std::size_t(2 * k)], v[std::size_t(2 * k + 1)]);
    }
  };
  double ga = g0;
  Vector probe;
  while (true) {
    if (run.summary.adaptive_steps >= opt.max_steps) {
      run.summary.status = Status::kStepLimit;
      run.summary.message = "max_steps reached";
      leg.failed = true;
      return leg;
    }
    auto [ta, tb] = stepper.do_step(system);
    ++run.summary.adaptive_steps;
    run.last_step_us = stepper.current_time_step();
    const bool reaches_end = tb >= t1;
    const double thi = reaches_end ? t1 : tb;
    if (reaches_end) stepper.calc_state(t1, xi); else xi = stepper.current_state();
    const double ghi = norm2(xi) - r;
    if (!std::isfinite(ghi)) {
      leg.failed = true;
      return leg;
    }
    to_psi(xi);
    run.monitor(s, psi);
    if (ghi <= 0) {
      auto g = [&](double t) {
        stepper.calc_state(t, xi);
        return norm2(xi) - r;
      };
      std::uintmax_t iters = 200;
      auto [lo, hi] = boost::math::tools::toms748_solve(g, ta, thi, ga, ghi, Tolerance{opt.jump_time_tolerance_us}, iters);
      const double tj = 0.5 * (lo + hi);
      stepper.calc_state(tj, xi);
      to_psi(xi);
      leg.jump_us = tj;
      run.summary.norm_error_estimate = std::max(run.summary.norm_error_estimate, std::abs(psi.squaredNorm() - r) / r);
      return leg;
    }
    if (reaches_end) return leg;
    ga = ghi;
  }
}

}  // namespace

namespace {
std::atomic<std::uint64_t> next_integrator_id{1};
}

Integrator::Integrator(Model model, Options options)
    : model_(std::make_shared<const Model>(std::move(model))),
      options_(std::move(options)),
      id_(next_integrator_id.fetch_add(1)) {
  if (auto err = options_.validate()) throw InputError(*err);
  const Model& m = *model_;
  if (!(m.end_us > m.start_us) || !std::isfinite(m.start_us) || !std::isfinite(m.end_us))
    throw InputError("trajectory model: end_us must be finite and > start_us");
  for (const auto& s : m.subsystems) {
    if (s.dimension < 1) throw InputError("subsystem '" + s.name + "' has dimension < 1");
    if (!s.excitation.empty() &&
        (long(s.excitation.size()) != s.dimension || *std::min_element(s.excitation.begin(), s.excitation.end()) < 0))
      throw InputError("subsystem '" + s.name + "': excitation numbers must be one per basis state and >= 0");
    if (!s.allowed.empty() && long(s.allowed.size()) != s.dimension)
      throw InputError("subsystem '" + s.name + "': allowed levels must be one flag per basis state");
  }
  if (m.max_excitation && *m.max_excitation < 0) throw InputError("trajectory model: max_excitation must be >= 0");
  channels::check_channel_completeness(m.subsystems, m.channels, m.physical_decay);
  const int nsub = int(m.subsystems.size());
  std::vector<bool> present(nsub, false);
  for (const auto& f : m.initial) {
    if (f.subsystem < 0 || f.subsystem >= nsub) throw InputError("trajectory model: initial state of an unknown subsystem");
    if (present[f.subsystem]) throw InputError("trajectory model: subsystem '" + m.subsystems[f.subsystem].name + "' initially present twice");
    if (f.state.size() != m.subsystems[f.subsystem].dimension || std::abs(f.state.norm() - 1) > 1e-9)
      throw InputError("trajectory model: initial state of '" + m.subsystems[f.subsystem].name + "' must be normalized with length " +
                       std::to_string(m.subsystems[f.subsystem].dimension));
    present[f.subsystem] = true;
  }
  std::vector<Event> ev = m.events;
  std::stable_sort(ev.begin(), ev.end(), [](const Event& a, const Event& b) { return a.time_us < b.time_us; });
  for (const auto& e : ev) {
    if (!std::isfinite(e.time_us)) throw InputError("trajectory model: event time is not finite");
    if (auto* a = std::get_if<Attach>(&e.action)) {
      if (a->subsystem < 0 || a->subsystem >= nsub || present[a->subsystem])
        throw InputError("trajectory model: attach at t = " + std::to_string(e.time_us) + " us of an unknown or present subsystem");
      const auto& sub = m.subsystems[a->subsystem];
      if (a->state.size() != sub.dimension || std::abs(a->state.norm() - 1) > 1e-9)
        throw InputError("trajectory model: attach state of '" + sub.name + "' must be normalized with length " + std::to_string(sub.dimension));
      present[a->subsystem] = true;
    } else if (auto* d = std::get_if<Detach>(&e.action)) {
      if (d->subsystem < 0 || d->subsystem >= nsub || !present[d->subsystem])
        throw InputError("trajectory model: detach at t = " + std::to_string(e.time_us) + " us of an absent subsystem");
      present[d->subsystem] = false;
    } else if (auto* c = std::get_if<SetControl>(&e.action)) {
      if (c->control < 0 || c->control >= int(m.controls.size()))
        throw InputError("trajectory model: event sets an unknown control " + std::to_string(c->control));
    }
  }
  for (const auto& t : m.hamiltonian.terms())
    if (t.coefficient.control && (*t.coefficient.control < 0 || *t.coefficient.control >= int(m.controls.size())))
      throw InputError("trajectory model: a Hamiltonian term uses an unknown control");
  for (const auto& t : options_.sample_times_us)
    if (t < m.start_us || t > m.end_us) throw InputError("trajectory option sample_times_us: a time outside [start_us, end_us]");
}

TrajectoryResult Integrator::run(Rng& rng) const {
  Workspace ws;
  return run(rng, ws);
}

TrajectoryResult Integrator::run(Rng& rng, Workspace& workspace) const {
  const Model& m = *model_;
  const Options& opt = options_;
  StretchCache& cache = *workspace.cache_;
  TrajectoryResult result;
  Run run{&opt, &cache.buffers, {}};
  result.samples.assign(opt.sample_times_us.size(),
                        std::vector<Complex>(opt.observables.size(), Complex(std::nan(""), std::nan(""))));

  std::vector<SubsystemId> present;
  Vector psi = Vector::Ones(1);
  space::Layout layout(&m.subsystems, {}, m.max_excitation);
  run.summary.max_excitation = m.max_excitation;
  for (const auto& f : m.initial) {
    psi = layout.attach(f.subsystem, psi, f.state);
    run.summary.attach_dropped_max = std::max(run.summary.attach_dropped_max, layout.last_attach_dropped_fraction());
  }
  std::vector<Complex> controls = m.controls;
  Schedule schedule;
  for (const auto& e : m.events) schedule.add(e.time_us, e.action);
  JumpHook hook = m.on_jump;  // per-trajectory copy (see model.h)

  auto stretch_for = [&](double t) -> const Stretch& {
    for (std::size_t k = cache.entries.size(); k-- > 0;) {
      auto& e = cache.entries[k];
      if (e->owner == id_ && e->present == layout.present() && e->controls == controls) {
        auto hit = e;
        cache.entries.erase(cache.entries.begin() + long(k));
        cache.entries.push_back(hit);
        return *cache.entries.back();
      }
    }
    // Another Integrator's stretch with the same matrices: rebind its model-owned parts.
    space::Layout probe(&m.subsystems, layout.present(), m.max_excitation);
    std::vector<double> sig = stretch_signature(m, opt, probe, controls);
    for (std::size_t k = cache.entries.size(); k-- > 0;) {
      auto e = cache.entries[k];
      // Stretches with time-dependent channels are not shared: the signature and the rebinding
      // cover the Hamiltonian's time functions only.
      if (!e->hermitian_by_structure || !e->timed_channels.empty() || e->signature != sig) continue;
      e->owner = id_;
      e->present = layout.present();
      e->controls = controls;
      e->layout = std::move(probe);
      e->fns = stretch_time_functions(m, e->layout);
      // Equal signatures give equal leak matrices: only the time functions are the new model's.
      if (e->leak && !e->leak->rebind(m, e->layout)) e->leak = ExcitationLeak::build(m, e->layout, controls);
      cache.entries.erase(cache.entries.begin() + long(k));
      cache.entries.push_back(std::move(e));
      return *cache.entries.back();
    }
    auto s = build_stretch(m, opt, layout.present(), controls, t, run.summary);
    s->signature = std::move(sig);
    s->owner = id_;
    if (cache.entries.size() >= StretchCache::kCapacity) cache.entries.erase(cache.entries.begin());
    cache.entries.push_back(std::move(s));
    return *cache.entries.back();
  };

  double t = m.start_us;
  double r = uniform_open0(rng);
  std::size_t next_sample = 0;
  auto fail = [&](Status st, std::string msg) {
    run.summary.status = st;
    run.summary.message = std::move(msg);
  };
  const Stretch* last = nullptr;
  int zero_rate_redraws = 0;
  auto check_fock = [&]() {
    if (run.summary.top_fock_population_max > opt.fock_error_population) {
      fail(Status::kFockCutoffExceeded,
           "population of the top kept Fock state reached " + std::to_string(run.summary.top_fock_population_max) +
               " (error level " + std::to_string(opt.fock_error_population) + "); raise " + opt.fock_cutoff_setting);
      return false;
    }
    return true;
  };
  while (t < m.end_us && run.summary.ok()) {
    double stop = m.end_us;
    if (!schedule.empty()) stop = std::min(stop, std::max(t, schedule.next_time_us()));
    if (next_sample < opt.sample_times_us.size()) stop = std::min(stop, std::max(t, opt.sample_times_us[next_sample]));
    const Stretch& s = stretch_for(t);
    if (&s != last) {
      if (s.exact) ++run.summary.exact_stretches; else ++run.summary.adaptive_stretches;
      last = &s;
    }
    Leg leg = s.exact ? propagate_exact(s, run, psi, t, stop, r) : propagate_adaptive(s, run, psi, t, stop, r);
    if (leg.failed) {
      if (run.summary.ok()) fail(Status::kNumericalFailure, "non-finite state at t = " + std::to_string(t) + " us");
      break;
    }
    if (!check_fock()) break;
    if (s.leak) {
      const double p = s.leak->population(psi, leg.jump_us.value_or(stop));
      run.summary.excitation_leak_max = std::max(run.summary.excitation_leak_max, p);
    }
    if (leg.jump_us) {
      t = *leg.jump_us;
      // Channel with probability ∝ ‖C ψ‖².
      std::vector<double>& w = cache.buffers.weights;
      std::vector<Vector>& cpsi = cache.buffers.cpsi;
      w.assign(s.channel_ops.size(), 0.0);
      if (cpsi.size() < w.size()) cpsi.resize(w.size());
      double total = 0;
      for (std::size_t k = 0; k < w.size(); ++k) {
        cpsi[k].resize(psi.size());
        sparse_apply(s.channel_ops[k], psi, cpsi[k]);
      }
      for (const auto& tc : s.timed_channels)
        for (std::size_t g = 0; g < tc.parts.size(); ++g) {
          const Complex f = (*s.fns[tc.fn[g].first])(t);
          cpsi[tc.k] += (tc.fn[g].second ? std::conj(f) : f) * (tc.parts[g] * psi);
        }
      for (std::size_t k = 0; k < w.size(); ++k) {
        w[k] = cpsi[k].squaredNorm();
        total += w[k];
      }
      if (!std::isfinite(total)) {
        fail(Status::kNumericalFailure, "non-finite jump rate at t = " + std::to_string(t) + " us");
        break;
      }
      if (!(total > 0)) {
        // Only reachable when r rounds to ‖ψ‖² at a renormalized state that cannot jump (a draw
        // within 1e-16 of 1): such a state has no jump, so redraw the threshold and go on.
        if (++zero_rate_redraws > 100) {
          fail(Status::kNumericalFailure, "jump with zero total rate at t = " + std::to_string(t) + " us");
          break;
        }
        psi.normalize();
        r = uniform_open0(rng);
        continue;
      }
      const double u = uniform_open0(rng) * total;
      std::size_t pick = w.size() - 1;
      double acc = 0;
      for (std::size_t k = 0; k < w.size(); ++k) {
        acc += w[k];
        if (u <= acc && w[k] > 0) {
          pick = k;
          break;
        }
      }
      while (w[pick] <= 0) --pick;
      psi = cpsi[pick] / std::sqrt(w[pick]);
      const int channel = s.channel_ids[pick];
      result.jumps.push_back(JumpRecord{t, channel});
      ++run.summary.jumps;
      r = uniform_open0(rng);
      if (hook) {
        hook(JumpInfo{t, channel, m.channels[channel].detected}, schedule);
      }
      continue;
    }
    t = stop;
    while (next_sample < opt.sample_times_us.size() && opt.sample_times_us[next_sample] <= t) {
      for (std::size_t j = 0; j < opt.observables.size(); ++j)
        result.samples[next_sample][j] = operators::expectation(opt.observables[j], layout, psi);
      ++next_sample;
    }
    while (!schedule.empty() && schedule.next_time_us() <= t && t < m.end_us) {
      Event e = schedule.pop();
      if (auto* a = std::get_if<Attach>(&e.action)) {
        if (layout.contains(a->subsystem) || a->subsystem < 0 || a->subsystem >= int(m.subsystems.size()) ||
            a->state.size() != m.subsystems[a->subsystem].dimension)
          throw InputError("trajectory: attach at t = " + std::to_string(t) + " us of a present or unknown subsystem, or wrong state size");
        psi = layout.attach(a->subsystem, psi, a->state);
        run.summary.attach_dropped_max = std::max(run.summary.attach_dropped_max, layout.last_attach_dropped_fraction());
      } else if (auto* d = std::get_if<Detach>(&e.action)) {
        if (!layout.contains(d->subsystem))
          throw InputError("trajectory: detach at t = " + std::to_string(t) + " us of an absent subsystem");
        int outcome = 0;
        psi = layout.detach(d->subsystem, psi, rng, outcome);
        result.measurements.push_back(MeasurementRecord{t, d->subsystem, outcome});
      } else if (auto* c = std::get_if<SetControl>(&e.action)) {
        if (c->control < 0 || c->control >= int(controls.size()))
          throw InputError("trajectory: event sets an unknown control " + std::to_string(c->control));
        controls[c->control] = c->value;
      }
    }
  }
  run.summary.end_us = t;
  if (run.summary.top_fock_population_max > opt.fock_warning_population && run.summary.ok())
    run.summary.warnings.push_back("population of the top kept Fock state reached " +
                                   std::to_string(run.summary.top_fock_population_max) + " (warning level " +
                                   std::to_string(opt.fock_warning_population) + "); consider raising " +
                                   opt.fock_cutoff_setting);
  result.summary = std::move(run.summary);
  return result;
}

}  // namespace flyby::trajectory
