// Scenario assembly: one engine model per interaction cluster (see simulation.h and
// docs/simulate.md); the run driver is in run_driver.cpp.
#include "models/simulation/simulation.h"

#include <Eigen/SVD>
#include <algorithm>
#include <cmath>
#include <limits>
#include <map>
#include <tuple>
#include <memory>
#include <sstream>

#include "engine/common/errors.h"
#include "engine/common/random.h"
#include "engine/ensemble/ensemble.h"
#include "engine/records/record_writer.h"
#include "engine/trajectory/integrator.h"
#include "engine/trajectory/reachable_levels.h"
#include "models/detectors/detector_config.h"
#include "models/scenario/atom_view.h"
#include "models/source/speed_distribution.h"

namespace flyby::simulation {

namespace {

using Complex = std::complex<double>;
using operators::Coefficient;
using operators::LocalMatrix;
using operators::Operator;

constexpr double kTwoPi = 6.283185307179586;
// Couplings between a ground and an excited hyperfine level whose zero-field transition is more
// than this far from the reference transition are left out (and such uncoupled levels are put at
// zero hyperfine energy in the frame, so the integrator's step is not set by a GHz phase). Light
// shifts neglected by this are ≤ Ω²/(4Δ): 25 kHz for Ω/2π = 10 MHz at Δ/2π = 1 GHz.
constexpr double kFarDetuningMHz = 1000.0;

// Per-atom matrices shared by every atom of a scenario.
struct AtomMatrices {
  int dim = 0;                       // sublevels (+1 for the 'lost' state when there is loss)
  bool has_lost = false;
  std::array<LocalMatrix, 3> lowering;       // A_q (dim × dim), for decay and detection
  std::array<LocalMatrix, 3> coupling;       // A_q with far-detuned pairs removed, for H
  std::vector<double> frame_offset;          // energy subtracted per sublevel (far levels)
  std::vector<bool> excited;
  std::vector<double> loss;                  // loss fraction per sublevel
  std::vector<double> zero_field;            // reference-frame energies at B = 0
  LocalMatrix decay;                         // Σ_q A_q†A_q (times Γ: the atom's physical decay)
  std::vector<LocalMatrix> free_space;       // Σ_q c_q A_q per free-space detector channel
};

// Sublevel energies in the reference frame at B = 0 (the hyperfine offsets).
std::vector<double> zero_field_energies(const config::CheckedScenario& s) {
  if (!s.energies_zero_field_rad_per_us.empty()) return s.energies_zero_field_rad_per_us;
  const auto& c = s.config.atom;
  levels::LevelStructure zero = c.custom ? [&] {
    levels::CustomAtom a = c.custom_atom;
    a.field_G = 0.0;
    return levels::LevelStructure::from_custom(a);
  }() : [&] {
    levels::LevelRequest req = c.request;
    req.field_G = 0.0;
    return levels::LevelStructure::from_species(req);
  }();
  return config::reference_frame_energies(zero, c.reference_ground_2F, c.reference_excited_2F);
}

AtomMatrices atom_matrices(const config::CheckedScenario& s) {
  const auto& L = s.levels;
  const int n = L.dimension();
  AtomMatrices m;
  double total_loss = 0.0;
  for (int i = 0; i < n; ++i) total_loss += L.loss_fraction(i);
  m.has_lost = total_loss > 0.0;
  m.dim = n + (m.has_lost ? 1 : 0);
  const auto& sub = L.sublevels();
  const std::vector<double> e0 = zero_field_energies(s);
  // Zero-field transition offsets from the reference, per (ground 2F, excited 2F′).
  std::map<int, double> ground_e0, excited_e0;
  for (int i = 0; i < n; ++i) {
    // centre of the hyperfine level at zero field (mean over m is the level's zero-field energy)
    (sub[i].excited ? excited_e0 : ground_e0)[sub[i].two_F] = e0[i];
  }
  auto far = [&](int g, int e) {
    const double d = excited_e0[sub[e].two_F] - ground_e0[sub[g].two_F];
    return std::abs(d) > kTwoPi * kFarDetuningMHz;
  };
  std::vector<bool> coupled(n, false);
  for (int q = -1; q <= 1; ++q) {
    LocalMatrix A = LocalMatrix::Zero(m.dim, m.dim), C = LocalMatrix::Zero(m.dim, m.dim);
    const Eigen::MatrixXd& a = L.lowering(q);
    for (int g = 0; g < n; ++g)
      for (int e = 0; e < n; ++e) {
        if (a(g, e) == 0.0) continue;
        A(g, e) = a(g, e);
        if (!far(g, e)) {
          C(g, e) = a(g, e);
          coupled[g] = coupled[e] = true;
        }
      }
    m.lowering[q + 1] = A;
    m.coupling[q + 1] = C;
  }
  m.zero_field = e0;
  m.frame_offset.assign(m.dim, 0.0);
  m.excited.assign(m.dim, false);
  m.loss.assign(m.dim, 0.0);
  // A hyperfine level with no coupling left is shifted to zero hyperfine energy (exact: nothing
  // connects its amplitudes coherently to the rest any more; Zeeman splittings inside it stay).
  std::map<std::pair<bool, int>, bool> level_coupled;
  for (int i = 0; i < n; ++i) level_coupled[{sub[i].excited, sub[i].two_F}] |= coupled[i];
  for (int i = 0; i < n; ++i) {
    m.excited[i] = sub[i].excited;
    m.loss[i] = L.loss_fraction(i);
    if (!level_coupled[{sub[i].excited, sub[i].two_F}]) m.frame_offset[i] = e0[i];
  }
  // The same for every atom of the scenario: formed once here, not in each cluster model.
  m.decay = LocalMatrix::Zero(m.dim, m.dim);
  for (int q = 0; q < 3; ++q) m.decay += m.lowering[q].adjoint() * m.lowering[q];
  for (const auto& ch : s.free_space_channels) {
    LocalMatrix C = LocalMatrix::Zero(m.dim, m.dim);
    for (int q = 0; q < 3; ++q) C += ch.coefficients(q) * m.lowering[q];
    m.free_space.push_back(std::move(C));
  }
  return m;
}

std::string atom_label(const source::Arrival& a) { return "atom " + std::to_string(a.id); }

// Coherent state of a truncated mode (normalized after truncation).
space::Vector coherent_state(Complex alpha, int cutoff) {
  space::Vector v(cutoff + 1);
  Complex c = std::exp(-0.5 * std::norm(alpha));
  for (int n = 0; n <= cutoff; ++n) {
    v(n) = c;
    c *= alpha / std::sqrt(double(n + 1));
  }
  return v / v.norm();
}

LocalMatrix annihilation(int cutoff) {
  LocalMatrix a = LocalMatrix::Zero(cutoff + 1, cutoff + 1);
  for (int n = 1; n <= cutoff; ++n) a(n - 1, n) = std::sqrt(double(n));
  return a;
}

bool is_static(const source::Arrival& a, const config::CheckedScenario& s) {
  return a.velocity_m_per_s.norm() == 0.0 && !s.config.field.gradient_G_per_mm.has_value();
}

}  // namespace

double frame_detuning_rad_per_us(const config::CheckedScenario& s) {
  if (!s.config.resonator_drives.empty()) return kTwoPi * s.config.resonator_drives.front().detuning_MHz;
  if (!s.config.side_drives.empty()) return kTwoPi * s.config.side_drives.front().detuning_MHz;
  return 0.0;
}

std::array<Complex, 2> empty_resonator_amplitudes(const config::CheckedScenario& s, double t_us,
                                                  const std::vector<double>& levels) {
  std::array<Complex, 2> alpha{0.0, 0.0};
  if (!s.resonator) return alpha;
  const double frame = frame_detuning_rad_per_us(s);
  const auto& R = *s.resonator;
  for (std::size_t d = 0; d < s.config.resonator_drives.size(); ++d) {
    const auto& drv = s.config.resonator_drives[d];
    const double E = s.resonator_drive_amplitude_rad_per_us[d] * (d < levels.size() ? levels[d] : 1.0);
    const double wd = kTwoPi * drv.detuning_MHz;
    const int i = drv.mode;
    const Complex phase = std::exp(Complex(0.0, -(wd - frame) * t_us));
    alpha[i] += Complex(0.0, -E) * phase / Complex(R.kappa_rad_per_us, R.detuning_rad_per_us[i] - wd);
  }
  return alpha;
}

std::vector<double> empty_resonator_rates_per_us(const config::CheckedScenario& s) {
  std::vector<double> rates(s.config.detectors.size(), 0.0);
  if (!s.resonator) return rates;
  const auto alpha = empty_resonator_amplitudes(s, 0.0);
  for (const auto& ch : s.resonator->channels) {
    if (!ch.detected) continue;
    for (std::size_t c = 0; c < s.config.detectors.size(); ++c)
      if (s.config.detectors[c].channel == ch.channel)
        rates[c] += std::norm(ch.coefficients(0) * alpha[0] + ch.coefficients(1) * alpha[1]);
  }
  return rates;
}

namespace {
trajectory::Model build_model(const config::CheckedScenario& s, const AtomMatrices& A,
                              const std::vector<ClusterAtom>& atoms, double start_us, double end_us,
                              std::vector<int>& channel_of, const ClusterBasis& basis = {});

// Basis size with k atoms together: full product, or the states with ≤ K excitations —
// Σ_j C(k, j) x^j y^(k−j) · #{(n1, n2) ≤ cutoff: n1 + n2 ≤ K − j}, x (y) the excited (other)
// sublevels per atom.
double cluster_dimension(const config::CheckedScenario& s, const AtomMatrices& A, int k, std::optional<int> K,
                         bool with_modes = true) {
  const int cut = s.resonator ? s.resonator->fock_cutoff : 0;
  const int modes = s.resonator && with_modes ? 2 : 0;
  if (!K) return std::pow(double(cut + 1), modes) * std::pow(double(A.dim), k);
  double x = 0;
  for (bool e : A.excited) x += e;
  const double y = A.dim - x;
  auto photon_states = [&](int budget) {
    if (budget < 0) return 0.0;
    if (modes == 0) return 1.0;
    double n = 0;
    for (int n1 = 0; n1 <= std::min(cut, budget); ++n1) n += std::min(cut, budget - n1) + 1;
    return n;
  };
  double total = 0, binom = 1;
  for (int j = 0; j <= std::min(k, *K); ++j) {
    total += binom * std::pow(x, j) * std::pow(y, k - j) * photon_states(*K - j);
    binom = binom * (k - j) / (j + 1);
  }
  return total;
}

EliminationValidity validity(const config::CheckedScenario& s, const AtomMatrices& A, int k) {
  EliminationValidity v;
  if (!s.resonator) return v;
  const auto& R = *s.resonator;
  const double kappa = R.kappa_rad_per_us, frame = frame_detuning_rad_per_us(s);
  // Largest coupling of one atom to one mode: g0 × the largest singular value of Σ_q w_iq A_q.
  const auto w = R.mode_weights(s.frame);
  double g_max = 0.0;
  for (int i = 0; i < 2; ++i) {
    LocalMatrix down = LocalMatrix::Zero(A.dim, A.dim);
    for (int q = 0; q < 3; ++q) down += std::conj(w[i][q]) * A.coupling[q];
    Eigen::JacobiSVD<LocalMatrix> svd(down);
    if (svd.singularValues().size() > 0) g_max = std::max(g_max, R.g0_rad_per_us * svd.singularValues()(0));
  }
  double denom = std::numeric_limits<double>::infinity();
  for (int i = 0; i < 2; ++i) {
    const double d = R.detuning_rad_per_us[i] - frame;
    denom = std::min(denom, kappa * kappa + d * d);
  }
  v.collective_ratio = double(std::max(k, 1)) * g_max * g_max / denom;
  // Atomic rates: Γ, side-drive Rabi frequencies, detunings of coupled transitions from the frame.
  double rate = s.levels.gamma_rad_per_us();
  for (double om : s.side_drive_rabi_rad_per_us) rate = std::max(rate, std::abs(om));
  const auto E = scenario::reference_frame_energies_rad_per_us(s);
  for (int q = 0; q < 3; ++q)
    for (int g = 0; g < int(E.size()); ++g)
      for (int e = 0; e < int(E.size()); ++e)
        if (A.coupling[q](g, e) != Complex(0.0))
          rate = std::max(rate, std::abs((E[e] - A.frame_offset[e] - frame) - (E[g] - A.frame_offset[g])));
  if (s.config.source.kind == config::SourceKind::kBeam && R.waist_um > 0)
    rate = std::max(rate, 2.0 * source::mean_speed_m_per_s(s.config.source.beam.speed) / R.waist_um);
  v.rate_ratio = rate / kappa;
  return v;
}

ClusterPlan plan(const config::CheckedScenario& s, const AtomMatrices& A, int k) {
  ClusterPlan p;
  const double cap = double(s.config.run.max_cluster_dimension);
  const auto& K = s.config.run.max_excitation;
  using Choice = config::ClusterMethodChoice;
  const Choice choice = s.config.run.cluster_method;
  // Without a resonator and without feedback (a click switching a drive that all atoms see),
  // nothing couples the atoms of a cluster.
  if (!s.resonator && s.config.feedback.empty() && k > 1) {
    p.method = ClusterMethod::kUncoupled;
    p.basis.max_excitation = K;
    p.dimension = cluster_dimension(s, A, 1, K);
    return p;
  }
  auto eliminated = [&](std::optional<int> K_atoms) {
    ClusterPlan e;
    e.method = ClusterMethod::kEliminated;
    e.basis.eliminate_modes = true;
    e.basis.max_excitation = K_atoms;
    e.dimension = cluster_dimension(s, A, k, K_atoms, false);
    e.validity_ratio = validity(s, A, k).ratio();
    return e;
  };
  // A forced method applies to joint clusters; the elimination also to single atoms (it removes
  // the modes from the basis whatever the atom number).
  if ((k > 1 || choice == Choice::kEliminated) && choice != Choice::kAuto) {
    switch (choice) {
      case Choice::kExact:
        p.dimension = cluster_dimension(s, A, k, std::nullopt);
        return p;
      case Choice::kTruncated:
        p.method = ClusterMethod::kTruncated;
        p.basis.max_excitation = K.value_or(config::RunConfig::kDefaultMaxExcitation);
        p.dimension = cluster_dimension(s, A, k, p.basis.max_excitation);
        return p;
      case Choice::kEliminated:
        if (s.resonator) return eliminated(K);
        break;
      case Choice::kIndependent:
        p.method = ClusterMethod::kIndependent;
        p.basis.max_excitation = K;
        p.dimension = cluster_dimension(s, A, 1, K);
        return p;
      case Choice::kAuto: break;
    }
  }
  if (!K) {
    p.dimension = cluster_dimension(s, A, k, std::nullopt);
    if (p.dimension <= cap || k <= 1) return p;
  }
  p.method = ClusterMethod::kTruncated;
  p.basis.max_excitation = K.value_or(config::RunConfig::kDefaultMaxExcitation);
  p.dimension = cluster_dimension(s, A, k, p.basis.max_excitation);
  if (p.dimension <= cap || k <= 1) return p;
  if (s.resonator) {
    // Above the cap even with the truncation: the eliminated modes where they are valid, with the
    // atoms' full basis if it fits, else truncated over the atoms.
    ClusterPlan e = eliminated(K);
    if (!K && e.dimension > cap) e = eliminated(config::RunConfig::kDefaultMaxExcitation);
    if (e.dimension <= cap && *e.validity_ratio <= kEliminationMaxRatio) return e;
  }
  p.method = ClusterMethod::kIndependent;
  p.basis = {};
  p.dimension = cluster_dimension(s, A, 1, K);
  if (K) p.basis.max_excitation = K;
  return p;
}
}  // namespace

const char* to_string(ClusterMethod m) {
  switch (m) {
    case ClusterMethod::kExact: return "exact";
    case ClusterMethod::kTruncated: return "truncated";
    case ClusterMethod::kEliminated: return "eliminated";
    case ClusterMethod::kIndependent: return "independent";
    case ClusterMethod::kUncoupled: return "uncoupled";
  }
  return "unknown";
}

ClusterPlan plan_cluster(const config::CheckedScenario& s, int atoms_together) {
  return plan(s, atom_matrices(s), atoms_together);
}

EliminationValidity elimination_validity(const config::CheckedScenario& s, int atoms_together) {
  return validity(s, atom_matrices(s), atoms_together);
}

trajectory::Model build_cluster_model(const config::CheckedScenario& s, const std::vector<ClusterAtom>& atoms,
                                      double start_us, double end_us, std::vector<int>& channel_of) {
  return build_model(s, atom_matrices(s), atoms, start_us, end_us, channel_of);
}

trajectory::Model build_cluster_model(const config::CheckedScenario& s, const std::vector<ClusterAtom>& atoms,
                                      double start_us, double end_us, std::vector<int>& channel_of,
                                      const ClusterBasis& basis) {
  return build_model(s, atom_matrices(s), atoms, start_us, end_us, channel_of, basis);
}

ClusterModelBuilder cluster_model_builder(const config::CheckedScenario& s) {
  auto A = std::make_shared<const AtomMatrices>(atom_matrices(s));
  ClusterModelBuilder b;
  b.atom_dimension = A->dim;
  b.build = [&s, A](const std::vector<ClusterAtom>& atoms, double start_us, double end_us, std::vector<int>& channel_of,
                    const ClusterBasis& basis) { return build_model(s, *A, atoms, start_us, end_us, channel_of, basis); };
  b.plan = [&s, A](int atoms_together) { return plan(s, *A, atoms_together); };
  return b;
}

namespace {

// An atom of a cluster whose resonator modes are eliminated.
struct CoupledAtom {
  space::SubsystemId id;
  Coefficient g;                    // g_j(t): the exact builder's term g·(a_i ⊗ up_ij) + h.c.
  std::array<LocalMatrix, 2> down;  // up_ij† = Σ_q w_iq* A_q per mode i; S_i = Σ_j g_j* down_ij
};

// Products of two coefficients (the G†G terms). At most one factor may carry a control. The time
// functions of the factors are multiplied into one new shared function, cached per pair, so that
// every term with the same pair (both modes, c·O and its conjugate) shares it and the integrator
// evaluates it once per right-hand side; a product with a constant keeps the factor's function.
class CoefficientProducts {
 public:
  Coefficient operator()(const Coefficient& a, const Coefficient& b) {
    FLYBY_CHECK(!(a.control && b.control), "product of two coefficients with controls");
    const Coefficient& x = b.control ? b : a;
    Coefficient r;
    r.constant = a.constant * b.constant;
    r.control = x.control;
    r.conjugate = x.control ? x.conjugate : false;
    // value(r) = constant·(conj_r ? conj(F·u) : F·u) must equal a.constant·b.constant·e_a·e_b·u′,
    // e = f or conj f as the factor's flag says, u′ the control as x sees it: F = e_a·e_b or
    // its conjugate when conj_r.
    const bool fa = bool(a.time_fn), fb = bool(b.time_fn);
    if (!fa && !fb) return r;
    if (fa != fb) {
      const Coefficient& y = fa ? a : b;
      if (y.conjugate == r.conjugate) {
        r.time_fn = y.time_fn;
        return r;
      }
    }
    const auto key = std::make_tuple(a.time_fn.get(), fa && a.conjugate, b.time_fn.get(), fb && b.conjugate, r.conjugate);
    auto it = cache_.find(key);
    if (it == cache_.end()) {
      operators::SharedTimeFunction f1 = a.time_fn, f2 = b.time_fn;
      const bool c1 = a.conjugate, c2 = b.conjugate, cr = r.conjugate;
      auto fn = std::make_shared<const operators::TimeFunction>([f1, f2, c1, c2, cr](double t) {
        Complex v{1.0, 0.0};
        if (f1) v *= c1 ? std::conj((*f1)(t)) : (*f1)(t);
        if (f2) v *= c2 ? std::conj((*f2)(t)) : (*f2)(t);
        return cr ? std::conj(v) : v;
      });
      it = cache_.emplace(key, std::move(fn)).first;
    }
    r.time_fn = it->second;
    return r;
  }

 private:
  std::map<std::tuple<const void*, bool, const void*, bool, bool>, operators::SharedTimeFunction> cache_;
};

Coefficient scaled(Coefficient c, Complex s) {
  c.constant *= s;
  return c;
}

// Adiabatic elimination of both resonator modes (bad-cavity limit; docs/simulate.md, "Cluster
// methods"). Mode i: H_eff,i = (Δ_i − iκ) a_i†a_i + G_i†a_i + a_i†G_i with G_i = η_i(t) + S_i, η_i
// the resonator drives and S_i = Σ_j g_j* down_ij (exactly the exact builder's coupling). Setting
// da_i/dt = 0 gives a_i → F_i = α_i(t) + ℓ_i, ℓ_i = −S_i/(Δ_i − iκ), with α_i(t) = Σ_d −E_d
// e^{−iδ_d t}/(Δ_i − δ_d − iκ) the empty driven mode of empty_resonator_amplitudes (each drive
// frequency with its own response, so two drives stay exact); the atoms' effective
// non-Hermitian Hamiltonian gains −G_i†G_i/(Δ_i − iκ). Split as the engine needs it:
//   channels  C = Σ_i c_i F_i (each resonator channel projects the two eliminated fields as it
//             projected a_1, a_2, so Σ C†C = Σ_i 2κ F_i†F_i and the atoms' fields interfere);
//   H         −Δ_i/(Δ_i² + κ²) S_i†S_i + [α_i* Δ_i/(Δ_i − iκ) S_i + h.c.],
// which with −(i/2) Σ C†C gives back −G_i†G_i/(Δ_i − iκ) for one drive frequency (the −(i/2)
// cross terms α_i* ℓ_i of C†C carry the resonant drive of the atoms; at Δ_i = 0 H has no mode
// term at all).
void add_eliminated_modes(const config::CheckedScenario& s, trajectory::Model& m, const std::vector<CoupledAtom>& atoms,
                          double frame, int n_side,
                          const std::function<void(const std::string&, bool, Operator)>& add_channel) {
  const auto& R = *s.resonator;
  const double kappa = R.kappa_rad_per_us;
  CoefficientProducts product;
  // Drive terms of α_i(t), per mode: coefficient (with the drive's control) of the identity.
  std::array<std::vector<Coefficient>, 2> alpha;
  for (int d = 0; d < int(s.config.resonator_drives.size()); ++d) {
    const auto& drv = s.config.resonator_drives[std::size_t(d)];
    const int i = drv.mode;
    const double E = s.resonator_drive_amplitude_rad_per_us[std::size_t(d)];
    const double delta = kTwoPi * drv.detuning_MHz - frame;
    const Complex amp = -E / Complex(R.detuning_rad_per_us[i] - frame - delta, -kappa);
    alpha[std::size_t(i)].push_back(
        delta == 0.0 ? Coefficient::of_control(n_side + d, amp)
                     : Coefficient::of_control(n_side + d, amp, [delta](double t) { return std::exp(Complex(0.0, -delta * t)); }));
  }
  for (int i = 0; i < 2; ++i) {
    const double D = R.detuning_rad_per_us[i] - frame;
    const Complex denom(D, -kappa);
    if (D == 0.0) continue;
    const double h = -D / (D * D + kappa * kappa);
    for (std::size_t j = 0; j < atoms.size(); ++j) {
      const auto& aj = atoms[j];
      const LocalMatrix& dj = aj.down[std::size_t(i)];
      if (dj.norm() == 0.0) continue;
      const LocalMatrix uj = dj.adjoint();
      // S_i†S_i = Σ_jk g_j g_k* up_ij down_ik: diagonal terms real, pairs as c·O + h.c.
      m.hamiltonian.add(scaled(product(aj.g, aj.g.conj()), h), Operator::local(aj.id, uj * dj));
      for (std::size_t k = j + 1; k < atoms.size(); ++k) {
        const auto& ak = atoms[k];
        const LocalMatrix& dk = ak.down[std::size_t(i)];
        if (dk.norm() == 0.0) continue;
        m.hamiltonian.add_hermitian(scaled(product(aj.g, ak.g.conj()), h),
                                    Operator::product({{aj.id, uj}, {ak.id, dk}}));
      }
      for (const auto& al : alpha[std::size_t(i)])
        m.hamiltonian.add_hermitian(scaled(product(al.conj(), aj.g.conj()), D / denom), Operator::local(aj.id, dj));
    }
  }
  for (const auto& ch : R.channels) {
    add_channel(ch.channel, ch.detected, Operator{});
    operators::TimeOperator& c = m.channels.back().timed;
    for (int i = 0; i < 2; ++i) {
      const Complex ci = ch.coefficients(i);
      if (ci == Complex(0.0)) continue;
      const Complex denom(R.detuning_rad_per_us[i] - frame, -kappa);
      for (const auto& al : alpha[std::size_t(i)]) c.add(scaled(al, ci), Operator::identity());
      for (const auto& aj : atoms)
        if (aj.down[std::size_t(i)].norm() > 0.0)
          c.add(scaled(aj.g.conj(), -ci / denom), Operator::local(aj.id, aj.down[std::size_t(i)]));
    }
  }
}

trajectory::Model build_model(const config::CheckedScenario& s, const AtomMatrices& A,
                              const std::vector<ClusterAtom>& atoms, double start_us, double end_us,
                              std::vector<int>& channel_of, const ClusterBasis& basis) {
  trajectory::Model m;
  m.max_excitation = basis.max_excitation;
  m.start_us = start_us;
  m.end_us = end_us;
  channel_of.clear();
  std::map<std::string, int> det_index;
  for (std::size_t c = 0; c < s.config.detectors.size(); ++c) det_index[s.config.detectors[c].channel] = int(c);
  auto add_channel = [&](const std::string& label, bool detected, Operator op) {
    m.channels.push_back({label, detected, std::move(op)});
    channel_of.push_back(detected ? det_index.at(label) : -1);
  };

  const double frame = frame_detuning_rad_per_us(s);
  const int n_side = int(s.config.side_drives.size());
  const int n_res = int(s.config.resonator_drives.size());
  for (int j = 0; j < n_side; ++j) {
    m.controls.push_back(1.0);
    m.control_names.push_back(s.config.side_drives[j].name);
  }
  for (int d = 0; d < n_res; ++d) {
    m.controls.push_back(1.0);
    m.control_names.push_back(s.config.resonator_drives[d].name);
  }

  // Resonator modes 0 and 1 (unless they are eliminated: then the atoms come first and the
  // modes' field is written in terms of them after the atom loop).
  const bool has_res = s.resonator.has_value();
  const bool eliminate = has_res && basis.eliminate_modes;
  std::array<LocalMatrix, 2> a;
  std::vector<CoupledAtom> coupled;  // eliminated modes: the atoms' couplings
  if (has_res && !eliminate) {
    const auto& R = *s.resonator;
    const int cut = R.fock_cutoff;
    const auto alpha = empty_resonator_amplitudes(s, start_us);
    for (int i = 0; i < 2; ++i) {
      m.subsystems.push_back(space::Subsystem::mode(i == 0 ? "mode 1" : "mode 2", cut));
      if (R.displaced_frame) {
        // Displaced frame: the field is α + a with the constant α of the empty driven resonator at
        // the cluster start, so the mode starts in the vacuum of the displaced operator and the Fock
        // basis only holds the field the atoms add. A constant displacement is a unitary change of
        // frame, so every operator built from a[i] below (detuning, drive, coupling, channels and
        // the physical decay they must add up to) stays exact; only the truncation differs.
        m.initial.push_back({space::SubsystemId(i), coherent_state(Complex(0.0), cut)});
        a[i] = annihilation(cut) + alpha[i] * LocalMatrix::Identity(cut + 1, cut + 1);
      } else {
        m.initial.push_back({space::SubsystemId(i), coherent_state(alpha[i], cut)});
        a[i] = annihilation(cut);
      }
      const double w = R.detuning_rad_per_us[i] - frame;
      if (w != 0.0) m.hamiltonian.add(Operator::local(i, a[i].adjoint() * a[i], w));
      m.physical_decay += Operator::local(i, a[i].adjoint() * a[i], 2.0 * R.kappa_rad_per_us);
    }
    for (int d = 0; d < n_res; ++d) {
      const auto& drv = s.config.resonator_drives[d];
      const double E = s.resonator_drive_amplitude_rad_per_us[d];
      const double delta = kTwoPi * drv.detuning_MHz - frame;
      // E (a e^{iδt} + a† e^{−iδt}): the a† term with e^{−iδt}, plus its Hermitian conjugate.
      Coefficient c = delta == 0.0
                          ? Coefficient::of_control(n_side + d, E)
                          : Coefficient::of_control(n_side + d, E,
                                                    [delta](double t) { return std::exp(Complex(0.0, -delta * t)); });
      m.hamiltonian.add_hermitian(c, Operator::local(drv.mode, a[drv.mode].adjoint()));
    }
    for (const auto& ch : R.channels) {
      Operator op = Operator::local(0, a[0], ch.coefficients(0)) + Operator::local(1, a[1], ch.coefficients(1));
      add_channel(ch.channel, ch.detected, op);
    }
  }

  // Atoms.
  const double gamma = s.levels.gamma_rad_per_us();
  for (const auto& ca : atoms) {
    const space::SubsystemId id = space::SubsystemId(m.subsystems.size());
    m.subsystems.push_back(space::Subsystem::levels(atom_label(ca.arrival), A.dim));
    m.subsystems.back().excitation.assign(std::size_t(A.dim), 0);
    for (int k = 0; k < A.dim; ++k) m.subsystems.back().excitation[std::size_t(k)] = A.excited[std::size_t(k)] ? 1 : 0;
    space::Vector psi = space::Vector::Zero(A.dim);
    psi(ca.arrival.initial_sublevel) = 1.0;
    if (ca.interval.begin_us <= start_us)
      m.initial.push_back({id, psi});
    else
      m.events.push_back({ca.interval.begin_us, trajectory::Attach{id, psi}});
    if (ca.interval.end_us < end_us) m.events.push_back({ca.interval.end_us, trajectory::Detach{id}});

    const scenario::AtomView view(s, ca.arrival);
    const bool fixed = is_static(ca.arrival, s);
    // Energies in the frame: E_s − Δ_frame on excited sublevels, far levels without hyperfine offset.
    const auto& E = view.energies_rad_per_us();
    Eigen::VectorXcd diag = Eigen::VectorXcd::Zero(A.dim);
    for (int k = 0; k < int(E.size()); ++k) diag(k) = E[k] - A.frame_offset[k] - (A.excited[k] ? frame : 0.0);
    m.hamiltonian.add(Operator::local(id, diag.asDiagonal().toDenseMatrix()));
    if (s.config.field.gradient_G_per_mm) {
      // Zeeman part scaled by B∥(t)/|B|: add (B∥/|B| − 1)·(E(|B|) − E(0)).
      Eigen::VectorXcd z = Eigen::VectorXcd::Zero(A.dim);
      for (int k = 0; k < int(E.size()); ++k) z(k) = E[k] - A.zero_field[k];
      const double B = s.config.field.field_G.norm();
      m.hamiltonian.add(Coefficient::of_time([view, B](double t) { return Complex(view.field_along_axis_G(t) / B - 1.0); }),
                        Operator::local(id, z.asDiagonal().toDenseMatrix()));
    }
    // Resonator coupling g(t) Σ_i (a_i† Σ_q w_iq A_q + h.c.) — written as the atom-raising part
    // g(t) Σ_q w_iq A_q† a_i plus its conjugate.
    if (eliminate) {
      const auto& w = view.mode_weights();
      CoupledAtom c{id, fixed ? Coefficient::scalar(view.resonator_coupling(start_us))
                          : Coefficient::of_time([view](double t) { return view.resonator_coupling(t); }),
                {}};
      for (int i = 0; i < 2; ++i) {
        LocalMatrix up = LocalMatrix::Zero(A.dim, A.dim);
        for (int q = 0; q < 3; ++q) up += w[i][q] * A.coupling[q].adjoint();
        c.down[std::size_t(i)] = up.adjoint();
      }
      coupled.push_back(std::move(c));
    } else if (has_res) {
      const auto& w = view.mode_weights();
      // One coefficient (one shared time function) for both modes: the engine evaluates g(t) once
      // per right-hand side for all four terms.
      const Coefficient c = fixed ? Coefficient::scalar(view.resonator_coupling(start_us))
                                  : Coefficient::of_time([view](double t) { return view.resonator_coupling(t); });
      for (int i = 0; i < 2; ++i) {
        LocalMatrix up = LocalMatrix::Zero(A.dim, A.dim);
        for (int q = 0; q < 3; ++q) up += w[i][q] * A.coupling[q].adjoint();
        if (up.norm() == 0.0) continue;
        m.hamiltonian.add_hermitian(c, Operator::product({{space::SubsystemId(i), a[i]}, {id, up}}));
      }
    }
    // Side drives (Ω_j(t)/2) e^{−iδ_j t} Σ_q w_jq A_q† + h.c., δ_j = Δ_j − k_j·v − Δ_frame.
    for (int j = 0; j < n_side; ++j) {
      LocalMatrix up = LocalMatrix::Zero(A.dim, A.dim);
      for (int q = 0; q < 3; ++q) up += view.drive_weights(j)[q] * A.coupling[q].adjoint();
      if (up.norm() == 0.0) continue;
      const double delta = view.drive_detuning_rad_per_us(j) - frame;
      Coefficient c;
      if (fixed && delta == 0.0) {
        c = Coefficient::of_control(j, 0.5 * view.drive_rabi_rad_per_us(j, start_us));
      } else if (delta == 0.0) {
        c = Coefficient::of_control(j, 0.5, [view, j](double t) { return Complex(view.drive_rabi_rad_per_us(j, t)); });
      } else {
        c = Coefficient::of_control(j, 0.5, [view, j, delta](double t) {
          return view.drive_rabi_rad_per_us(j, t) * std::exp(Complex(0.0, -delta * t));
        });
      }
      m.hamiltonian.add_hermitian(c, Operator::local(id, up));
    }
    // Decay: free-space channels (detected + undetected) or all undetected; loss to levels
    // outside the model into the 'lost' state.
    m.physical_decay += Operator::local(id, A.decay, gamma);
    const std::string who = atom_label(ca.arrival);
    if (!s.free_space_channels.empty()) {
      for (std::size_t c = 0; c < s.free_space_channels.size(); ++c) {
        const auto& ch = s.free_space_channels[c];
        const LocalMatrix& C = A.free_space[c];
        if (ch.detected)
          add_channel(ch.channel, true, Operator::local(id, C));
        else
          add_channel(who + " " + ch.channel, false, Operator::local(id, C));
      }
    } else {
      for (int q = 0; q < 3; ++q)
        if (A.lowering[q].norm() > 0.0)
          add_channel(who + " free space q=" + std::to_string(q - 1), false,
                      Operator::local(id, A.lowering[q], std::sqrt(gamma)));
    }
    if (A.has_lost) {
      const int lost = A.dim - 1;
      for (int k = 0; k < lost; ++k) {
        if (A.loss[k] <= 0.0) continue;
        LocalMatrix P = LocalMatrix::Zero(A.dim, A.dim);
        P(k, k) = 1.0;
        m.physical_decay += Operator::local(id, P, gamma * A.loss[k]);
        LocalMatrix J = LocalMatrix::Zero(A.dim, A.dim);
        J(lost, k) = 1.0;
        add_channel(who + " loss", false, Operator::local(id, J, std::sqrt(gamma * A.loss[k])));
      }
    }
  }

  if (eliminate) add_eliminated_modes(s, m, coupled, frame, n_side, add_channel);

  // Feedback rules as a jump hook (hold-off per rule, per trajectory).
  if (!s.config.feedback.empty()) {
    struct Rule {
      int trigger = -1, control = 0;
      double latency_us, duration_us, holdoff_us, level;
    };
    std::vector<Rule> rules;
    const auto side_names = [&] {
      std::vector<std::string> v;
      for (const auto& d : s.config.side_drives) v.push_back(d.name);
      for (const auto& d : s.config.resonator_drives) v.push_back(d.name);
      return v;
    }();
    for (const auto& r : s.config.feedback) {
      Rule x;
      x.trigger = det_index.at(r.trigger_channel);
      x.control = int(std::find(side_names.begin(), side_names.end(), r.drive) - side_names.begin());
      x.latency_us = r.latency_ns * 1e-3;
      x.duration_us = r.duration_ns * 1e-3;
      x.holdoff_us = r.holdoff_ns * 1e-3;
      x.level = r.level;
      rules.push_back(x);
    }
    std::vector<int> ch_of = channel_of;
    std::vector<double> hold(rules.size(), -std::numeric_limits<double>::infinity());
    m.on_jump = [rules, ch_of, hold](const trajectory::JumpInfo& j, trajectory::Schedule& sch) mutable {
      const int det = ch_of[std::size_t(j.channel)];
      if (det < 0) return;
      for (std::size_t k = 0; k < rules.size(); ++k) {
        const Rule& r = rules[k];
        if (r.trigger != det || j.time_us < hold[k]) continue;
        sch.add(j.time_us + r.latency_us, trajectory::SetControl{r.control, r.level});
        sch.add(j.time_us + r.latency_us + r.duration_us, trajectory::SetControl{r.control, 1.0});
        hold[k] = j.time_us + r.holdoff_us;
      }
    };
  }
  if (basis.prune_unreachable) trajectory::prune_unreachable_levels(m);
  return m;
}
}  // namespace

}  // namespace flyby::simulation
