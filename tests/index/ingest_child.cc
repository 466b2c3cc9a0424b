// Helper for the crash test: creates or opens a collection and upserts batches of seeded
// random shapes forever, printing "acked <first> <last>" after each batch's upsert returns
// (that is, once it is durable). The parent kills this process with SIGKILL at random moments.
// Usage: ingest_child DIRECTORY FIRST_SHAPE_NUMBER
#include <cstdio>
#include <cstdlib>
#include <string>
#include <vector>

#include "index/collection.h"
#include "support/random_shapes.h"

using namespace waymark;

int main(int argc, char** argv) {
  if (argc != 3) return 2;
  const std::string directory = argv[1];
  std::size_t next = std::strtoull(argv[2], nullptr, 10);
  Result<std::unique_ptr<Collection>> collection = Collection::open(directory);
  if (!collection) {
    CollectionSettings settings;
    settings.landmarks = *grid_landmarks(unit_frame_domain(), 32);
    collection = Collection::create(directory, settings);
  }
  if (!collection) {
    std::fprintf(stderr, "%s\n", collection.status().to_string().c_str());
    return 1;
  }
  while (true) {
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
