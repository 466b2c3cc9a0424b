// Continuous Hausdorff distance between shapes, on their segments (not sampled).
//
//   directed h(A, B) = sup over points a of A of min over points b of B of |a − b|
//   d_H(A, B)        = max(h(A, B), h(B, A))
// Points of a shape are its segments' points (polyline strokes, polygon ring edges) or its
// points (point set). LINESTRING (0 0, 10 0) against MULTIPOINT ((0 0), (10 0)) is 5: the
// maximum may lie inside a segment.
//
// Method: first every vertex of A, so that the running maximum starts from the largest vertex
// value (and a decision that must refuse usually finds its point there: hausdorff_at_most
// checks both directions' vertices before either's interiors). Then, along a segment of A,
// f(t) = d(A(t), B) is 1-Lipschitz, so over a piece of length L with end values f0, f1 the
// maximum is at most (f0 + f1 + L) / 2; and f ≤ d(·, s) for any one
// segment s of B, which is convex along the piece, so the maximum is also at most the larger
// of d(p0, s), d(p1, s) (this keeps shapes lying on each other, e.g. duplicates, cheap).
// Pieces whose bound cannot beat the best value found are discarded, others are halved
// (branch and bound). Evaluating
// f stops scanning B as soon as a segment closer than the running maximum is found (the early
// break of Taha & Hanbury, IEEE TPAMI 37(11), 2015), starting from the segment that was nearest
// for the previous point. The returned value is attained at the witness points, and the true
// distance lies in [value, value + tolerance], tolerance = relative_tolerance × the larger
// bounding-box diagonal (default 1e-9). Typical cost is O((n + m) · k) for k the segments
// scanned before a break; worst case O(n · m · log(L / tolerance)).
//
// Region semantics (option): a polygon stands for its filled region, so the distance from a
// point inside it to it is 0, and the supremum for a polygon A runs over its interior too. The
// interior search is a best-first 2D branch and bound with a cell budget; if the budget runs
// out the result says so (converged = false) and gives the interval it proved. Known weak
// case: where the boundaries of A and B coincide along a stretch, cells along it keep bounds
// near their size and the budget can run out; the value is still attained, only unproven.
#pragma once

#include "sketch/distance/prepared_shape.h"
#include "sketch/geometry/shape.h"

namespace waymark {

struct HausdorffOptions {
  bool region_semantics = false;
  double relative_tolerance = 1e-9;
  std::size_t region_cell_budget = 20'000;  // region semantics only
};

struct DistanceResult {
  double value = 0;        // attained: |from − to| == value (up to rounding)
  double upper_bound = 0;  // proved: the true distance is in [value, upper_bound]
  Point from;              // on the first shape
  Point to;                // on the second shape
  bool converged = true;   // false only when a work budget ran out before the tolerance was met
};

DistanceResult directed_hausdorff(const PreparedShape& a, const PreparedShape& b, const HausdorffOptions& options = {});
DistanceResult hausdorff(const PreparedShape& a, const PreparedShape& b, const HausdorffOptions& options = {});

// Decision form: is d_H(A, B) ≤ epsilon (to within the tolerance)? Returns as soon as a point
// farther than epsilon is found; cheaper than the value when the answer is "no". Ties within
// the tolerance answer yes.
bool hausdorff_at_most(const PreparedShape& a, const PreparedShape& b, double epsilon,
                       const HausdorffOptions& options = {});

// Conveniences on plain shapes (prepare both, then as above).
DistanceResult hausdorff(const Shape& a, const Shape& b, const HausdorffOptions& options = {});
DistanceResult directed_hausdorff(const Shape& a, const Shape& b, const HausdorffOptions& options = {});

}  // namespace waymark
