// Benchmarks of the geometry core, with GEOS 3.11 computing the same thing side by side where
// it has it. Run: scripts/run-benchmarks.sh (prints medians of repeated runs, one thread).
//
// Targets (issue: geometry core), on the 2-core machine:
//   sketch, 100-vertex polyline, 64 landmarks           ≤ 10 µs
//   Fréchet decision, 200 × 200 random walks, ε ±10%     ≤ 100 µs
//   Fréchet value, same curves                           ≤ 1 ms
//   continuous Hausdorff, 200 × 200                      ≤ 100 µs
//   discrete Fréchet, 1000 × 1000                        ≤ 5 ms, O(n + m) memory
#include <benchmark/benchmark.h>
#include <geos_c.h>

#include <map>
#include <vector>

#include "sketch/distance/frechet.h"
#include "sketch/distance/hausdorff.h"
#include "sketch/geometry/formats.h"
#include "sketch/landmarks/sketcher.h"
#include "support/random_shapes.h"

using namespace waymark;

namespace {

constexpr int kPairs = 16;  // distinct seeded curve pairs cycled through, so no one pair dominates

struct CurvePairs {
  std::vector<Shape> first, second;
  std::vector<double> frechet_value;
};

// Random walks with step 1; the second of each pair is the first plus noise, so distances are
// small compared with the curves (the case re-ranking meets).
const CurvePairs& curve_pairs(std::size_t vertices) {
  static std::map<std::size_t, CurvePairs> cache;
  CurvePairs& pairs = cache[vertices];
  if (pairs.first.empty()) {
    SeededRandom random(vertices);
    for (int i = 0; i < kPairs; ++i) {
      Shape a = testing::random_walk(random, vertices);
      Shape b = testing::jittered(a, random, 0.6);
      pairs.frechet_value.push_back(vertices <= 400 ? frechet(a, b)->value : 0);
      pairs.first.push_back(std::move(a));
      pairs.second.push_back(std::move(b));
    }
  }
  return pairs;
}

GEOSContextHandle_t geos() {
  static GEOSContextHandle_t context = GEOS_init_r();
  return context;
}

GEOSGeometry* to_geos(const Shape& shape) {
  GEOSWKTReader* reader = GEOSWKTReader_create_r(geos());
  GEOSGeometry* g = GEOSWKTReader_read_r(geos(), reader, to_wkt(shape).c_str());
  GEOSWKTReader_destroy_r(geos(), reader);
  return g;
}

void Sketch100Vertices64Landmarks(benchmark::State& state) {
  const Sketcher sketcher(*grid_landmarks({-30, -30, 30, 30}, 64));
  SeededRandom random(1);
  std::vector<Shape> shapes;
  for (int i = 0; i < kPairs; ++i) shapes.push_back(testing::random_walk(random, 100));
  std::vector<float> out(64);
  std::size_t i = 0;
  for (auto _ : state) {
    sketcher.sketch(shapes[i++ % kPairs], out);
    benchmark::DoNotOptimize(out.data());
  }
}
BENCHMARK(Sketch100Vertices64Landmarks);

void FrechetDecision200(benchmark::State& state) {
  const CurvePairs& pairs = curve_pairs(200);
  std::vector<Path> p, q;
  for (int k = 0; k < kPairs; ++k) {
    p.push_back(*curve_of(pairs.first[k]));
    q.push_back(*curve_of(pairs.second[k]));
  }
  const double factor = state.range(0) / 100.0;  // ε = factor × d_F
  std::size_t i = 0;
  for (auto _ : state) {
    const std::size_t k = i++ % kPairs;
    benchmark::DoNotOptimize(frechet_at_most(p[k], q[k], factor * pairs.frechet_value[k]));
  }
}
BENCHMARK(FrechetDecision200)->Arg(90)->Arg(110);

void FrechetValue200(benchmark::State& state) {
  const CurvePairs& pairs = curve_pairs(200);
  std::size_t i = 0;
  for (auto _ : state) {
    const std::size_t k = i++ % kPairs;
    benchmark::DoNotOptimize(frechet(pairs.first[k], pairs.second[k]));
  }
}
BENCHMARK(FrechetValue200)->Unit(benchmark::kMicrosecond);

void Hausdorff200(benchmark::State& state) {
  const CurvePairs& pairs = curve_pairs(200);
  std::vector<PreparedShape> a, b;
  for (int k = 0; k < kPairs; ++k) {
    a.emplace_back(pairs.first[k]);
    b.emplace_back(pairs.second[k]);
  }
  std::size_t i = 0;
  for (auto _ : state) {
    const std::size_t k = i++ % kPairs;
    benchmark::DoNotOptimize(hausdorff(a[k], b[k]));
  }
}
BENCHMARK(Hausdorff200);

// The decision at ε = factor × d_H: a query planner's refusals (90) and acceptances (110).
void HausdorffDecision200(benchmark::State& state) {
  const CurvePairs& pairs = curve_pairs(200);
  std::vector<PreparedShape> a, b;
  std::vector<double> value;
  for (int k = 0; k < kPairs; ++k) {
    a.emplace_back(pairs.first[k]);
    b.emplace_back(pairs.second[k]);
    value.push_back(hausdorff(a.back(), b.back()).value);
  }
  const double factor = state.range(0) / 100.0;
  std::size_t i = 0;
  for (auto _ : state) {
    const std::size_t k = i++ % kPairs;
    benchmark::DoNotOptimize(hausdorff_at_most(a[k], b[k], factor * value[k]));
  }
}
BENCHMARK(HausdorffDecision200)->Arg(90)->Arg(110);

// GEOS's Hausdorff compares vertices with segments: a lower bound, not the continuous value.
void GeosDiscreteHausdorff200(benchmark::State& state) {
  const CurvePairs& pairs = curve_pairs(200);
  std::vector<GEOSGeometry*> a, b;
  for (int k = 0; k < kPairs; ++k) {
    a.push_back(to_geos(pairs.first[k]));
    b.push_back(to_geos(pairs.second[k]));
  }
  std::size_t i = 0;
  double out;
  for (auto _ : state) {
    const std::size_t k = i++ % kPairs;
    GEOSHausdorffDistance_r(geos(), a[k], b[k], &out);
    benchmark::DoNotOptimize(out);
  }
}
BENCHMARK(GeosDiscreteHausdorff200);

void DiscreteFrechet1000(benchmark::State& state) {
  const CurvePairs& pairs = curve_pairs(1000);
  std::vector<Path> p, q;
  for (int k = 0; k < 4; ++k) {
    p.push_back(*curve_of(pairs.first[k]));
    q.push_back(*curve_of(pairs.second[k]));
  }
  std::size_t i = 0;
  for (auto _ : state) {
    const std::size_t k = i++ % 4;
    benchmark::DoNotOptimize(discrete_frechet(p[k], q[k]));
  }
}
BENCHMARK(DiscreteFrechet1000)->Unit(benchmark::kMillisecond);

void GeosDiscreteFrechet1000(benchmark::State& state) {
  const CurvePairs& pairs = curve_pairs(1000);
  GEOSGeometry* a = to_geos(pairs.first[0]);
  GEOSGeometry* b = to_geos(pairs.second[0]);
  double out;
  for (auto _ : state) {
    GEOSFrechetDistance_r(geos(), a, b, &out);
    benchmark::DoNotOptimize(out);
  }
}
BENCHMARK(GeosDiscreteFrechet1000)->Unit(benchmark::kMillisecond);

// Reading one GeoJSON LineString of 64 vertices at full precision, as bulk ingest reads a
// line's geometry (its coordinates passed over by their brackets, then read as numbers).
void ReadGeoJsonLineString64(benchmark::State& state) {
  SeededRandom random(1);
  std::vector<std::string> texts;
  for (int i = 0; i < kPairs; ++i) texts.push_back(to_geojson(testing::random_walk(random, 64)));
  std::size_t i = 0, bytes = 0;
  for (auto _ : state) {
    const std::string& text = texts[i++ % kPairs];
    Result<Shape> shape = parse_geojson(text, ParseOptions{});
    benchmark::DoNotOptimize(shape);
    bytes += text.size();
  }
  state.SetBytesProcessed(static_cast<std::int64_t>(bytes));
}
BENCHMARK(ReadGeoJsonLineString64);

}  // namespace

BENCHMARK_MAIN();
