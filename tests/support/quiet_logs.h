#pragma once
// Test support: silences Ceres' glog output (tests and benches report through their own
// output; glog's "Logging before InitGoogleLogging" and covariance notes are noise there).
// The same as cli/main.cpp does for the tool.

namespace dropfit::test {

// Sets glog's minimum level to FATAL. Safe to call more than once.
void SilenceCeresLogs();

}  // namespace dropfit::test
