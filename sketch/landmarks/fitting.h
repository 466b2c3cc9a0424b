// Landmarks fitted to a collection by sensitivity sampling.
//
// Candidates: `candidate_count` seeded uniform points in the domain. For sampled pairs of
// shapes (A, B), with Δ_c = d(c, A) − d(c, B), a candidate's sensitivity is its largest share
// of the squared difference over the sampled pairs, s_c = max Δ_c² / Σ_c' Δ_c'². Landmarks are
// drawn independently with probability p_c = (1 − floor)·s_c / Σ s + floor / C (the uniform
// floor keeps candidates no sampled pair needed in play; common practice, no source) and each
// draw is weighted 1/(m·p_c·C). Then the squared sketch distance is an unbiased estimate of
// the mean of Δ_c² over all C candidates — the same quantity the uniform layouts estimate — with
// less variance where shapes actually differ. A candidate drawn twice appears twice, so the
// dimension is exactly `count`.
//
// Cost: O(sample × candidates × segments) for the distance table plus O(pairs × candidates).
// Errors: fewer than two shapes, all sampled pairs identical on every candidate, bad counts.
#pragma once

#include <span>

#include "sketch/landmarks/landmark_set.h"

namespace waymark {

struct FitOptions {
  std::size_t count = 64;
  std::size_t candidate_count = 1024;
  std::size_t pair_count = 2000;
  double uniform_floor = 0.1;
  std::uint64_t seed = 1;
  Box domain = unit_frame_domain();
  bool region_semantics = false;
  LandmarkLimits limits;
};

// `sample` should already be in the collection's frame.
Result<LandmarkSet> fit_landmarks(std::span<const Shape> sample, const FitOptions& options);

}  // namespace waymark
