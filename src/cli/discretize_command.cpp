// `statewise discretize`: the discrete model file equivalent to a model over a fixed step.

#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/output_file.h"
#include "statewise/discretize.h"
#include "statewise/model.h"

namespace statewise::cli {

int run_discretize(const DiscretizeOptions& options) {
  const StateSpaceModel model = load_model(options.model_path);
  const StateSpaceModel discrete = discretize_model(model, options.dt);
  validate_model(discrete, "the discretized model");
  write_whole_file(options.output_path, write_model(discrete), options.model_path);
  return kExitSuccess;
}

}  // namespace statewise::cli
