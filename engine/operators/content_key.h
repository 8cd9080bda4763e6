// Keys of caches that must not change results: the exact content of an operator as numbers,
// so that two operators get the same key only when they are the same (used by the stretch
// signature of the integrator and the completeness-check memory of the channels).
#pragma once

#include <functional>
#include <vector>

#include "engine/operators/operator.h"

namespace flyby::operators {

// Appends to `key`: the number of terms; per term its weight (re, im) and number of factors;
// per factor `target_code(target)`, the matrix shape, each nonzero entry as (position, re, im),
// and −1 as an end mark.
void append_content_key(const Operator& op, const std::function<double(SubsystemId)>& target_code,
                        std::vector<double>& key);

}  // namespace flyby::operators
