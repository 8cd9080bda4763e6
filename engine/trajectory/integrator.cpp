// Waiting-time quantum-jump integrator: stretches, exact and adaptive propagators, root finding
// of the jump time, channel choice, events and the Fock monitor. See integrator.h.
#include "engine/trajectory/integrator.h"

#include <Eigen/Eigenvalues>
#include <algorithm>
#include <atomic>
#include <boost/math/tools/toms748_solve.hpp>
#include <boost/numeric/odeint.hpp>
#include <cmath>
#include <limits>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/trajectory/excitation_leak.h"

namespace flyby::trajectory {

using operators::SparseMatrix;
using StateVec = std::vector<double>;
namespace odeint = boost::numeric::odeint;

namespace {

constexpr Complex kI{0.0, 1.0};

// Everything fixed during one stretch: layout, control values and the matrices built from them.
struct Stretch {
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
  SparseMatrix decay;  // Σ C†C: −d‖ψ‖²/dt = ⟨ψ|Σ C†C|ψ⟩ (the exact path's Newton derivative)
  std::vector<int> channel_ids;
  std::vector<SparseMatrix> channel_ops;
  std::vector<std::pair<SubsystemId, int>> modes;  // (mode id, index of its top Fock state)
  bool exact = false;
  Eigen::MatrixXcd v, v_inv;
  Eigen::VectorXcd lambda;
  std::shared_ptr<const ExcitationLeak> leak;  // set when the layout is excitation-restricted
  Eigen::VectorXd lambda_re, lambda_im;  // Re λ, Im λ (≤ 0) of the eigenvalues of H_eff
  double lambda_scale = 0;               // max |λ|
};

}  // namespace

// Scratch vectors reused across jumps and trajectories of one thread (no allocation per jump).
struct Buffers {
  Vector coef, x, tmp, dtmp;
  std::vector<Vector> cpsi;
  std::vector<double> weights;
};

struct StretchCache {
  Buffers buffers;
  std::uint64_t owner = 0;  // Integrator::id_ of the cached entries (0: none)
  std::vector<std::shared_ptr<Stretch>> entries;  // most recently used last
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
  double last_step_us = 0;  // step the adaptive controller proposed last: the next stretch starts there

  void monitor(const Stretch& s, const Vector& psi) {
    if (s.modes.empty()) return;
    const double n2 = psi.squaredNorm();
    if (!(n2 > 0)) return;
    for (const auto& [id, top] : s.modes) {
      const double p = s.layout.local_population(id, top, psi) / n2;
      if (p > summary.top_fock_population_max) summary.top_fock_population_max = p;
    }
  }
};

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
  s->decay = decay;
  s->decay.prune(Complex(0.0));
  for (auto id : present)
    if (m.subsystems[id].kind == space::SubsystemKind::kMode) s->modes.emplace_back(id, m.subsystems[id].dimension - 1);
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
      const double cond = s->v.norm() * s->v_inv.norm() / double(n);
      s->exact = std::isfinite(cond) && cond <= opt.max_eigenvector_condition;
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
  w.coef.noalias() = s.v_inv * psi;
  const double logr = std::log(r);
  // h(τ) = ln‖ψ(τ)‖² − ln r is decreasing, with h′(τ) = −⟨ψ|Σ C†C|ψ⟩/‖ψ‖² exact from ψ(τ). For a
  // constant decay rate h is linear, so Newton's method on h converges in one or two steps.
  double nn = 0;
  auto eval = [&](double tau, double& h, double& hp) {
    for (long k = 0; k < n; ++k) {
      // e^{−iλτ} = e^{Im λ·τ} (cos(Re λ·τ) − i sin(Re λ·τ)), without the special cases of cexp.
      const double amp = std::exp(s.lambda_im[k] * tau), ph = s.lambda_re[k] * tau;
      const double cr = amp * std::cos(ph), ci = -amp * std::sin(ph);
      const Complex c = w.coef[k];
      w.x[k] = Complex(c.real() * cr - c.imag() * ci, c.real() * ci + c.imag() * cr);
    }
    w.tmp.noalias() = s.v * w.x;
    ++run.summary.exponential_evaluations;
    run.monitor(s, w.tmp);
    nn = w.tmp.squaredNorm();
    w.dtmp.noalias() = s.decay * w.tmp;
    h = std::log(nn) - logr;
    hp = -w.tmp.dot(w.dtmp).real() / nn;
  };
  const double tol = run.options->jump_time_tolerance_us;
  // Bracket [a, b] with h(a) > 0 ≥ h(b) (b unknown until found); safeguarded Newton: a step
  // outside the bracket is replaced by bisection, and before b is known by doubling.
  double a = 0;
  std::optional<double> b;
  w.dtmp.noalias() = s.decay * psi;
  const double ha0 = std::log(n0) - logr, hpa0 = -psi.dot(w.dtmp).real() / n0;
  double tau = hpa0 < 0 ? -ha0 / hpa0 : (run.last_wait_us > 0 ? run.last_wait_us : (s.lambda_scale > 0 ? 1.0 / s.lambda_scale : total));
  tau = std::min(std::max(tau, tol), total);
  for (int it = 0;; ++it) {
    double h = 0, hp = 0;
    eval(tau, h, hp);
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
    const double newton = (std::isfinite(h) && hp < 0) ? tau - h / hp : std::nan("");
    double next;
    if (b) {
      next = (newton > a && newton < *b) ? newton : 0.5 * (a + *b);
      if (*b - a <= tol) break;
    } else {
      next = newton > tau ? std::min(newton, total) : std::min(2 * tau, total);
    }
    if ((std::isfinite(newton) && std::abs(newton - tau) <= 0.5 * tol) || it >= 200) break;
    tau = next;
  }
  psi = w.tmp;
  leg.jump_us = t0 + tau;
  run.last_wait_us = tau;
  run.summary.norm_error_estimate = std::max(run.summary.norm_error_estimate, std::abs(nn - r) / r);
  return leg;
}

// out = M·in (accumulate = false) or out += φ·M·in, for a compressed row-major sparse matrix.
// Written out with real arithmetic: std::complex products call the NaN-checking __muldc3, and
// this loop is where moving atoms spend most of their time (docs/performance.md).
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
  const long n = psi.size();
  std::vector<Complex> fv(s.fns.size());
  StateVec cy(s.timed_channels.empty() ? 0 : 2 * n);  // C(t)ψ of a time-dependent channel
  auto system = [&](const StateVec& x, StateVec& dxdt, double t) {
    csr_apply(s.rhs_const, x.data(), dxdt.data(), false);
    for (std::size_t k = 0; k < fv.size(); ++k) fv[k] = (*s.fns[k])(t);
    for (const auto& g : s.timed) {
      const Complex phi = g.conjugate ? std::conj(fv[g.fn]) : fv[g.fn];
      if (phi != Complex(0.0)) csr_apply(g.rhs, x.data(), dxdt.data(), true, phi);
    }
    // −i·(−(i/2) C†C)ψ = −(1/2) C†(Cψ) for each time-dependent channel.
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
  Eigen::Map<Vector>(reinterpret_cast<Complex*>(x.data()), n) = psi;
  const Options& opt = *run.options;
  auto stepper = odeint::make_dense_output(opt.atol, opt.rtol, opt.max_step_us.value_or(0.0),
                                           odeint::runge_kutta_dopri5<StateVec>());
  double bound = s.heff_const.norm();
  for (const auto& g : s.timed) bound += std::abs((*s.fns[g.fn])(t0)) * g.norm;
  for (const auto& tc : s.timed_channels) bound += 0.5 * tc.norm;
  // Start from the step the controller reached before (a jump or an event rarely changes the
  // fastest frequency much; a too long step is simply rejected and shortened), else from a
  // conservative 1 % of the inverse norm of H_eff.
  double dt0 = std::min(t1 - t0, run.last_step_us > 0 ? run.last_step_us : 0.01 / std::max(bound, 1e-12));
  if (opt.max_step_us) dt0 = std::min(dt0, *opt.max_step_us);
  stepper.initialize(x, t0, dt0);
  StateVec xi(2 * n);
  auto norm2 = [n](const StateVec& v) {
    return Eigen::Map<const Vector>(reinterpret_cast<const Complex*>(v.data()), n).squaredNorm();
  };
  auto to_psi = [&](const StateVec& v) { psi = Eigen::Map<const Vector>(reinterpret_cast<const Complex*>(v.data()), n); };
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
  if (cache.owner != id_) {
    cache.entries.clear();
    cache.owner = id_;
  }
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
      if (e->present == layout.present() && e->controls == controls) {
        auto hit = e;
        cache.entries.erase(cache.entries.begin() + long(k));
        cache.entries.push_back(hit);
        return *cache.entries.back();
      }
    }
    auto s = build_stretch(m, opt, layout.present(), controls, t, run.summary);
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
        cpsi[k].noalias() = s.channel_ops[k] * psi;
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
