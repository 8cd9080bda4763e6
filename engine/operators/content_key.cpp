#include "engine/operators/content_key.h"

namespace flyby::operators {

void append_content_key(const Operator& op, const std::function<double(SubsystemId)>& target_code,
                        std::vector<double>& key) {
  key.push_back(double(op.terms().size()));
  for (const auto& pt : op.terms()) {
    key.push_back(pt.weight.real());
    key.push_back(pt.weight.imag());
    key.push_back(double(pt.factors.size()));
    for (const auto& f : pt.factors) {
      key.push_back(target_code(f.target));
      key.push_back(double(f.matrix.rows()));
      key.push_back(double(f.matrix.cols()));
      const Complex* d = f.matrix.data();
      for (long k = 0; k < f.matrix.size(); ++k)
        if (d[k] != Complex(0.0)) {
          key.push_back(double(k));
          key.push_back(d[k].real());
          key.push_back(d[k].imag());
        }
      key.push_back(-1.0);
    }
  }
}

}  // namespace flyby::operators
