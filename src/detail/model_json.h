#pragma once
// Private JSON-level steps of reading a model file, shared by parse_model (model.cpp), the building
// blocks (components.cpp), the estimate markers (estimation_spec.cpp) and the diffuse start
// (diffuse.cpp). The order is: parse the document, expand "components" into plain matrices, then
// (for `statewise fit` only) replace "estimate" markers by starting values, then read the matrices.

#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "detail/json_util.h"
#include "statewise/model.h"

namespace statewise::detail {

/// Reads a parsed model-file document (components are expanded here when present).
StateSpaceModel parse_model_json(nlohmann::json root, const std::string& file_name);

/// Where a component's parameter marked "estimate" stands in the user's file, so that a fitted
/// value can be written back there.
struct ComponentParameterOrigin {
  std::string pointer;                  ///< JSON pointer of the field, e.g. "/components/1/variance"
  std::vector<std::string> parameters;  ///< names of the parameters (key paths) it holds
  bool is_list = false;                 ///< the field holds a list of them (AR coefficients)
};

/// A model document with its "components" replaced by plain matrices.
struct ExpandedComponents {
  nlohmann::json root;                            ///< the document without "components"
  std::vector<ComponentParameterOrigin> origins;  ///< component fields marked "estimate"
};

/// Expands root["components"] into "states", "A", "B", "C" and "Q" (docs/model-format.md,
/// "Components"). A component value marked "estimate" becomes marker entries linked by a
/// "parameter" name (its key path) with a "times" factor. Raises InputError naming the key.
ExpandedComponents expand_components(const JsonContext& context, const nlohmann::json& root);

/// Reads "initial.diffuse": true, false, or a list of state names. Returns one flag per state.
std::vector<bool> parse_diffuse_states(const JsonContext& context, const nlohmann::json& value,
                                       const std::vector<std::string>& state_names);

}  // namespace statewise::detail
