// Continuous and discrete Fréchet distance: worked examples (values derived by hand, argued
// beside each) and GEOS 3.11 (libgeos-dev) as the outside reference.
#include <catch2/catch.hpp>
#include <cmath>

#include "sketch/distance/frechet.h"
#include "sketch/distance/prepared_shape.h"
#include "sketch/geometry/formats.h"
#include "support/geos_reference.h"
#include "support/shape_helpers.h"
#include "support/random_shapes.h"

using namespace waymark;
using testing::max_segment_length;
using testing::wkt;

namespace {

double frechet_value(const Shape& a, const Shape& b) {
  Result<DistanceResult> r = frechet(a, b);
  REQUIRE(r.is_ok());
  return r->value;
}

double discrete_value(const Shape& a, const Shape& b) {
  Result<DistanceResult> r = discrete_frechet(a, b);
  REQUIRE(r.is_ok());
  return r->value;
}

}  // namespace

TEST_CASE("VertexOffTheOtherCurveSetsTheDistance") {
  // By hand: (5 3) must be matched to a point of the x-axis segment, at least 3 away, and
  // matching equal x coordinates never exceeds 3.
  const Shape p = wkt("LINESTRING (0 0, 10 0)"), q = wkt("LINESTRING (0 1, 5 3, 10 1)");
  Result<DistanceResult> r = frechet(p, q);
  REQUIRE(r.is_ok());
  CHECK(r->value == Approx(3).margin(1e-9));
  CHECK(r->to == Point{5, 3});
  CHECK(r->from.x == Approx(5).margin(1e-9));
}

TEST_CASE("BackAndForthCurveIsFarInFrechetButNotHausdorff") {
  // By hand: Q runs 0→10→0→10 along the axis, P once 0→10. When Q turns at 0, P is at some p
  // and was at p' ≤ p when Q turned at 10, so ε ≥ max(10 − p, p) ≥ 5; parking P at 5 attains 5.
  // Discretely, Q's middle vertices (10 0) and (0 0) must both pair with P's ends: 10.
  const Shape p = wkt("LINESTRING (0 0, 10 0)"), q = wkt("LINESTRING (0 0, 10 0, 0 0, 10 0)");
  CHECK(frechet_value(p, q) == Approx(5).margin(1e-9));
  CHECK(discrete_value(p, q) == Approx(10).margin(1e-12));
}

TEST_CASE("ReversedCurveCostsItsEndpoints") {
  // By hand: the endpoint lower bound is 10, and pairing P(t) with Q(t) attains it.
  CHECK(frechet_value(wkt("LINESTRING (0 0, 10 0)"), wkt("LINESTRING (10 0, 0 0)")) == Approx(10).margin(1e-9));
  CHECK(frechet_value(wkt("LINESTRING (0 0, 3 4, 7 1)"), wkt("LINESTRING (0 0, 3 4, 7 1)")) == 0);
}

TEST_CASE("ClosedRingsKeepTheirStartPoint") {
  // The same square traversed from another corner: starts (0 0) and (10 0) are 10 apart, so
  // d_F ≥ 10; pairing each point with the one a quarter perimeter ahead never exceeds 10.
  const Shape a = wkt("POLYGON ((0 0, 10 0, 10 10, 0 10, 0 0))");
  const Shape b = wkt("POLYGON ((10 0, 10 10, 0 10, 0 0, 10 0))");
  CHECK(frechet_value(a, b) == Approx(10).margin(1e-9));
  CHECK(frechet_value(a, a) == 0);
}

TEST_CASE("CurveEndsAreTheCurvesFirstAndLastVertex") {
  // The index keeps curve_ends of every shape; the planner's endpoint bound uses curve_of's
  // front and back. They must agree, repeated vertices and closing rings included.
  for (const char* text : {"LINESTRING (0 0, 0 0, 3 4, 7 1, 7 1)", "POLYGON ((2 2, 10 0, 10 10, 2 2))",
                           "MULTILINESTRING ((5 5, 6 6, 7 5))"}) {
    INFO(text);
    const Shape shape = wkt(text);
    const std::optional<CurveEnds> ends = curve_ends(shape);
    Result<Path> curve = curve_of(shape);
    REQUIRE(ends.has_value());
    REQUIRE(curve.is_ok());
    CHECK(ends->first == curve->front());
    CHECK(ends->last == curve->back());
  }
  CHECK(curve_ends(wkt("POLYGON ((2 2, 10 0, 10 10, 2 2))"))->last == Point{2, 2});  // back to the start
  CHECK_FALSE(curve_ends(wkt("MULTIPOINT ((0 0), (1 1))")).has_value());
  CHECK_FALSE(curve_ends(wkt("MULTILINESTRING ((0 0, 1 1), (2 2, 3 3))")).has_value());
}

TEST_CASE("FrechetOfSeveralStrokesIsAnError") {
  Result<DistanceResult> r = frechet(wkt("MULTILINESTRING ((0 0, 1 1), (2 2, 3 3))"), wkt("LINESTRING (0 0, 1 1)"));
  REQUIRE_FALSE(r.is_ok());
  CHECK(r.status().code() == StatusCode::not_applicable);
  CHECK(r.status().message() == "Fréchet distance needs a single curve, but the shape has 2 strokes");
  CHECK(frechet(wkt("MULTIPOINT ((0 0), (1 1))"), wkt("LINESTRING (0 0, 1 1)")).status().code() ==
        StatusCode::not_applicable);
}

TEST_CASE("DecisionProcedureBracketsTheValue") {
  const Shape p = wkt("LINESTRING (0 0, 10 0)"), q = wkt("LINESTRING (0 0, 10 0, 0 0, 10 0)");
  CHECK(*frechet_at_most(p, q, 5 + 1e-9));
  CHECK_FALSE(*frechet_at_most(p, q, 5 - 1e-9));
}

// Q is P with the midpoint of every segment added: the same curve traced the same way, so
// d_F(P, Q) = 0 by the definition (a reparametrisation), up to the rounding of the midpoints
// (about 1e-13 at coordinates near 1000). A decision at 1e-10 must say yes. Deciding from the
// textbook discriminant (qb² − qa·qc) cancelled two squares of the segment's scale here and
// answered no for many of these pairs.
TEST_CASE("CurvesTracedAlikeAreWithinATinyEpsilon") {
  SeededRandom random(4242);
  for (int trial = 0; trial < 200; ++trial) {
    Shape p = testing::random_walk(random, 16);
    for (Point& v : p.parts.front()) v = {v.x + 1000, v.y - 1000};
    Shape q = p;
    Path& refined = q.parts.front();
    refined.clear();
    const Path& original = p.parts.front();
    for (std::size_t i = 0; i + 1 < original.size(); ++i) {
      refined.push_back(original[i]);
      refined.push_back({(original[i].x + original[i + 1].x) / 2, (original[i].y + original[i + 1].y) / 2});
    }
    refined.push_back(original.back());
    INFO("trial " << trial);
    CHECK(*frechet_at_most(p, q, 1e-10));
    CHECK(*frechet_at_most(q, p, 1e-10));
    CHECK(frechet_value(p, q) < 1e-10);
  }
}

TEST_CASE("DiscreteFrechetEqualsGeos") {
  // GEOS's GEOSFrechetDistance is the discrete Fréchet distance over vertices.
  testing::Geos geos;
  SeededRandom random(21);
  for (int trial = 0; trial < 200; ++trial) {
    const Shape a = testing::random_walk(random, 2 + random.below(40));
    const Shape b = testing::random_walk(random, 2 + random.below(40));
    Result<DistanceResult> ours = discrete_frechet(a, b);
    REQUIRE(ours.is_ok());
    CHECK(ours->value == Approx(geos.discrete_frechet(a, b)).epsilon(1e-13));
    // The witness pair is at the reported distance.
    CHECK(std::hypot(ours->from.x - ours->to.x, ours->from.y - ours->to.y) == Approx(ours->value).epsilon(1e-13));
  }
}

TEST_CASE("DensifiedGeosApproachesContinuousFrechetFromAbove") {
  // Densifying both curves every f of each segment gives vertex spacing δ ≤ f·L; the discrete
  // distance of the densified curves is ≥ the continuous one and at most δ above it (Eiter &
  // Mannila 1994, bound quoted from memory). Curves stay small: GEOS keeps an n×m matrix.
  testing::Geos geos;
  SeededRandom random(22);
  for (int trial = 0; trial < 30; ++trial) {
    const Shape a = testing::random_walk(random, 2 + random.below(12));
    const Shape b = testing::random_walk(random, 2 + random.below(12));
    const double fraction = 1.0 / 40;
    const double ours = frechet_value(a, b);
    const double sampled = geos.discrete_frechet(a, b, fraction);
    const double spacing = fraction * std::max(max_segment_length(a), max_segment_length(b));
    INFO("trial " << trial << ": ours " << ours << ", GEOS densified " << sampled);
    CHECK(ours <= sampled + 1e-9);
    CHECK(sampled - ours <= spacing + 1e-9);
  }
}
