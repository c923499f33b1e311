#include "statewise/output_table.h"

#include <charconv>
#include <cmath>
#include <limits>

#include "statewise/diffuse.h"

#include "statewise/statistics.h"

namespace statewise {

void append_number(std::string& out, double value, int digits) {
  if (std::isnan(value)) return;
  char buffer[64];
  const auto result = digits > 0 ? std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::general, digits)
                                 : std::to_chars(buffer, buffer + sizeof buffer, value);
  out.append(buffer, result.ptr);
}

void append_text_field(std::string& out, std::string_view text, char delimiter) {
  bool needs_quotes = false;
  for (const char c : text) needs_quotes = needs_quotes || c == delimiter || c == '"' || c == '\n' || c == '\r';
  if (!needs_quotes) {
    out.append(text);
    return;
  }
  out += '"';
  for (const char c : text) {
    if (c == '"') out += '"';
    out += c;
  }
  out += '"';
}

EstimateTableWriter::EstimateTableWriter(const StateSpaceModel& model, EstimateKind kind, TableFormat format,
                                         double interval_level)
    : model_(model),
      kind_(kind),
      format_(format),
      interval_z_(kind == EstimateKind::forecast && interval_level > 0.0 && interval_level < 1.0
                      ? -normal_quantile(0.5 * (1.0 - interval_level))
                      : std::nan("")),
      channel_mean_(model.C.rows()),
      covariance_times_ct_(model.A.rows(), model.C.rows()) {}

void EstimateTableWriter::append_header(std::string& out) const {
  const char d = format_.delimiter;
  bool first = true;
  auto column = [&](const std::string& name) {
    if (!first) out += d;
    first = false;
    append_text_field(out, name, d);
  };
  if (!model_.time_column.empty()) column(model_.time_column);
  for (const auto& s : model_.state_names) {
    column(s);
    column(s + "_sd");
  }
  for (const auto& c : model_.observation_names) {
    column(c + "_est");
    column(c + "_sd");
    column(c + "_filled");
    column(c + "_imputed");
    if (format_.rejected_column) column(c + "_rejected");
    if (kind_ == EstimateKind::filtered || format_.innovations) {
      column(c + "_innov");
      column(c + "_z");
    }
    if (kind_ == EstimateKind::forecast) {
      column(c + "_lo");
      column(c + "_hi");
    }
  }
  out += '\n';
}

void EstimateTableWriter::append_row(std::string& out, std::string_view time_text, const double* values,
                                     const Eigen::Ref<const Eigen::VectorXd>& mean,
                                     const Eigen::Ref<const Eigen::MatrixXd>& covariance,
                                     const InnovationRecord* innovations, const unsigned char* rejected,
                                     const Eigen::MatrixXd* diffuse_covariance) const {
  constexpr double kInfinity = std::numeric_limits<double>::infinity();

  const char d = format_.delimiter;
  const int digits = format_.digits;
  bool first = true;
  auto separator = [&]() {
    if (!first) out += d;
    first = false;
  };
  if (!model_.time_column.empty()) {
    separator();
    append_text_field(out, time_text, d);
  }
  for (Eigen::Index i = 0; i < mean.size(); ++i) {
    separator();
    append_number(out, mean(i), digits);
    out += d;
    const bool unbounded = diffuse_covariance != nullptr && (*diffuse_covariance)(i, i) > kDiffuseTolerance;
    append_number(out, unbounded ? kInfinity : std::sqrt(std::max(covariance(i, i), 0.0)), digits);
  }
  // Channel estimate C x and its standard deviation sqrt(diag(C P C')).
  channel_mean_.noalias() = model_.C.lazyProduct(mean);
  covariance_times_ct_.noalias() = covariance.lazyProduct(model_.C.transpose());
  for (Eigen::Index c = 0; c < channel_mean_.size(); ++c) {
    const double estimate = channel_mean_(c);
    double variance = model_.C.row(c).dot(covariance_times_ct_.col(c));
    if (diffuse_covariance != nullptr &&
        model_.C.row(c) * (*diffuse_covariance) * model_.C.row(c).transpose() >
            kDiffuseTolerance * model_.C.row(c).squaredNorm())
      variance = kInfinity;
    const bool missing = std::isnan(values[c]);
    separator();
    append_number(out, estimate, digits);
    out += d;
    append_number(out, std::sqrt(std::max(variance, 0.0)), digits);
    out += d;
    append_number(out, missing ? estimate : values[c], digits);
    out += d;
    out += missing ? '1' : '0';
    if (format_.rejected_column) {
      out += d;
      out += rejected != nullptr && rejected[c] != 0 ? '1' : '0';
    }
    if (kind_ == EstimateKind::filtered || format_.innovations) {
      const double innovation = innovations != nullptr ? innovations->innovation(c) : std::nan("");
      const double sd = innovations != nullptr ? innovations->innovation_sd(c) : std::nan("");
      out += d;
      append_number(out, innovation, digits);
      out += d;
      append_number(out, innovation / sd, digits);
    }
    if (kind_ == EstimateKind::forecast) {
      // A new measurement y = C x + v has variance c P c' + R_cc.
      const double half_width = interval_z_ * std::sqrt(std::max(variance + model_.R(c, c), 0.0));
      out += d;
      append_number(out, estimate - half_width, digits);
      out += d;
      append_number(out, estimate + half_width, digits);
    }
  }
  out += '\n';
}

}  // namespace statewise
