// Helper for the crash test: creates or opens a collection and upserts batches of seeded
// random shapes forever, printing "acked <first> <last>" after each batch's upsert returns
// (that is, once it is durable). The parent kills this process with SIGKILL at random moments.
// With "refit" as a third argument, a second thread refits the landmarks over and over
// meanwhile, so kills also land during re-sketching and generation switches (ingest then
// stops at 2000 shapes). With "graph", the collection is a graph (HNSW) one whose approximate
// index is rebuilt and its snapshot rewritten after every few batches, so kills also land
// during index builds and snapshot writes. With "compact", a second thread compacts the store
// over and over (printing "compacted <n>"), so kills land during compactions.
// Usage: ingest_child DIRECTORY FIRST_SHAPE_NUMBER [refit|graph|compact]
#include <cstdio>
#include <cstdlib>
#include <string>
#include <chrono>
#include <thread>
#include <vector>

#include "index/collection.h"
#include "support/random_shapes.h"

using namespace waymark;

int main(int argc, char** argv) {
  if (argc != 3 && argc != 4) return 2;
  const bool refit = argc == 4 && std::string(argv[3]) == "refit";
  const bool graph = argc == 4 && std::string(argv[3]) == "graph";
  const bool compact = argc == 4 && std::string(argv[3]) == "compact";
  const std::string directory = argv[1];
  std::size_t next = std::strtoull(argv[2], nullptr, 10);
  ApproximateIndexSettings approximate;
  if (graph) {
    approximate.minimum_size = 200;
    approximate.rebuild_fraction = 0.05;
  }
  Result<std::unique_ptr<Collection>> collection = Collection::open(directory, approximate);
  if (!collection) {
    CollectionSettings settings;
    settings.landmarks = *grid_landmarks(unit_frame_domain(), 32);
    if (graph) settings.index_kind = IndexKind::graph;
    settings.approximate = approximate;
    collection = Collection::create(directory, settings);
  }
  if (!collection) {
    std::fprintf(stderr, "%s\n", collection.status().to_string().c_str());
    return 1;
  }
  if (compact) {
    std::thread([&collection] {
      for (int n = 1;; ++n) {
        if ((*collection)->compact_store().is_ok()) {
          std::printf("compacted %d\n", n);
          std::fflush(stdout);
        }
      }
    }).detach();
  }
  if (refit) {
    std::thread([&collection] {
      for (std::uint64_t seed = 1;; ++seed) {
        RefitOptions options;
        options.seed = seed;
        options.batch_size = 50;
        options.sample_size = 100;
        options.candidate_count = 256;  // a cheap fit: the kills, not the fit, are under test
        options.pair_count = 500;
        RefitProgress progress;
        Result<std::uint64_t> generation = (*collection)->refit(options, progress);
        if (generation) {
          std::printf("generation %llu\n", static_cast<unsigned long long>(*generation));
          std::fflush(stdout);
        }
      }
    }).detach();
  }
  while (true) {
    // With refits, the collection stops growing at 2000 shapes so that a refit finishes well
    // within the parent's kill interval even under the sanitizers; refits go on regardless.
    if (refit && next >= 2000) {
      std::this_thread::sleep_for(std::chrono::milliseconds(10));
      continue;
    }
    std::vector<ShapeRecord> batch;
    for (int i = 0; i < 200; ++i, ++next) {
      SeededRandom random(next);
      batch.push_back({"shape-" + std::to_string(next), testing::random_walk(random, 8 + random.below(40)),
                       "{\"n\":" + std::to_string(next) + "}"});
    }
    if (Status s = (*collection)->upsert(batch); !s.is_ok()) {
      std::fprintf(stderr, "%s\n", s.to_string().c_str());
      return 1;
    }
    std::printf("acked %zu %zu\n", next - 200, next - 1);
    std::fflush(stdout);
  }
}
