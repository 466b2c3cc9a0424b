// Continuous Hausdorff distance: worked examples (values derived by hand, stated beside each)
// and GEOS 3.11 (libgeos-dev) as the outside reference.
#include <catch2/catch.hpp>
#include <cmath>

#include "sketch/distance/hausdorff.h"
#include "sketch/geometry/formats.h"
#include "support/geos_reference.h"
#include "support/shape_helpers.h"
#include "support/random_shapes.h"

using namespace waymark;
using testing::max_segment_length;
using testing::wkt;

TEST_CASE("MaximumInsideASegmentIsFound") {
  // By hand: along (0 0)–(10 0) the distance to {(0 0), (10 0)} is min(x, 10 − x), largest at x = 5.
  const DistanceResult r = hausdorff(wkt("LINESTRING (0 0, 10 0)"), wkt("MULTIPOINT ((0 0), (10 0))"));
  CHECK(r.value == Approx(5).margin(1e-12));
  CHECK(r.converged);
  CHECK(r.from.x == Approx(5).margin(1e-9));
  CHECK(std::hypot(r.from.x - r.to.x, r.from.y - r.to.y) == Approx(r.value).margin(1e-12));
  // The other direction is 0: both points lie on the segment.
  CHECK(directed_hausdorff(wkt("MULTIPOINT ((0 0), (10 0))"), wkt("LINESTRING (0 0, 10 0)")).value == 0);
}

TEST_CASE("PointAgainstSegment") {
  // By hand: (5 4) is 4 from the segment; the segment's ends are sqrt(5² + 4²) = sqrt(41) from it.
  const Shape point = wkt("POINT (5 4)"), segment = wkt("LINESTRING (0 0, 10 0)");
  CHECK(directed_hausdorff(point, segment).value == Approx(4).margin(1e-12));
  CHECK(hausdorff(point, segment).value == Approx(std::sqrt(41.0)).margin(1e-12));
}

TEST_CASE("CrossingLowerEnvelopeMaximum") {
  // By hand: segment (0 2)–(10 2) against points (0 0) and (10 0): along it the distance is
  // min(sqrt(x² + 4), sqrt((10 − x)² + 4)), largest where the two meet, at x = 5: sqrt(29).
  const DistanceResult r =
      directed_hausdorff(wkt("LINESTRING (0 2, 10 2)"), wkt("MULTIPOINT ((0 0), (10 0))"));
  CHECK(r.value == Approx(std::sqrt(29.0)).margin(1e-8));
  CHECK(r.upper_bound >= std::sqrt(29.0) - 1e-12);
}

TEST_CASE("PolygonBoundaryAndRegionSemanticsDiffer") {
  // By hand. Boundary semantics: the hole's edges are 4 from the outer square; the outer square
  // lies on B. Region semantics: B's region excludes the hole, whose centre (5 5) is 1 from B;
  // B's region lies inside A's.
  const Shape a = wkt("POLYGON ((0 0, 10 0, 10 10, 0 10, 0 0))");
  const Shape b = wkt("POLYGON ((0 0, 10 0, 10 10, 0 10, 0 0), (4 4, 6 4, 6 6, 4 6, 4 4))");
  CHECK(hausdorff(a, b).value == Approx(4).margin(1e-9));
  HausdorffOptions region;
  region.region_semantics = true;
  const DistanceResult r = hausdorff(a, b, region);
  CHECK(r.converged);
  CHECK(r.value == Approx(1).margin(1e-8));
  CHECK(directed_hausdorff(b, a, region).value == 0);
}

TEST_CASE("RegionInteriorMaximumOffTheCellGrid") {
  // By hand: the hole (3 3)–(5 5) has centre (4 4), 1 from its edges; no cell centre of the
  // search lands on (4 4) exactly, so this checks convergence, not luck.
  HausdorffOptions region;
  region.region_semantics = true;
  const DistanceResult r = directed_hausdorff(
      wkt("POLYGON ((0 0, 10 0, 10 10, 0 10, 0 0))"),
      wkt("POLYGON ((0 0, 10 0, 10 10, 0 10, 0 0), (3 3, 5 3, 5 5, 3 5, 3 3))"), region);
  CHECK(r.converged);
  CHECK(r.value == Approx(1).margin(1e-7));
  CHECK(r.value <= 1 + 1e-12);
}

TEST_CASE("PointInsidePolygonRegionIsAtDistanceZero") {
  HausdorffOptions region;
  region.region_semantics = true;
  const Shape square = wkt("POLYGON ((0 0, 10 0, 10 10, 0 10, 0 0))");
  CHECK(directed_hausdorff(wkt("POINT (3 4)"), square, region).value == 0);
  CHECK(directed_hausdorff(wkt("POINT (3 4)"), square).value == Approx(3).margin(1e-12));  // boundary
}

TEST_CASE("DecisionAgreesWithValue") {
  const Shape a = wkt("LINESTRING (0 2, 10 2)"), b = wkt("MULTIPOINT ((0 0), (10 0))");
  const double d = std::sqrt(29.0);
  CHECK(hausdorff_at_most(PreparedShape(a), PreparedShape(b), d * (1 + 1e-6)));
  CHECK_FALSE(hausdorff_at_most(PreparedShape(a), PreparedShape(b), d * (1 - 1e-6)));
}

TEST_CASE("PointSetsEqualGeosExactly") {
  // GEOS's discrete Hausdorff is exact on point sets (vertex-only comparison).
  testing::Geos geos;
  SeededRandom random(11);
  for (int trial = 0; trial < 200; ++trial) {
    const Shape a = testing::random_points(random, 1 + random.below(30));
    const Shape b = testing::random_points(random, 1 + random.below(30));
    CHECK(hausdorff(a, b).value == Approx(geos.hausdorff(a, b)).epsilon(1e-13));
  }
}

TEST_CASE("DensifiedGeosApproachesFromBelow") {
  // GEOS with densify fraction f samples each segment every f of its length; the distance to
  // B is 1-Lipschitz, so the sampled maximum is within f·L/2 below the continuous one.
  testing::Geos geos;
  SeededRandom random(12);
  for (int trial = 0; trial < 60; ++trial) {
    const Shape a = trial % 3 == 0 ? testing::random_star_polygon(random, 3 + random.below(12))
                                   : testing::random_walk(random, 2 + random.below(20), 2.0);
    const Shape b = trial % 2 == 0 ? testing::random_walk(random, 2 + random.below(20), 2.0)
                                   : testing::random_points(random, 1 + random.below(10));
    const double ours = hausdorff(a, b).value;
    const double fraction = 1.0 / 64;
    const double sampled = geos.hausdorff(a, b, fraction);
    const double gap = fraction * std::max(max_segment_length(a), max_segment_length(b)) / 2;
    INFO("trial " << trial << ": ours " << ours << ", GEOS densified " << sampled);
    CHECK(sampled <= ours + 1e-9);
    CHECK(ours - sampled <= gap + 1e-9);
    CHECK(geos.hausdorff(a, b) <= ours + 1e-9);  // vertex-only: a lower bound
  }
}
