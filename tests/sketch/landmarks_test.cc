// Landmark sets, their file format, the sketcher and the fitting.
#include <catch2/catch.hpp>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <thread>

#include "sketch/distance/hausdorff.h"
#include "sketch/geometry/formats.h"
#include "sketch/landmarks/fitting.h"
#include "sketch/landmarks/sketcher.h"
#include "support/random_shapes.h"

using namespace waymark;

TEST_CASE("GridLandmarksSitAtCellCentres") {
  // By hand: a 2×2 grid over [0,4]² has centres (1,1), (3,1), (1,3), (3,3), weights 1/4.
  Result<LandmarkSet> set = grid_landmarks({0, 0, 4, 4}, 4);
  REQUIRE(set.is_ok());
  CHECK(set->points == std::vector<Point>{{1, 1}, {3, 1}, {1, 3}, {3, 3}});
  CHECK(set->weights == std::vector<double>{0.25, 0.25, 0.25, 0.25});
  // 32 on a square domain: 4 rows × 8 columns, the factorisation nearest to square.
  Result<LandmarkSet> rect = grid_landmarks(unit_frame_domain(), 32);
  REQUIRE(rect.is_ok());
  CHECK(rect->size() == 32);
  CHECK_FALSE(grid_landmarks({0, 0, 0, 1}, 4).is_ok());
  CHECK(grid_landmarks({0, 0, 1, 1}, 100000).status().code() == StatusCode::resource_exhausted);
}

TEST_CASE("RandomLandmarksAreReproducible") {
  Result<LandmarkSet> a = random_landmarks({0, 0, 1, 1}, 16, 7), b = random_landmarks({0, 0, 1, 1}, 16, 7);
  Result<LandmarkSet> c = random_landmarks({0, 0, 1, 1}, 16, 8);
  REQUIRE((a.is_ok() && b.is_ok() && c.is_ok()));
  CHECK(*a == *b);
  CHECK_FALSE(a->points == c->points);
  for (const Point& p : a->points) CHECK((p.x >= 0 && p.x < 1 && p.y >= 0 && p.y < 1));
}

TEST_CASE("LandmarkFileRoundTripsExactly") {
  Result<LandmarkSet> set = random_landmarks({-1.5, -2, 3, 0.1}, 9, 3);
  REQUIRE(set.is_ok());
  set->generation = 42;
  Result<LandmarkSet> read = parse_landmark_file(to_landmark_file(*set));
  REQUIRE(read.is_ok());
  CHECK(*read == *set);
  CHECK(read->checksum() == set->checksum());
}

TEST_CASE("ChecksumMismatchIsReported") {
  Result<LandmarkSet> set = grid_landmarks({0, 0, 1, 1}, 4);
  REQUIRE(set.is_ok());
  std::string text = to_landmark_file(*set);
  text[text.find("0.25")] = '1';  // one weight damaged
  Result<LandmarkSet> read = parse_landmark_file(text);
  REQUIRE_FALSE(read.is_ok());
  CHECK(read.status().code() == StatusCode::data_loss);
  CHECK(read.status().message().rfind("landmark file: checksum mismatch", 0) == 0);
  CHECK(read.status().where() == "line 10");
}

TEST_CASE("TruncatedLandmarkFileIsReported") {
  Result<LandmarkSet> set = grid_landmarks({0, 0, 1, 1}, 4);
  REQUIRE(set.is_ok());
  const std::string text = to_landmark_file(*set);
  Result<LandmarkSet> read = parse_landmark_file(text.substr(0, text.size() - 30));
  REQUIRE_FALSE(read.is_ok());
  CHECK(read.status().code() == StatusCode::data_loss);
  CHECK(read.status().message() == "landmark file: last line must be 'checksum <16 hex digits>' (file truncated?)");
  CHECK_FALSE(parse_landmark_file("").is_ok());
}

TEST_CASE("OversizedLandmarkCountIsRefusedBeforeReading") {
  // A file claiming more landmarks than the limit, with a valid checksum, is refused on its count.
  Result<LandmarkSet> set = grid_landmarks({0, 0, 1, 1}, 16);
  REQUIRE(set.is_ok());
  LandmarkLimits limits;
  limits.max_count = 8;
  Result<LandmarkSet> read = parse_landmark_file(to_landmark_file(*set), limits);
  REQUIRE_FALSE(read.is_ok());
  CHECK(read.status().where() == "line 5");
}

TEST_CASE("SaveAndLoadThroughAFile") {
  Result<LandmarkSet> set = grid_landmarks(unit_frame_domain(), 16);
  REQUIRE(set.is_ok());
  const std::string path = "landmarks_test_file.txt";
  REQUIRE(save_landmark_file(*set, path).is_ok());
  Result<LandmarkSet> read = load_landmark_file(path);
  REQUIRE(read.is_ok());
  CHECK(*read == *set);
  std::remove(path.c_str());
  CHECK(load_landmark_file(path).status().code() == StatusCode::io_error);
  const Status unwritable = save_landmark_file(*set, "no-such-directory/landmarks.txt");
  CHECK(unwritable.code() == StatusCode::io_error);
  CHECK(unwritable.message().rfind("cannot create 'no-such-directory/landmarks.txt.tmp'", 0) == 0);
}

TEST_CASE("SketchMatchesScalarDistances") {
  // Reference: distance to each segment by the textbook projection formula, one at a time.
  Result<LandmarkSet> set = random_landmarks({-2, -2, 12, 12}, 37, 5);  // odd count: vector tails
  REQUIRE(set.is_ok());
  const Sketcher sketcher(*set);
  SeededRandom random(6);
  for (int trial = 0; trial < 50; ++trial) {
    const Shape shape = testing::random_walk(random, 2 + random.below(60));
    const std::vector<float> sketch = sketcher.sketch(shape);
    for (std::size_t k = 0; k < set->size(); ++k) {
      const Point q = set->points[k];
      double best = INFINITY;
      const Path& path = shape.parts[0];
      for (std::size_t i = 0; i + 1 < path.size(); ++i) {
        const double dx = path[i + 1].x - path[i].x, dy = path[i + 1].y - path[i].y;
        double t = ((q.x - path[i].x) * dx + (q.y - path[i].y) * dy) / (dx * dx + dy * dy);
        t = std::clamp(t, 0.0, 1.0);
        best = std::min(best, std::hypot(q.x - path[i].x - t * dx, q.y - path[i].y - t * dy));
      }
      CHECK(sketch[k] == Approx(std::sqrt(set->weights[k]) * best).epsilon(1e-6));
    }
  }
}

TEST_CASE("RegionSketchIsZeroInsidePolygon") {
  Result<LandmarkSet> set = grid_landmarks({0, 0, 4, 4}, 4);  // (1,1), (3,1), (1,3), (3,3)
  REQUIRE(set.is_ok());
  Result<Shape> square = parse_wkt("POLYGON ((0 0, 2 0, 2 2, 0 2, 0 0))");
  REQUIRE(square.is_ok());
  std::vector<double> boundary(4), region(4);
  Sketcher(*set, false).distances(*square, boundary);
  Sketcher(*set, true).distances(*square, region);
  // By hand: (1,1) is inside, 1 from the boundary; (3,1) is 1 to the right; (3,3) is sqrt(2) away.
  CHECK(boundary[0] == Approx(1));
  CHECK(region[0] == 0);
  CHECK(region[1] == Approx(1));
  CHECK(region[3] == Approx(std::sqrt(2.0)));
}

TEST_CASE("FittedLandmarksFollowWhereShapesDiffer") {
  // Shapes differ only in the left half of the domain, so landmarks should favour it; the
  // uniform floor still leaves some on the right.
  std::vector<Shape> sample;
  SeededRandom random(9);
  for (int i = 0; i < 40; ++i) {
    Shape s;
    s.kind = ShapeKind::polyline;
    const double y = -0.4 + 0.8 * random.uniform();
    s.parts.push_back({{-0.5, y}, {-0.3, -y}, {0.5, 0.45}, {0.5, 0.5}});
    sample.push_back(s);
  }
  FitOptions options;
  options.count = 64;
  options.seed = 3;
  Result<LandmarkSet> set = fit_landmarks(sample, options);
  REQUIRE(set.is_ok());
  CHECK(set->size() == 64);
  CHECK(set->layout == LandmarkLayout::fitted);
  int left = 0;
  for (const Point& p : set->points) left += p.x < 0;
  CHECK(left >= 40);
  for (double w : set->weights) CHECK(w > 0);
  // Identical shapes carry no information to fit from.
  std::vector<Shape> same(5, sample[0]);
  CHECK_FALSE(fit_landmarks(same, options).is_ok());
}

TEST_CASE("FittedWeightsEstimateTheCandidateMean") {
  // Importance weights 1/(m·p·C) make Σ w Δ² an unbiased estimate of the mean of Δ² over the C
  // candidates, whatever the probabilities p. So the ratio estimate / exact averages to 1 over
  // independent fits (each seed draws its own candidates, pairs and landmarks).
  std::vector<Shape> sample;
  SeededRandom random(10);
  for (int i = 0; i < 20; ++i) sample.push_back(apply_frame(testing::random_walk(random, 8), Frame::unit));
  FitOptions options;
  options.count = 32;
  options.candidate_count = 256;
  options.pair_count = 300;
  const int fits = 300;
  double ratio_sum = 0;
  for (int f = 0; f < fits; ++f) {
    options.seed = 100 + f;
    Result<LandmarkSet> set = fit_landmarks(sample, options);
    Result<LandmarkSet> candidates = random_landmarks(options.domain, options.candidate_count, options.seed);
    REQUIRE((set.is_ok() && candidates.is_ok()));
    std::vector<double> da(256), db(256);
    Sketcher(*candidates).distances(sample[0], da);
    Sketcher(*candidates).distances(sample[1], db);
    double exact = 0;
    for (int c = 0; c < 256; ++c) exact += (da[c] - db[c]) * (da[c] - db[c]) / 256;
    const Sketcher sketcher(*set);
    const double estimate = std::pow(Sketcher::weighted_distance(sketcher.sketch(sample[0]), sketcher.sketch(sample[1])), 2);
    ratio_sum += estimate / exact;
  }
  CHECK(ratio_sum / fits == Approx(1).epsilon(0.05));
}

TEST_CASE("SketcherIsSafeToShareBetweenThreads", "[concurrency]") {
  // Four threads sketch the same shapes through one Sketcher (thread-local scratch buffers);
  // every result must equal the single-threaded one. ThreadSanitizer runs would flag races.
  Result<LandmarkSet> set = random_landmarks({-2, -2, 12, 12}, 64, 12);
  REQUIRE(set.is_ok());
  const Sketcher sketcher(*set);
  SeededRandom random(13);
  std::vector<Shape> shapes;
  for (int i = 0; i < 200; ++i) shapes.push_back(testing::random_walk(random, 2 + random.below(80)));
  std::vector<float> expected(shapes.size() * 64), parallel[4];
  sketcher.sketch_batch(shapes, expected);
  std::vector<std::thread> threads;
  for (auto& out : parallel) {
    out.resize(expected.size());
    threads.emplace_back([&] { sketcher.sketch_batch(shapes, out); });
  }
  for (auto& thread : threads) thread.join();
  for (const auto& out : parallel) CHECK(out == expected);
}
