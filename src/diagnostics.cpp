#include "statewise/diagnostics.h"

#include <cmath>

#include "statewise/statistics.h"

namespace statewise {

InnovationAccumulator::InnovationAccumulator(std::vector<std::string> channel_names)
    : names_(std::move(channel_names)), running_(names_.size()) {}

void InnovationAccumulator::add(const InnovationRecord& record) {
  ++rows_;
  log_likelihood_ += record.log_likelihood;
  for (std::size_t c = 0; c < running_.size(); ++c) {
    Running& r = running_[c];
    const double v = record.innovation(static_cast<Eigen::Index>(c));
    if (std::isnan(v)) {
      ++r.missing;
      continue;
    }
    ++r.observed;
    const double delta = v - r.mean;
    r.mean += delta / static_cast<double>(r.observed);
    r.sum_squares += delta * (v - r.mean);
    const double z = v / record.innovation_sd(static_cast<Eigen::Index>(c));
    if (std::abs(z) > 1.96) ++r.outside;
  }
  if (record.observed > 0) {
    ++nis_steps_;
    nis_sum_ += record.nis;
    nis_dof_ += record.observed;
  }
}

std::vector<ChannelInnovationSummary> InnovationAccumulator::channels() const {
  std::vector<ChannelInnovationSummary> summaries;
  for (std::size_t c = 0; c < running_.size(); ++c) {
    const Running& r = running_[c];
    ChannelInnovationSummary s;
    s.name = names_[c];
    s.observed = r.observed;
    s.missing = r.missing;
    s.innovation_mean = r.observed > 0 ? r.mean : std::nan("");
    s.innovation_sd = r.observed > 1 ? std::sqrt(r.sum_squares / static_cast<double>(r.observed - 1)) : std::nan("");
    s.fraction_outside_1_96 =
        r.observed > 0 ? static_cast<double>(r.outside) / static_cast<double>(r.observed) : std::nan("");
    summaries.push_back(s);
  }
  return summaries;
}

NisSummary InnovationAccumulator::nis() const {
  NisSummary s;
  s.steps = nis_steps_;
  s.degrees_of_freedom = nis_dof_;
  if (nis_steps_ == 0) {
    s.mean = s.expected = s.lower_95 = s.upper_95 = std::nan("");
    return s;
  }
  const double steps = static_cast<double>(nis_steps_);
  s.mean = nis_sum_ / steps;
  s.expected = nis_dof_ / steps;
  s.lower_95 = chi_square_quantile(0.025, nis_dof_) / steps;
  s.upper_95 = chi_square_quantile(0.975, nis_dof_) / steps;
  return s;
}

}  // namespace statewise
