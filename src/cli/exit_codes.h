#pragma once
// Exit statuses of the statewise command, in one place (documented in docs/cli.md).

namespace statewise::cli {

enum ExitCode : int {
  kExitSuccess = 0,            // the command did its job
  kExitNumericalFailure = 1,   // the numbers broke down (e.g. a singular innovation covariance)
  kExitBadInput = 2,           // bad input or usage: the message names the file, line and column or key
  kExitModelCannotWork = 3,    // `check`: the model cannot work on this data (unobservable/unstable)
  kExitOutputFailure = 4,      // the output could not be written (disk full, permission)
  kExitBusy = 5,               // `filter --state FILE --no-wait`: another run holds FILE's lock
  kExitSomeGroupsFailed = 6,   // --by: some groups failed (each named on stderr); the others' rows were written
};

}  // namespace statewise::cli
