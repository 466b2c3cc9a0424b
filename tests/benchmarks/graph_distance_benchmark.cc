// Graph (HNSW) build and search under L∞: FAISS's IndexHNSWFlat with METRIC_Linf as Debian
// builds it (its scalar loop for the "extra" metrics) and its own search, against waymark's
// graph index (the same FAISS graph over storage with a vectorised L∞ distance computer,
// searched by index/approximate_index.cc's own walk), on the same seeded vectors, alternating
// in one run.
// Usage: graph_distance_benchmark [VECTORS=100000] [DIMENSION=64] [QUERIES=500] [ROUNDS=2]
#include <faiss/IndexHNSW.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <functional>
#include <random>
#include <vector>

#include "index/approximate_index.h"

using namespace waymark;
using Clock = std::chrono::steady_clock;

namespace {

double seconds_since(Clock::time_point start) { return std::chrono::duration<double>(Clock::now() - start).count(); }

double median_milliseconds(std::size_t queries, const std::function<void(std::size_t)>& search) {
  std::vector<double> times;
  for (std::size_t q = 0; q < queries; ++q) {
    const auto start = Clock::now();
    search(q);
    times.push_back(seconds_since(start) * 1000);
  }
  std::sort(times.begin(), times.end());
  return times[times.size() / 2];
}

}  // namespace

int main(int argc, char** argv) {
  const std::size_t count = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 100000;
  const std::size_t dimension = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : 64;
  const std::size_t queries = argc > 3 ? std::strtoull(argv[3], nullptr, 10) : 500;
  const int rounds = argc > 4 ? std::atoi(argv[4]) : 2;
  if (count == 0 || dimension == 0 || queries == 0) return 2;
  std::mt19937 random(1);
  std::normal_distribution<float> normal;
  VectorIndex::Contents contents;
  contents.vectors.resize(count * dimension);
  for (float& value : contents.vectors) value = normal(random);
  for (std::size_t i = 0; i < count; ++i) contents.labels.push_back(static_cast<std::int64_t>(i));
  std::vector<float> query_vectors(queries * dimension);
  for (float& value : query_vectors) value = normal(random);
  const ApproximateIndexSettings settings;  // M and efConstruction as waymark uses them
  constexpr std::size_t kCandidates = 400;  // the default fast-mode budget for k = 10 (40·k)
  std::printf("%zu vectors of dimension %zu, M %zu, efConstruction %zu, %zu queries for %zu candidates\n", count,
              dimension, settings.graph_neighbours, settings.graph_build_effort, queries, kCandidates);
  std::printf("%-34s %10s %16s\n", "graph", "build s", "search p50 ms");
  for (int round = 0; round < rounds; ++round) {
    {
      faiss::IndexHNSWFlat plain(static_cast<int>(dimension), static_cast<int>(settings.graph_neighbours),
                                 faiss::METRIC_Linf);
      plain.hnsw.efConstruction = static_cast<int>(settings.graph_build_effort);
      const auto start = Clock::now();
      plain.add(static_cast<faiss::Index::idx_t>(count), contents.vectors.data());
      const double build = seconds_since(start);
      std::vector<float> distances(kCandidates);
      std::vector<faiss::Index::idx_t> rows(kCandidates);
      faiss::SearchParametersHNSW parameters;
      parameters.efSearch = kCandidates;
      const double search = median_milliseconds(queries, [&](std::size_t q) {
        plain.search(1, query_vectors.data() + q * dimension, kCandidates, distances.data(), rows.data(), &parameters);
      });
      std::printf("%-34s %10.2f %16.3f\n", "FAISS IndexHNSWFlat (scalar L∞)", build, search);
    }
    {
      ApproximateIndex graph(IndexKind::graph, std::vector<double>(dimension, 1.0), dimension, settings);
      const auto start = Clock::now();
      if (Status s = graph.build(contents); !s.is_ok()) {
        std::fprintf(stderr, "%s\n", s.to_string().c_str());
        return 1;
      }
      const double build = seconds_since(start);
      const double search = median_milliseconds(queries, [&](std::size_t q) {
        (void)graph.candidates(std::span(query_vectors).subspan(q * dimension, dimension), kCandidates);
      });
      std::printf("%-34s %10.2f %16.3f\n", "waymark graph (vectorised L∞)", build, search);
    }
  }
  return 0;
}
