#include "sketch/landmarks/fitting.h"

#include <algorithm>
#include <vector>

#include "sketch/landmarks/sketcher.h"

namespace waymark {

Result<LandmarkSet> fit_landmarks(std::span<const Shape> sample, const FitOptions& options) {
  if (sample.size() < 2) return invalid_argument("fitting landmarks needs at least two sample shapes");
  if (options.candidate_count < options.count) {
    return invalid_argument("candidate count must be at least the landmark count");
  }
  if (!(options.uniform_floor >= 0 && options.uniform_floor <= 1)) {
    return invalid_argument("uniform floor must be between 0 and 1");
  }
  LandmarkLimits candidate_limits = options.limits;
  candidate_limits.max_count = std::max(candidate_limits.max_count, options.candidate_count);
  Result<LandmarkSet> candidates =
      random_landmarks(options.domain, options.candidate_count, options.seed, candidate_limits);
  if (!candidates) return candidates.status();
  if (options.count == 0 || options.count > options.limits.max_count) {
    return invalid_argument("landmark count must be between 1 and " + std::to_string(options.limits.max_count));
  }

  const std::size_t c_count = candidates->size();
  const Sketcher distance_table(*candidates, options.region_semantics);
  std::vector<double> table(sample.size() * c_count);
  for (std::size_t s = 0; s < sample.size(); ++s) {
    distance_table.distances(sample[s], std::span<double>(table).subspan(s * c_count, c_count));
  }

  SeededRandom random(options.seed ^ 0x5eed5eed5eed5eedull);
  std::vector<double> sensitivity(c_count, 0), squared(c_count);
  std::size_t informative_pairs = 0;
  for (std::size_t pair = 0; pair < options.pair_count; ++pair) {
    const std::size_t a = random.below(sample.size());
    std::size_t b = random.below(sample.size() - 1);
    if (b >= a) ++b;
    const double* da = &table[a * c_count];
    const double* db = &table[b * c_count];
    double total = 0;
    for (std::size_t c = 0; c < c_count; ++c) {
      squared[c] = (da[c] - db[c]) * (da[c] - db[c]);
      total += squared[c];
    }
    if (!(total > 0)) continue;
    ++informative_pairs;
    for (std::size_t c = 0; c < c_count; ++c) sensitivity[c] = std::max(sensitivity[c], squared[c] / total);
  }
  if (informative_pairs == 0) {
    return invalid_argument("the sampled shapes do not differ at any candidate landmark; cannot fit");
  }

  double sensitivity_sum = 0;
  for (double s : sensitivity) sensitivity_sum += s;
  std::vector<double> probability(c_count), cumulative(c_count);
  double running = 0;
  for (std::size_t c = 0; c < c_count; ++c) {
    probability[c] = (1 - options.uniform_floor) * sensitivity[c] / sensitivity_sum + options.uniform_floor / c_count;
    running += probability[c];
    cumulative[c] = running;
  }

  LandmarkSet set;
  set.layout = LandmarkLayout::fitted;
  set.domain = options.domain;
  for (std::size_t draw = 0; draw < options.count; ++draw) {
    const double u = random.uniform() * running;
    const std::size_t c = std::min<std::size_t>(
        static_cast<std::size_t>(std::upper_bound(cumulative.begin(), cumulative.end(), u) - cumulative.begin()),
        c_count - 1);
    set.points.push_back(candidates->points[c]);
    set.weights.push_back(1 / (static_cast<double>(options.count) * (probability[c] / running) * c_count));
  }
  return set;
}

}  // namespace waymark
