// Fréchet distances between two curves.
//
// A curve is a polyline with one stroke, or a polygon with one ring; a ring is traversed from
// its first vertex as given, in its given direction, and back to that vertex (the start point
// is not optimised over). Other shapes — point sets, several strokes or rings — get a
// not_applicable error saying so. Repeated consecutive vertices are dropped first.
//
// Continuous (Alt & Godau, "Computing the Fréchet distance between two polygonal curves",
// IJCGA 5, 1995):
//   frechet_at_most(P, Q, ε) decides d_F ≤ ε on the free-space diagram, cell by cell, keeping
//   one row of reachable intervals: O(n·m) time, O(n + m) memory, with an early "no" once no
//   cell of a row is reachable.
//   frechet(P, Q) finds the value among the critical values — the endpoint distances, the
//   vertex-to-segment distances, and the distances at which a segment's point is equidistant
//   from two vertices of the other curve — by binary search with the decision procedure over
//   the candidates between a lower bound (endpoints) and an upper bound (discrete Fréchet),
//   after six plain bisection steps have narrowed that bracket. Before them, one decision at
//   the upper bound records which free-space cells are reachable: the optimal path crosses no
//   other cell, and for similar curves they form a band around the matching. Reachability
//   only shrinks as ε falls, so every later decision visits that band alone (narrowed again at
//   each "yes"), and candidates are collected only on its cells' boundaries. Equidistant pairs
//   come from a sweep over the parameter ranges where each vertex's distance lies in the
//   bracket, not from all pairs. Each decision is made at candidate + 1e-10 × the curves'
//   scale to absorb rounding, so the value is within that of the true distance. Should
//   rounding leave no candidate deciding yes, the result has converged =
//   false and carries the proven bracket [value, upper_bound] instead.
//   Cost: two O(n·m) decisions (endpoints, upper bound) and the discrete distance, then about
//   6 + log2(candidates) decisions and the candidate scans in O(cells in the band) each, plus
//   a sort per segment.
// Discrete (Eiter & Mannila, "Computing discrete Fréchet distance", TU Wien CD-TR 94/64,
// 1994): the coupling distance over vertices only, by dynamic programming in O(n·m) time and
// O(n + m) memory. It is an upper bound on the continuous distance. Its witness is a vertex
// pair at exactly the distance (the first in order), not necessarily on an optimal coupling.
#pragma once

#include "sketch/distance/hausdorff.h"  // DistanceResult
#include "sketch/geometry/shape.h"

namespace waymark {

// The curve of a shape as described above, or not_applicable.
Result<Path> curve_of(const Shape& shape);

Result<bool> frechet_at_most(const Shape& p, const Shape& q, double epsilon);
Result<DistanceResult> frechet(const Shape& p, const Shape& q);
Result<DistanceResult> discrete_frechet(const Shape& p, const Shape& q);

// The same on curves already extracted with curve_of (at least two vertices, no repeats).
bool frechet_at_most(const Path& p, const Path& q, double epsilon);
DistanceResult frechet(const Path& p, const Path& q);
DistanceResult discrete_frechet(const Path& p, const Path& q);

}  // namespace waymark
