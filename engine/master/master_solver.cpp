// Master-equation evolution of a trajectory Model through its event schedule, steady states and
// two-time correlations (quantum regression theorem).
#include "engine/master/master_solver.h"

#include <algorithm>
#include <boost/numeric/odeint.hpp>

#include "engine/common/errors.h"

namespace flyby::master {

namespace odeint = boost::numeric::odeint;
using StateVec = std::vector<double>;

namespace {

// dx/dt = (l0 + Σ_k c_k(t) K_k) x on a real-split state vector.
struct System {
  const SparseCol* l0;
  std::vector<std::pair<const operators::Coefficient*, SparseCol>>* timed;
  const std::vector<Complex>* controls;
  void operator()(const StateVec& x, StateVec& dxdt, double t) const {
    const long n = long(x.size() / 2);
    Eigen::Map<const Eigen::VectorXcd> in(reinterpret_cast<const Complex*>(x.data()), n);
    Eigen::Map<Eigen::VectorXcd> out(reinterpret_cast<Complex*>(dxdt.data()), n);
    out.noalias() = (*l0) * in;
    for (const auto& [c, k] : *timed) out.noalias() += c->value(t, *controls) * (k * in);
  }
};

std::vector<Eigen::VectorXcd> integrate(System sys, const Eigen::VectorXcd& x0, double t0,
                                        const std::vector<double>& times, const Options& o) {
  std::vector<Eigen::VectorXcd> out;
  const long n = x0.size();
  StateVec x(2 * n), xo(2 * n);
  Eigen::Map<Eigen::VectorXcd>(reinterpret_cast<Complex*>(x.data()), n) = x0;
  const double span = times.empty() ? 0.0 : times.back() - t0;
  if (!(span > 0)) {
    out.assign(times.size(), x0);
    return out;
  }
  auto stepper = odeint::make_dense_output(o.atol, o.rtol, o.max_step_us.value_or(0.0), odeint::runge_kutta_dopri5<StateVec>());
  double dt = span * 1e-3;
  if (o.max_step_us) dt = std::min(dt, *o.max_step_us);
  stepper.initialize(x, t0, dt);
  for (double t : times) {
    if (t <= t0) {
      out.push_back(x0);
      continue;
    }
    while (stepper.current_time() < t) stepper.do_step(sys);
    stepper.calc_state(t, xo);
    out.push_back(Eigen::Map<const Eigen::VectorXcd>(reinterpret_cast<const Complex*>(xo.data()), n));
  }
  return out;
}

Dense product_state(const trajectory::Model& m, space::Layout& layout) {
  space::Vector psi = space::Vector::Ones(1);
  for (const auto& f : m.initial) psi = layout.attach(f.subsystem, psi, f.state);
  return psi * psi.adjoint();
}

// ρ ⊗ |φ⟩⟨φ| (appended as the last factor, as Layout::attach does for states).
Dense attach(const Dense& rho, const space::Vector& phi) {
  const long n = rho.rows(), d = phi.size();
  Dense p = phi * phi.adjoint();
  Dense out(n * d, n * d);
  for (long i = 0; i < n; ++i)
    for (long j = 0; j < n; ++j) out.block(i * d, j * d, d, d) = rho(i, j) * p;
  return out;
}

// Partial trace over the subsystem at stride s and dimension d.
Dense partial_trace(const Dense& rho, long d, long s) {
  const long n = rho.rows(), block = d * s, outer = n / block, m = outer * s;
  Dense out = Dense::Zero(m, m);
  for (long o1 = 0; o1 < outer; ++o1)
    for (long i1 = 0; i1 < s; ++i1)
      for (long o2 = 0; o2 < outer; ++o2)
        for (long i2 = 0; i2 < s; ++i2) {
          Complex sum = 0;
          for (long a = 0; a < d; ++a) sum += rho(o1 * block + a * s + i1, o2 * block + a * s + i2);
          out(o1 * s + i1, o2 * s + i2) = sum;
        }
  return out;
}

}  // namespace

std::vector<Eigen::VectorXcd> propagate(const SparseCol& l, const Eigen::VectorXcd& x0, double t0,
                                        const std::vector<double>& times, const Options& options) {
  std::vector<std::pair<const operators::Coefficient*, SparseCol>> none;
  std::vector<Complex> controls;
  return integrate(System{&l, &none, &controls}, x0, t0, times, options);
}

MasterSolver::MasterSolver(const trajectory::Model& model, Options options) : model_(model), options_(options) {}

space::Layout MasterSolver::initial_layout() const {
  std::vector<space::SubsystemId> ids;
  for (const auto& f : model_.initial) ids.push_back(f.subsystem);
  return space::Layout(&model_.subsystems, ids);
}

SparseMatrix MasterSolver::hamiltonian(double t_us) const {
  auto layout = initial_layout();
  const long n = layout.dimension();
  SparseMatrix h(n, n);
  for (const auto& term : model_.hamiltonian.terms())
    if (term.op.active_in(layout)) h += term.coefficient.value(t_us, model_.controls) * operators::to_sparse(term.op, layout);
  return h;
}

std::vector<SparseMatrix> MasterSolver::collapse_operators() const {
  auto layout = initial_layout();
  std::vector<SparseMatrix> c;
  for (const auto& ch : model_.channels) c.push_back(operators::to_sparse(ch.at(model_.start_us, model_.controls), layout));
  return c;
}

SparseCol MasterSolver::liouvillian(double t_us) const {
  return master::liouvillian(hamiltonian(t_us), collapse_operators());
}

Dense MasterSolver::matrix(const operators::Operator& op) const {
  return Dense(operators::to_sparse(op, initial_layout()));
}

Dense MasterSolver::steady_state() const {
  for (const auto& t : model_.hamiltonian.terms())
    if (t.coefficient.time_dependent())
      throw InputError("master equation: the steady state needs a time-independent Hamiltonian");
  return master::steady_state(liouvillian(model_.start_us), initial_layout().dimension());
}

std::vector<Complex> MasterSolver::correlation(const Dense& rho, const operators::Operator& a,
                                               const operators::Operator& b,
                                               const std::vector<double>& taus_us) const {
  const Dense am = matrix(a), bm = matrix(b);
  const long n = rho.rows();
  Dense x = am * rho * am.adjoint();
  // Propagate A ρ A† scaled to unit trace so that the absolute tolerance is relative to it
  // (under weak excitation its trace can be 1e-10 and smaller); the map is linear.
  double scale = std::abs(x.trace());
  if (!(scale > 0)) scale = std::max(x.norm(), 1e-300);
  auto xs = propagate(liouvillian(model_.start_us), vec(x / scale), 0.0, taus_us, options_);
  std::vector<Complex> out;
  for (const auto& v : xs) out.push_back(scale * (bm * unvec(v, n)).trace());
  return out;
}

std::vector<double> MasterSolver::g2(int channel_a, int channel_b, const std::vector<double>& taus_us) const {
  const Dense rho = steady_state();
  const auto ca = model_.channels.at(std::size_t(channel_a)).at(model_.start_us, model_.controls);
  const auto cb = model_.channels.at(std::size_t(channel_b)).at(model_.start_us, model_.controls);
  const operators::Operator nb = cb.adjoint() * cb, na = ca.adjoint() * ca;
  const double ra = (matrix(na) * rho).trace().real(), rb = (matrix(nb) * rho).trace().real();
  auto g = correlation(rho, ca, nb, taus_us);
  std::vector<double> out;
  for (auto v : g) out.push_back(v.real() / (ra * rb));
  return out;
}

double MasterSolver::rate(int channel) const {
  const auto c = model_.channels.at(std::size_t(channel)).at(model_.start_us, model_.controls);
  return (matrix(c.adjoint() * c) * steady_state()).trace().real();
}

EvolveResult MasterSolver::evolve(const std::vector<double>& times_us,
                                  const std::vector<operators::Operator>& observables) const {
  if (!std::is_sorted(times_us.begin(), times_us.end())) throw InputError("master equation: sample times must be sorted");
  const auto& m = model_;
  space::Layout layout(&m.subsystems, {});
  Dense rho = product_state(m, layout);
  std::vector<Complex> controls = m.controls;
  std::vector<trajectory::Event> events = m.events;
  std::stable_sort(events.begin(), events.end(),
                   [](const trajectory::Event& a, const trajectory::Event& b) { return a.time_us < b.time_us; });
  EvolveResult res;
  double t = m.start_us;
  std::size_t next_sample = 0, next_event = 0;
  auto record = [&](const Dense& r, double time) {
    res.times_us.push_back(time);
    std::vector<Complex> e;
    for (const auto& o : observables) e.push_back((Dense(operators::to_sparse(o, layout)) * r).trace());
    res.expectations.push_back(std::move(e));
    res.rho.push_back(r);
    res.present.push_back(layout.present());
  };
  while (next_sample < times_us.size()) {
    const double seg_end = next_event < events.size() ? events[next_event].time_us : m.end_us;
    // Matrices of this segment.
    const long n = layout.dimension();
    SparseMatrix h(n, n);
    std::vector<std::pair<const operators::Coefficient*, SparseCol>> timed;
    for (const auto& term : m.hamiltonian.terms()) {
      if (!term.op.active_in(layout)) continue;
      SparseMatrix op = operators::to_sparse(term.op, layout);
      if (term.coefficient.time_dependent())
        timed.emplace_back(&term.coefficient, commutator_superoperator(op));
      else
        h += term.coefficient.constant_value(controls) * op;
    }
    std::vector<SparseMatrix> c;
    for (const auto& ch : m.channels) {
      for (const auto& term : ch.timed.terms())
        if (term.coefficient.time_dependent())
          throw InputError("master equation: channel '" + ch.label + "' depends on time (not supported by evolve)");
      const operators::Operator op = ch.at(t, controls);
      if (op.active_in(layout)) c.push_back(operators::to_sparse(op, layout));
    }
    SparseCol l0 = master::liouvillian(h, c);
    std::vector<double> targets;
    std::size_t k = next_sample;
    while (k < times_us.size() && times_us[k] <= seg_end) targets.push_back(times_us[k++]);
    const bool more_events = next_event < events.size();
    if (more_events) targets.push_back(seg_end);
    auto xs = integrate(System{&l0, &timed, &controls}, vec(rho), t, targets, options_);
    for (std::size_t j = 0; j + (more_events ? 1 : 0) < xs.size(); ++j) record(unvec(xs[j], n), times_us[next_sample++]);
    if (!more_events) break;
    rho = unvec(xs.back(), n);
    t = seg_end;
    while (next_event < events.size() && events[next_event].time_us <= t) {
      const auto& e = events[next_event++];
      if (auto* a = std::get_if<trajectory::Attach>(&e.action)) {
        rho = attach(rho, a->state);
        std::vector<space::SubsystemId> ids = layout.present();
        ids.push_back(a->subsystem);
        layout = space::Layout(&m.subsystems, ids);
      } else if (auto* d = std::get_if<trajectory::Detach>(&e.action)) {
        rho = partial_trace(rho, layout.dimension_of(d->subsystem), layout.stride_of(d->subsystem));
        std::vector<space::SubsystemId> ids = layout.present();
        ids.erase(std::find(ids.begin(), ids.end(), d->subsystem));
        layout = space::Layout(&m.subsystems, ids);
      } else if (auto* s = std::get_if<trajectory::SetControl>(&e.action)) {
        controls.at(std::size_t(s->control)) = s->value;
      }
    }
  }
  return res;
}

}  // namespace flyby::master
