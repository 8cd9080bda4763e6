// Out-of-line part of the invariant check.
#include "engine/common/errors.h"

#include <sstream>

namespace flyby {

void check_failed(const char* expr, const char* file, int line, const std::string& msg) {
  std::ostringstream os;
  os << "internal check failed: " << msg << " (" << expr << " at " << file << ":" << line
     << "); please report this as a bug";
  throw InternalError(os.str());
}

}  // namespace flyby
