#pragma once
// Exit status of every command (docs/formats.md, "Exit status").

namespace dropfit::cli {

enum ExitStatus : int {
  kExitDone = 0,      // done (warnings allowed)
  kExitPartial = 1,   // done in part: some clips failed, or the clip could not be analysed;
                      // each failure in `errors` and on stderr, everything else still written
  kExitBadUsage = 2,  // bad usage, or an input the command cannot start from; nothing written
};

}  // namespace dropfit::cli
