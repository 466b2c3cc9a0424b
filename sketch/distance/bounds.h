// Cheap bounds on the exact distances, for a query planner that must skip work safely.
// Each is O(1) given boxes or endpoints, but for the coupling bound (O(n + m)). (The sketch
// lower bound lives with the sketcher in sketch/landmarks/sketcher.h; discrete Fréchet, an
// upper bound on the continuous one, in frechet.h.)
#pragma once

#include "sketch/geometry/shape.h"

namespace waymark {

// ≤ d_H(A, B) ≤ d_F(A, B): each extreme coordinate of A is attained by a point of A, and every
// point of B lies within B's box, so |max_x(A) − max_x(B)| (and the other three) bound the
// distance of that point to B. Valid for region semantics too (a region and its boundary share
// a bounding box).
double bounding_box_lower_bound(const Box& a, const Box& b);

// ≤ d_F(P, Q): every reparameterisation pairs first with first and last with last vertex.
double frechet_endpoint_lower_bound(Point p_first, Point p_last, Point q_first, Point q_last);

// ≥ d_F(P, Q) ≥ d_H(P, Q), for curves as frechet.h's curve_of makes them (for polygons, the
// ring's Hausdorff distance, which is what hausdorff.h computes without region semantics): the
// largest distance at the pairs of one coupling, built greedily from the first vertices to the
// last. Each step moves to the nearer of two pairs: P's next vertex with its nearest point on
// the rest of Q's current segment, or the same with the curves' roles swapped (the two next
// vertices together are never nearer). Between two consecutive pairs each curve moves along one
// segment, linearly, and the distance along two linear motions is convex, so it is largest at
// the pairs: a continuous coupling whose largest distance bounds the Fréchet distance from
// above. It is no Fréchet distance (which takes the best coupling, in O(n·m) per decision): a
// greedy step can lead astray. For curves traced alike it is usually close to d_F, however they
// are sampled (a vertex pairs with a segment's point, not only with a vertex). O(n + m); both
// curves need at least one vertex. Computed in double: within rounding of the bound.
double greedy_coupling_upper_bound(const Path& p, const Path& q);

}  // namespace waymark
