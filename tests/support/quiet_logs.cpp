#include "tests/support/quiet_logs.h"

#include <glog/logging.h>

namespace dropfit::test {

void SilenceCeresLogs() { FLAGS_minloglevel = 3; }

}  // namespace dropfit::test
