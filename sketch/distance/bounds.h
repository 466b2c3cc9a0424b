// Cheap bounds on the exact distances, for a query planner that must skip work safely.
// Each is O(1) given boxes or endpoints. (The sketch lower bound lives with the sketcher in
// sketch/landmarks/sketcher.h; discrete Fréchet, an upper bound on the continuous one, in
// frechet.h.)
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

}  // namespace waymark
