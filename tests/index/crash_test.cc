// Kill -9 during bulk ingest loses no acknowledged write and leaves no half batch.
// The child (ingest_child) prints a batch's ids only after upsert() returned; after each
// SIGKILL the collection is reopened and checked: every acknowledged id is present with the
// shape it was given, its stored sketch equals a fresh sketch of that shape, and ids appear in
// whole batches only (a batch is 200 consecutive ids). The second case also refits the
// landmarks over and over in the child: the reopened collection must serve one whole
// generation — every acknowledged shape's sketch equals a fresh sketch under the landmarks
// the manifest names. The third kills a graph collection while its approximate index is being
// rebuilt and its snapshot rewritten: the reopened collection must open (loading the snapshot or
// reporting why it rebuilds), rebuild its index and answer fast queries. The fourth compacts the
// store over and over in the child, so kills land while RocksDB rewrites its files.
#include <signal.h>
#include <sys/wait.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <set>
#include <thread>

#include "index/collection.h"
#include "sketch/landmarks/sketcher.h"
#include "support/random_shapes.h"

using namespace waymark;

#ifndef WAYMARK_INGEST_CHILD
#error "WAYMARK_INGEST_CHILD must name the ingest_child executable"
#endif

namespace {

void kill_rounds(const std::string& mode) {
  const bool refit = mode == "refit";
  const std::filesystem::path directory = std::filesystem::temp_directory_path() /
                                          ("waymark-crash-" + std::to_string(::getpid()) + "-" + mode);
  std::filesystem::remove_all(directory);
  std::size_t next = 0, acknowledged_total = 0;
  std::uint64_t newest_generation = 1;
  std::set<std::string> snapshot_states;  // graph mode: how each reopen found the snapshot
  std::size_t compactions = 0;             // compact mode: compactions the children finished
  SeededRandom timing(3);
  for (int round = 0; round < 8; ++round) {
    int pipe_ends[2];
    REQUIRE(pipe(pipe_ends) == 0);
    const pid_t child = fork();
    REQUIRE(child >= 0);
    if (child == 0) {
      dup2(pipe_ends[1], STDOUT_FILENO);
      close(pipe_ends[0]);
      execl(WAYMARK_INGEST_CHILD, WAYMARK_INGEST_CHILD, directory.c_str(), std::to_string(next).c_str(),
            mode.empty() ? nullptr : mode.c_str(), nullptr);
      _exit(127);
    }
    close(pipe_ends[1]);
    std::this_thread::sleep_for(std::chrono::milliseconds(refit ? 800 + timing.below(1000) : 300 + timing.below(600)));
    kill(child, SIGKILL);
    int status = 0;
    waitpid(child, &status, 0);
    CHECK(WIFSIGNALED(status));
    // Read every acknowledgement the child printed before it died.
    std::string printed;
    char buffer[4096];
    for (ssize_t n; (n = read(pipe_ends[0], buffer, sizeof buffer)) > 0;) printed.append(buffer, n);
    close(pipe_ends[0]);
    std::size_t last_acknowledged = next;  // exclusive
    std::uint64_t last_switched = 0;  // the newest generation the child saw switched to
    for (std::size_t pos = 0; (pos = printed.find("generation ", pos)) != std::string::npos; ++pos) {
      unsigned long long generation = 0;
      if (std::sscanf(printed.c_str() + pos, "generation %llu", &generation) == 1) last_switched = generation;
    }
    for (std::size_t pos = 0; (pos = printed.find("acked ", pos)) != std::string::npos; ++pos) {
      std::size_t first = 0, last = 0;
      if (std::sscanf(printed.c_str() + pos, "acked %zu %zu", &first, &last) == 2) last_acknowledged = last + 1;
    }
    acknowledged_total += last_acknowledged - next;
    for (std::size_t pos = 0; (pos = printed.find("compacted ", pos)) != std::string::npos; ++pos) ++compactions;

    Result<std::unique_ptr<Collection>> collection = Collection::open(directory);
    if (!collection && collection.status().code() == StatusCode::not_found) {
      // Killed while creating the collection: then nothing can have been acknowledged.
      CHECK(last_acknowledged == next);
      continue;
    }
    INFO("round " << round << ": " << (collection ? std::string("opened") : collection.status().to_string()));
    REQUIRE(collection.is_ok());
    const std::size_t stored = (*collection)->size();
    INFO("acknowledged up to " << last_acknowledged << ", stored " << stored);
    CHECK(stored >= last_acknowledged);   // nothing acknowledged is lost
    CHECK(stored % 200 == 0);              // whole batches only
    const std::uint64_t generation = (*collection)->settings().landmarks.generation;
    CHECK(generation >= last_switched);  // a switch, once returned, is durable
    newest_generation = std::max(newest_generation, generation);
    if (refit) CHECK((*collection)->settings().landmarks.layout == (generation > 1 ? LandmarkLayout::fitted : LandmarkLayout::grid));
    for (std::size_t id = 0; id < stored; id += 37) {
      Result<ShapeRecord> record = (*collection)->get("shape-" + std::to_string(id));
      REQUIRE(record.is_ok());
      SeededRandom random(id);
      const Shape expected = testing::random_walk(random, 8 + random.below(40));
      CHECK(record->shape == expected);
    }
    // Stored sketches equal fresh sketches: a query by each shape finds it at sketch distance 0.
    for (std::size_t id = 0; id < stored; id += 211) {
      Result<ShapeRecord> record = (*collection)->get("shape-" + std::to_string(id));
      REQUIRE(record.is_ok());
      QueryOptions options;
      options.metric = Metric::sketch;
      options.k = 1;
      Result<QueryAnswer> answer = (*collection)->nearest(record->shape, options);
      REQUIRE(answer.is_ok());
      REQUIRE(answer->hits.size() == 1);
      CHECK(answer->hits[0].sketch_distance == 0);
    }
    if (mode == "graph" && stored > 0) {
      const std::string snapshot = (*collection)->statistics().approximate.snapshot;
      INFO("snapshot state after the kill: " << snapshot);
      snapshot_states.insert(snapshot.substr(0, 40));
      CHECK((snapshot == "none" || snapshot.rfind("loaded", 0) == 0 || snapshot.rfind("rebuilding: ", 0) == 0));
      REQUIRE((*collection)->build_approximate_index_now().is_ok());
      Result<ShapeRecord> record = (*collection)->get("shape-0");
      REQUIRE(record.is_ok());
      QueryOptions options;
      options.k = 5;
      Result<QueryAnswer> answer = (*collection)->nearest(record->shape, options);
      REQUIRE(answer.is_ok());
      CHECK(answer->hits.size() == std::min<std::size_t>(5, stored));
    }
    next = stored;  // the next child continues after what is stored
  }
  WARN("acknowledged " << acknowledged_total << " shapes over 8 kills" << (refit ? " during refits" : "") << "; none lost");
  CHECK(acknowledged_total > 0);
  if (mode == "graph") {
    std::string seen;
    for (const std::string& state : snapshot_states) seen += " [" + state + "]";
    WARN("snapshot states found on reopen:" << seen);
  }
  if (mode == "compact") {
    WARN("compactions finished between kills: " << compactions);
    CHECK(compactions >= 4);  // the child compacts back to back: kills fall inside compactions
  }
  if (refit) {
    WARN("landmark generation reached: " << newest_generation);
    CHECK(newest_generation > 1);  // refits did switch between kills
  }
  std::filesystem::remove_all(directory);
}

}  // namespace

TEST_CASE("KillDuringIngestLosesNoAcknowledgedWrite") { kill_rounds(""); }

TEST_CASE("KillDuringRefitServesOneWholeGeneration") { kill_rounds("refit"); }

TEST_CASE("KillDuringIndexBuildsAndSnapshotWritesReopensCleanly") { kill_rounds("graph"); }

TEST_CASE("KillDuringStoreCompactionsLosesNoAcknowledgedWrite") { kill_rounds("compact"); }
