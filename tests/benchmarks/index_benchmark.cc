// Collection benchmark: durable ingest rate, and kNN latency in fast mode, exact (certified)
// mode and a full exact scan, side by side in one run on the same queries.
// Usage: index_benchmark [SHAPES=100000] [VERTICES=64] [LANDMARKS=64] [QUERIES=50]
// Prints a table of medians and p99s (milliseconds) and the exact-mode / full-scan ratio.
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <string>
#include <vector>

#include "index/collection.h"
#include "support/random_shapes.h"

using namespace waymark;
using Clock = std::chrono::steady_clock;

namespace {

double milliseconds(Clock::duration d) { return std::chrono::duration<double, std::milli>(d).count(); }

double percentile(std::vector<double> values, double p) {
  std::sort(values.begin(), values.end());
  return values[std::min(values.size() - 1, static_cast<std::size_t>(p * values.size()))];
}

// Perturbed copies of 500 random-walk templates (seeded, invented).
Shape synthetic(std::size_t n, const std::vector<Shape>& templates) {
  SeededRandom random(n * 7919 + 1);
  return testing::jittered(templates[random.below(templates.size())], random, 0.3);
}

}  // namespace

int main(int argc, char** argv) {
  const std::size_t shapes = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 100000;
  const std::size_t vertices = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : 64;
  const std::size_t landmarks = argc > 3 ? std::strtoull(argv[3], nullptr, 10) : 64;
  const std::size_t queries = argc > 4 ? std::strtoull(argv[4], nullptr, 10) : 50;
  const std::filesystem::path directory = std::filesystem::temp_directory_path() / "waymark-index-benchmark";
  std::filesystem::remove_all(directory);

  SeededRandom random(1);
  std::vector<Shape> templates;
  for (int t = 0; t < 500; ++t) templates.push_back(testing::random_walk(random, vertices));
  CollectionSettings settings;
  settings.landmarks = *grid_landmarks(unit_frame_domain(), landmarks);
  auto collection = Collection::create(directory.string(), settings);
  if (!collection) {
    std::fprintf(stderr, "%s\n", collection.status().to_string().c_str());
    return 1;
  }

  std::vector<ShapeRecord> batch;
  const auto ingest_start = Clock::now();
  for (std::size_t n = 0; n < shapes; ++n) {
    batch.push_back({"shape-" + std::to_string(n), synthetic(n, templates), "{}"});
    if (batch.size() == 1000 || n + 1 == shapes) {
      if (Status s = (*collection)->upsert(batch); !s.is_ok()) {
        std::fprintf(stderr, "%s\n", s.to_string().c_str());
        return 1;
      }
      batch.clear();
    }
  }
  const double ingest_seconds = milliseconds(Clock::now() - ingest_start) / 1000;

  const auto reopen_start = Clock::now();
  collection->reset();
  collection = Collection::open(directory.string());
  const double reopen_seconds = milliseconds(Clock::now() - reopen_start) / 1000;

  std::printf("shapes %zu, vertices %zu, landmarks %zu, queries %zu, one thread\n", shapes, vertices, landmarks, queries);
  std::printf("durable ingest (batches of 1000): %.0f shapes/s\n", shapes / ingest_seconds);
  std::printf("reopen (rebuilds the flat index from stored sketches): %.2f s\n", reopen_seconds);
  std::printf("%-34s %10s %10s %12s %10s\n", "kNN k=10", "p50 ms", "p99 ms", "exact evals", "certified");
  for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
    struct Mode { const char* name; bool exact; bool scan; std::vector<double> times; double evaluations = 0; int certified = 0; };
    std::vector<Mode> modes = {{"fast", false, false, {}}, {"exact (certified)", true, false, {}}, {"full exact scan", true, true, {}}};
    for (std::size_t q = 0; q < queries; ++q) {
      const Shape query = synthetic(shapes + q, templates);
      for (Mode& mode : modes) {
        QueryOptions options;
        options.metric = metric;
        options.exact = mode.exact;
        const auto start = Clock::now();
        Result<QueryAnswer> answer = mode.scan ? (*collection)->nearest_by_full_scan(query, options)
                                               : (*collection)->nearest(query, options);
        mode.times.push_back(milliseconds(Clock::now() - start));
        if (!answer) {
          std::fprintf(stderr, "%s\n", answer.status().to_string().c_str());
          return 1;
        }
        mode.evaluations += answer->stats.exact_evaluations;
        mode.certified += answer->certified;
      }
    }
    for (const Mode& mode : modes) {
      char label[64];
      std::snprintf(label, sizeof label, "%s, %s", metric_name(metric), mode.name);
      std::printf("%-34s %10.2f %10.2f %12.0f %9d/%zu\n", label, percentile(mode.times, 0.5),
                  percentile(mode.times, 0.99), mode.evaluations / queries, mode.certified, queries);
    }
    std::printf("%s: full scan / exact mode, median time ratio: %.1fx\n", metric_name(metric),
                percentile(modes[2].times, 0.5) / percentile(modes[1].times, 0.5));
  }
  std::error_code ignored;
  std::filesystem::remove_all(directory, ignored);
  return 0;
}
