// The sketcher: a shape → the vector of its weighted distances to a landmark set.
//
//   v_i(S) = sqrt(w_i) · d(q_i, S)
// with d the distance from landmark q_i to S's segments (polyline strokes, polygon ring edges)
// or points. With region semantics a polygon is filled: d = 0 for a landmark inside it.
// Values are computed in double precision and stored as float.
//
// Why it matters: d(q, ·) is 1-Lipschitz, so for every landmark |d(q, A) − d(q, B)| ≤ d_H(A, B)
// ≤ d_F(A, B). linf_lower_bound() turns two sketches back into that bound, allowing for the
// float rounding, so it can certify pruning decisions.
//
// Cost: O(landmarks × segments) per shape, vectorised over landmarks (AVX-512 or AVX2 chosen
// at run time, scalar elsewhere); no heap allocation per call once a thread has warmed up.
// Thread safety: const methods may be called from many threads at once.
#pragma once

#include <span>
#include <vector>

#include "sketch/geometry/shape.h"
#include "sketch/landmarks/landmark_set.h"

namespace waymark {

class Sketcher {
 public:
  explicit Sketcher(const LandmarkSet& landmarks, bool region_semantics = false);

  std::size_t dimension() const { return x_.size(); }
  const LandmarkSet& landmarks() const { return landmarks_; }

  // Writes dimension() floats. Precondition: out.size() == dimension(), shape valid.
  void sketch(const Shape& shape, std::span<float> out) const;
  std::vector<float> sketch(const Shape& shape) const;

  // Sketches of shapes[i] go to out[i·dimension() ...]; out.size() == shapes.size()·dimension().
  void sketch_batch(std::span<const Shape> shapes, std::span<float> out) const;

  // Unweighted distances d(q_i, S) in double precision; out.size() == dimension().
  void distances(const Shape& shape, std::span<double> out) const;

  // The unweighted distances v_i / sqrt(w_i) recovered from a sketch (float). O(n).
  std::vector<float> unweighted(std::span<const float> sketch) const;

  // max_i |a_i − b_i| / sqrt(w_i), reduced by the largest error float storage can introduce:
  // a certified lower bound on d_H(A, B) and d_F(A, B) for sketches a, b of A and B. O(n).
  double linf_lower_bound(std::span<const float> a, std::span<const float> b) const;

  // Euclidean distance between two sketches (what an L2 vector index computes). O(n).
  static double weighted_distance(std::span<const float> a, std::span<const float> b);

  // The same two quantities from unweighted vectors a = unweighted(sketch of A), b likewise
  // (what collections keep in their vector index). The bound allows for the rounding of both
  // the sketch and the unweighted value to float. O(n).
  static double unweighted_linf_lower_bound(std::span<const float> a, std::span<const float> b);
  double weighted_distance_of_unweighted(std::span<const float> a, std::span<const float> b) const;
  // Relative rounding allowance of one unweighted value (used by the bounds above and by
  // callers that bound an L∞ distance computed elsewhere, e.g. by the vector index).
  static constexpr double kUnweightedRelativeError = 0x1.0p-21;

 private:
  LandmarkSet landmarks_;
  bool region_semantics_;
  std::vector<double> x_, y_, root_weight_, inverse_root_weight_;
};

}  // namespace waymark
