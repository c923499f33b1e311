#pragma once
/// \file components.h
/// Model building blocks. Instead of writing A, C and Q, a model file may list `components`
/// (docs/model-format.md, "Components"): `level`, `trend`, `seasonal`, `ar`, `constant_velocity`,
/// `constant_acceleration`, `bias` and `regression`. Each one adds its states, its block of A and Q
/// (block-diagonal), its rows of B and its columns of C for the channels it feeds. parse_model
/// expands them on reading; this header offers the expansion as text, for `statewise expand`.

#include <string>
#include <string_view>

namespace statewise {

/// The model file `json_text` with its components expanded into the equivalent plain-matrix model
/// file (keys in the usual order, shortest round-trip numbers). Parameters marked "estimate" stay
/// marked, as entries linked by a "parameter" name, so the result can still be fitted. A model
/// without components comes back with its keys reordered and otherwise unchanged. Raises
/// InputError naming the file and key for anything malformed.
std::string expand_model_text(std::string_view json_text, const std::string& file_name);

}  // namespace statewise
