// `statewise fit`: estimates the parameters marked "estimate" in one model file and writes the
// fitted model file, or fits several model files to the same log and ranks them by AIC and BIC.

#include <unistd.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "cli/commands.h"
#include "cli/exit_codes.h"
#include "cli/output_file.h"
#include "statewise/components.h"
#include "statewise/csv.h"
#include "statewise/error.h"
#include "statewise/estimation_spec.h"
#include "statewise/fit.h"
#include "statewise/output_table.h"
#include "statewise/series.h"

namespace statewise::cli {

namespace {

FitMethod parse_method(const std::string& text) {
  if (text == "em") return FitMethod::em;
  if (text == "mle") return FitMethod::mle;
  if (text == "auto") return FitMethod::automatic;
  raise_input_error({"--method", 0, 0, ""}, "expected em, mle or auto, got \"" + text + "\"" +
                                                did_you_mean(text, {"em", "mle", "auto"}));
}

std::string read_standard_input() {
  std::string text;
  char buffer[1 << 16];
  ssize_t got = 0;
  while ((got = ::read(STDIN_FILENO, buffer, sizeof buffer)) > 0)
    text.append(buffer, static_cast<std::size_t>(got));
  return text;
}

std::string format_number(double value, int digits) {
  if (std::isnan(value)) return "-";
  std::string out;
  append_number(out, value, digits);
  return out;
}

struct FittedModel {
  std::string path;
  ModelTemplate model_template;
  FitResult result;
  std::size_t rows = 0;
};

// The summary on standard error: what a person running the command wants to see at once.
void print_summary(const FittedModel& fitted) {
  const FitResult& r = fitted.result;
  if (r.status == FitStatus::failed) return;  // the error message says it all
  std::ostringstream text;
  text << "statewise: fit " << fitted.path << ": " << status_name(r.status) << " (" << r.method;
  if (r.em_iterations > 0) text << ", " << r.em_iterations << " EM steps";
  if (r.mle_iterations > 0) text << ", " << r.mle_iterations << " L-BFGS iterations";
  text << "); log-likelihood " << format_number(r.log_likelihood, 10) << ", AIC " << format_number(r.aic, 10)
       << ", BIC " << format_number(r.bic, 10) << "\n";
  for (const auto& e : r.estimates) {
    text << "  " << e.name << " = " << format_number(e.value, 6);
    if (e.at_zero)
      text << " (went to zero)";
    else if (std::isfinite(e.standard_error))
      text << " (standard error " << format_number(e.standard_error, 3) << ")";
    text << "\n";
  }
  for (const auto& warning : r.warnings)
    text << "statewise: warning: " << fitted.path << ": " << warning << "\n";
  std::fflush(stdout);
  std::cerr << text.str();
}

// Models ranked by AIC (then BIC), one row each, columns aligned.
std::string ranking_table(const std::vector<FittedModel>& fitted) {
  std::vector<std::size_t> order(fitted.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
  auto key = [&](std::size_t i) {
    const FitResult& r = fitted[i].result;
    const bool usable = r.status != FitStatus::failed && std::isfinite(r.aic);
    return std::make_tuple(!usable, usable ? r.aic : 0.0, usable ? r.bic : 0.0, i);
  };
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return key(a) < key(b); });
  const double best_aic = fitted[order[0]].result.aic, best_bic = [&] {
    double best = INFINITY;
    for (const auto& f : fitted)
      if (f.result.status != FitStatus::failed && std::isfinite(f.result.bic))
        best = std::min(best, f.result.bic);
    return best;
  }();
  std::vector<std::vector<std::string>> rows = {{"rank", "model", "log_likelihood", "parameters", "diffuse",
                                                 "aic", "delta_aic", "bic", "delta_bic", "status"}};
  for (std::size_t rank = 0; rank < order.size(); ++rank) {
    const FittedModel& f = fitted[order[rank]];
    const FitResult& r = f.result;
    const bool usable = r.status != FitStatus::failed;
    rows.push_back({std::to_string(rank + 1), f.path, usable ? format_number(r.log_likelihood, 10) : "-",
                    std::to_string(r.parameters), std::to_string(r.diffuse_states),
                    usable ? format_number(r.aic, 10) : "-",
                    usable ? format_number(r.aic - best_aic, 4) : "-",
                    usable ? format_number(r.bic, 10) : "-",
                    usable ? format_number(r.bic - best_bic, 4) : "-", status_name(r.status)});
  }
  std::vector<std::size_t> width(rows[0].size(), 0);
  for (const auto& row : rows)
    for (std::size_t c = 0; c < row.size(); ++c) width[c] = std::max(width[c], row[c].size());
  std::string out;
  for (const auto& row : rows) {
    for (std::size_t c = 0; c < row.size(); ++c) {
      out += row[c];
      if (c + 1 < row.size()) out += std::string(width[c] - row[c].size() + 2, ' ');
    }
    out += '\n';
  }
  return out;
}

}  // namespace

int run_fit(const FitCommandOptions& options) {
  FitOptions fit_options;
  fit_options.method = parse_method(options.method);
  if (fit_options.method == FitMethod::mle) fit_options.em_steps = 0;
  if (options.em_steps >= 0) fit_options.em_steps = options.em_steps;
  if (options.max_iterations > 0) {
    fit_options.max_em_iterations = options.max_iterations;
    fit_options.max_mle_iterations = options.max_iterations;
  }
  const bool compare = options.compare || options.model_paths.size() > 1;
  if (compare && options.output_path != "-" && !options.output_path.empty())
    raise_input_error({"--output", 0, 0, ""},
                      "a fitted model is written for one model file only; with several models (or --compare) "
                      "the ranking goes to standard output");

  // Standard input can be read once only, so it is kept when several models read it.
  CsvOptions csv;
  csv.delimiter = parse_delimiter(options.delimiter);
  csv.missing_tokens = options.missing_tokens;
  std::string kept_input;
  const bool from_stdin = options.input_path == "-";
  if (from_stdin && options.model_paths.size() > 1) kept_input = read_standard_input();

  std::vector<FittedModel> fitted;
  for (const auto& path : options.model_paths) {
    FittedModel f;
    f.path = path;
    f.model_template = load_model_template(path);
    if (fit_options.method == FitMethod::em) {
      const std::string reason = em_unavailable_reason(f.model_template);
      if (!reason.empty())
        raise_input_error({path, 0, 0, ""},
                          "--method em cannot fit this model: " + reason + "; use --method mle or auto");
    }
    CsvReader reader = from_stdin && options.model_paths.size() > 1
                           ? CsvReader::from_string(kept_input, "<stdin>", csv)
                           : CsvReader::open(options.input_path, csv);
    ObservationStream stream(reader, f.model_template.model);
    const ObservationSeries series = read_series(stream, f.model_template.model);
    f.rows = series.rows();
    if (series.rows() < 2)
      raise_input_error({reader.display_name(), 0, 0, ""}, "a fit needs at least two data rows");
    if (f.model_template.spec.size() == 0 && !compare)
      raise_input_error({path, 0, 0, ""},
                        "nothing is marked \"estimate\"; mark the values to estimate "
                        "(docs/model-format.md) or use --compare to score the model as it is");
    f.result = fit_model(f.model_template, series, fit_options);
    print_summary(f);
    fitted.push_back(std::move(f));
  }

  if (!options.report_path.empty()) {
    std::string text;
    if (fitted.size() == 1 && !compare) {
      text = write_fit_report_json(fitted[0].result, fitted[0].path, options.input_path, fitted[0].rows);
    } else {
      nlohmann::ordered_json models = nlohmann::ordered_json::array();
      for (const auto& f : fitted)
        models.push_back(nlohmann::ordered_json::parse(
            write_fit_report_json(f.result, f.path, options.input_path, f.rows)));
      text = nlohmann::ordered_json{{"command", "fit"}, {"models", models}}.dump(2) + "\n";
    }
    write_whole_file(options.report_path, text, options.input_path);
  }

  if (compare) {
    std::size_t values = fitted[0].result.observed_values;
    for (const auto& f : fitted)
      if (f.result.observed_values != values) {
        std::cerr << "statewise: warning: the models use different numbers of observed values (different "
                     "channels?); their AIC and BIC are not comparable\n";
        break;
      }
    OutputFile output("-");
    output.write(ranking_table(fitted));
    output.commit();
    for (const auto& f : fitted)
      if (f.result.status == FitStatus::failed) return kExitNumericalFailure;
    return kExitSuccess;
  }

  const FittedModel& f = fitted[0];
  if (f.result.status == FitStatus::failed)
    throw NumericalFailure{f.path + ": the fit failed: " + f.result.message};
  write_whole_file(options.output_path, write_fitted_model(f.model_template, f.result.model),
                   options.input_path);
  return kExitSuccess;
}

int run_expand(const ExpandCommandOptions& options) {
  // Read it as fit would, so that every error is reported, then print the expansion.
  const ModelTemplate checked = load_model_template(options.model_path);
  write_whole_file(options.output_path, expand_model_text(checked.source_text, options.model_path));
  return kExitSuccess;
}

}  // namespace statewise::cli
