// Adiabatic estimate of the first excluded excitation shell (see excitation_leak.h).
#include "engine/trajectory/excitation_leak.h"

#include <algorithm>
#include <cmath>
#include <limits>

#include "engine/common/errors.h"

namespace flyby::trajectory {

std::unique_ptr<ExcitationLeak> ExcitationLeak::build(const Model& m, const space::Layout& layout,
                                                      const std::vector<Complex>& controls) {
  if (!layout.max_excitation()) return nullptr;
  const int K = *layout.max_excitation();
  // Shell layout: ≤ K + 1 excitations; its states with exactly K + 1 form the excluded shell.
  const space::Layout shell(&m.subsystems, layout.present(), K + 1);
  std::vector<long> out_rows;  // positions in `shell` of the K + 1 states
  for (long i = 0; i < shell.dimension(); ++i)
    if (!layout.index_of_full(shell.full_index(i))) out_rows.push_back(i);
  auto leak = std::make_unique<ExcitationLeak>();
  leak->controls_ = controls;
  const long n_out = long(out_rows.size());
  // Selection of the out rows from a shell-layout matrix.
  Sparse select(n_out, shell.dimension());
  {
    std::vector<Eigen::Triplet<Complex>> t;
    for (long k = 0; k < n_out; ++k) t.emplace_back(k, out_rows[std::size_t(k)], 1.0);
    select.setFromTriplets(t.begin(), t.end());
  }
  Sparse select_t = select.transpose();
  auto blocks = [&](const operators::Operator& op) {
    Sparse feed = select * Sparse(operators::to_sparse_between(op, layout, shell));
    Sparse full = Sparse(operators::to_sparse(op, shell));
    Sparse oo = select * full * select_t;
    return std::make_pair(feed, oo);
  };
  leak->feed_const_.resize(n_out, layout.dimension());
  leak->out_const_.resize(n_out, n_out);
  for (const auto& term : m.hamiltonian.terms()) {
    if (!term.op.active_in(shell)) continue;
    auto b = blocks(term.op);
    if (term.coefficient.time_dependent())
      leak->timed_.push_back({&term.coefficient, std::move(b)});
    else {
      const Complex c = term.coefficient.constant_value(controls);
      leak->feed_const_ += c * b.first;
      leak->out_const_ += c * b.second;
    }
  }
  // −(i/2) Σ C†C: decay never raises the excitation number, so it only enters the out block —
  // except for a time-dependent channel, which may hold a c-number (a driven mode's field that
  // was eliminated, α + ℓ): its C†C has the cross term α ℓ† that feeds the out shell.
  for (const auto& ch : m.channels) {
    if (ch.time_dependent()) {
      TimedChannel tc;
      Sparse c_shell(shell.dimension(), shell.dimension()), c_between(shell.dimension(), layout.dimension());
      auto add_part = [&](const operators::Operator& op, const operators::Coefficient& coef) {
        if (!op.active_in(shell)) return;
        Sparse a = Sparse(operators::to_sparse(op, shell)), b = Sparse(operators::to_sparse_between(op, layout, shell));
        if (coef.time_dependent()) {
          tc.parts.push_back({coef, {std::move(a), std::move(b)}});
        } else {
          const Complex v = coef.constant_value(controls);
          c_shell += v * a;
          c_between += v * b;
        }
      };
      add_part(ch.op, operators::Coefficient{});
      for (const auto& term : ch.timed.terms()) add_part(term.op, term.coefficient);
      if (tc.parts.empty()) {
        leak->feed_const_ += Complex(0.0, -0.5) * Sparse(select * Sparse(c_shell.adjoint()) * c_between);
        leak->out_const_ += Complex(0.0, -0.5) * Sparse(select * Sparse(c_shell.adjoint()) * c_shell * select_t);
      } else {
        tc.constant = {std::move(c_shell), std::move(c_between)};
        tc.select = select;
        tc.select_t = select_t;
        leak->timed_channels_.push_back(std::move(tc));
      }
      continue;
    }
    if (!ch.op.active_in(shell)) continue;
    Sparse c = Sparse(operators::to_sparse(ch.op, shell));
    Sparse ctc = Sparse(c.adjoint()) * c;
    leak->out_const_ += Complex(0.0, -0.5) * Sparse(select * ctc * select_t);
  }
  if (leak->timed_.empty() && leak->timed_channels_.empty() && n_out > 0) {
    leak->out_const_.makeCompressed();
    auto lu = std::make_shared<Eigen::SparseLU<Sparse>>();
    lu->compute(leak->out_const_);
    if (lu->info() == Eigen::Success) leak->lu_const_ = lu;
  }
  return leak;
}

bool ExcitationLeak::rebind(const Model& m, const space::Layout& layout) {
  if (!timed_channels_.empty()) return false;
  // The terms build() kept, in the same order: active in the shell (the same present subsystems
  // as `layout`, so the same terms) and time dependent.
  std::vector<const operators::Coefficient*> coefficients;
  for (const auto& term : m.hamiltonian.terms())
    if (term.op.active_in(layout) && term.coefficient.time_dependent()) coefficients.push_back(&term.coefficient);
  if (coefficients.size() != timed_.size()) return false;
  for (std::size_t k = 0; k < timed_.size(); ++k) timed_[k].first = coefficients[k];
  return true;
}

double ExcitationLeak::population(const Vector& psi, double t_us) const {
  const double n2 = psi.squaredNorm();
  if (!(n2 > 0) || out_const_.rows() == 0) return 0.0;
  Eigen::VectorXcd rhs = feed_const_ * psi;
  Sparse out = out_const_;
  for (const auto& [c, b] : timed_) {
    const Complex v = c->value(t_us, controls_);
    rhs += v * (b.first * psi);
    out += v * b.second;
  }
  for (const auto& tc : timed_channels_) {
    Sparse cs = tc.constant.first, cb = tc.constant.second;
    for (const auto& [coef, parts] : tc.parts) {
      const Complex v = coef.value(t_us, controls_);
      cs += v * parts.first;
      cb += v * parts.second;
    }
    const Sparse csa = cs.adjoint();
    rhs += Complex(0.0, -0.5) * (tc.select * (csa * (cb * psi)));
    out += Complex(0.0, -0.5) * Sparse(tc.select * csa * cs * tc.select_t);
  }
  if (rhs.squaredNorm() == 0.0) return 0.0;
  Eigen::VectorXcd c_out;
  if (lu_const_) {
    c_out = lu_const_->solve(rhs);
  } else {
    out.makeCompressed();
    const int* outer = out.outerIndexPtr();
    const int* inner = out.innerIndexPtr();
    const std::size_t cols = std::size_t(out.cols()) + 1, nnz = std::size_t(out.nonZeros());
    if (lu_outer_.size() != cols || lu_inner_.size() != nnz || !std::equal(outer, outer + cols, lu_outer_.begin()) ||
        !std::equal(inner, inner + nnz, lu_inner_.begin())) {
      lu_timed_.analyzePattern(out);
      lu_outer_.assign(outer, outer + cols);
      lu_inner_.assign(inner, inner + nnz);
    }
    lu_timed_.factorize(out);
    if (lu_timed_.info() != Eigen::Success) return std::numeric_limits<double>::infinity();
    c_out = lu_timed_.solve(rhs);
  }
  return c_out.squaredNorm() / n2;
}

}  // namespace flyby::trajectory
