// Operators with time-dependent coefficients: Σ_k c_k(t) O_k. A coefficient is a constant times
// an optional function of time (e.g. an atom's coupling as it crosses a Gaussian mode) times an
// optional *control* — a named scalar of the model (a drive level) that is piecewise constant and
// can be changed by scheduled events or by feedback after a click. Controls let the integrator
// treat a change of drive level as the start of a new stretch with its own exact propagator.
#pragma once

#include <functional>
#include <memory>
#include <optional>
#include <vector>

#include "engine/operators/operator.h"

namespace flyby::operators {

// A function of time in µs. Must be pure (called from several threads) and defined for all t.
using TimeFunction = std::function<Complex(double t_us)>;
// Shared so that copies of a coefficient (e.g. c and c* of add_hermitian, or one coupling used by
// several terms) keep the identity of their function: the integrator evaluates each distinct
// function once per right-hand side and sums the terms that share it into one sparse matrix.
using SharedTimeFunction = std::shared_ptr<const TimeFunction>;

struct Coefficient {
  Complex constant{1.0, 0.0};
  SharedTimeFunction time_fn;    // null: no time dependence
  std::optional<int> control;    // index into the model's controls; empty: none
  bool conjugate = false;        // value uses conj(time_fn(t) · control)

  static Coefficient scalar(Complex c) {
    Coefficient k;
    k.constant = c;
    return k;
  }
  static Coefficient of_time(TimeFunction f, Complex scale = 1.0) {
    Coefficient k;
    k.constant = scale;
    if (f) k.time_fn = std::make_shared<const TimeFunction>(std::move(f));
    return k;
  }
  static Coefficient of_control(int control, Complex scale = 1.0, TimeFunction f = {}) {
    Coefficient k;
    k.constant = scale;
    k.control = control;
    if (f) k.time_fn = std::make_shared<const TimeFunction>(std::move(f));
    return k;
  }

  bool time_dependent() const { return static_cast<bool>(time_fn); }
  Complex value(double t_us, const std::vector<Complex>& controls) const {
    Complex v{1.0, 0.0};
    if (time_fn) v *= (*time_fn)(t_us);
    if (control) v *= controls.at(std::size_t(*control));
    return constant * (conjugate ? std::conj(v) : v);
  }
  // The factor multiplying the time function (or the whole value when there is none) for given
  // control values: value(t) = control_factor · f(t), or control_factor · conj(f(t)) when
  // `conjugate` is set.
  Complex control_factor(const std::vector<Complex>& controls) const {
    Complex v{1.0, 0.0};
    if (control) v *= controls.at(std::size_t(*control));
    return constant * (conjugate ? std::conj(v) : v);
  }
  // The time-independent part for given control values (requires !time_dependent()).
  Complex constant_value(const std::vector<Complex>& controls) const { return value(0.0, controls); }
  Coefficient conj() const {
    Coefficient c = *this;
    c.constant = std::conj(constant);
    c.conjugate = !conjugate;
    return c;
  }
};

struct Term {
  Coefficient coefficient;
  Operator op;
};

class TimeOperator {
 public:
  void add(Coefficient c, Operator op) { terms_.push_back(Term{std::move(c), std::move(op)}); }
  void add(Operator op) { add(Coefficient{}, std::move(op)); }
  // c·O + c*·O† (keeps a Hamiltonian Hermitian by construction).
  void add_hermitian(Coefficient c, const Operator& op) {
    Coefficient cc = c.conj();
    add(std::move(c), op);
    add(std::move(cc), op.adjoint());
  }
  const std::vector<Term>& terms() const { return terms_; }

 private:
  std::vector<Term> terms_;
};

}  // namespace flyby::operators
