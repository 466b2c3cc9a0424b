// Collection benchmark: durable ingest rate, and kNN latency in fast mode, exact (certified)
// mode and a full exact scan, side by side in one run on the same queries.
// Usage: index_benchmark [SHAPES=100000] [VERTICES=64] [LANDMARKS=64] [QUERIES=50]
//                        [INDEX=exhaustive|graph|partitioned] [SCANNED_QUERIES=QUERIES]
//                        [EXACT_QUERIES=QUERIES] [REFIT=0|1|2] [FAST_BUDGETS=0] [WRITERS=1]
// Prints a table of medians and p99s (milliseconds), the median time in the vector indexes
// (QueryStats::index_milliseconds), the mean candidates drawn from the vector indexes, fetched
// from the store, refused by the decision procedure and given an exact value per query; the exact-mode / full-scan ratio,
// fast-mode recall@10 against the full scan and against certified exact-mode answers (the same
// answers, and affordable at a million shapes), and memory and disk per shape.
// The full exact scan runs on the first SCANNED_QUERIES queries only (it takes seconds per query
// at 100k shapes), exact mode on the first EXACT_QUERIES (0 leaves only fast mode, e.g. to
// profile it). REFIT=1 ends with a landmark refit (fit, re-sketch every stored shape, switch)
// and prints its time; REFIT=2 refits before the queries instead (and builds the approximate
// index again), so that they run on fitted landmarks in place of the grid. FAST_BUDGETS lists fast mode's candidate budgets, comma-separated, one
// row each (0: the default, 40·k; 100·k for Fréchet or a partitioned index, 150·k for both),
// to show what recall each buys.
// Each row runs every query before the next row starts: a query run in several rows in turn
// found the graph, vectors and copies it touches already in the CPU's caches for all but the
// first, which made later rows look faster than a fresh query is.
// A non-exhaustive run times its restarts in child processes: the same program with
// `--open DIRECTORY COPY_CAPACITY`, which opens the collection, prints the seconds and exits.
// With WAYMARK_BENCHMARK_KEEP set in the environment the collection is left in the temporary
// folder (it says where), e.g. to time or profile `--open` on it again. With
// WAYMARK_BENCHMARK_REUSE set as well, a later run with the same SHAPES, VERTICES, LANDMARKS,
// INDEX and WAYMARK_BENCHMARK_TEMPLATES opens that collection instead of making it again (ingest, build and restarts are
// then not timed), so that a change to queries alone is measured in a minute at 1M shapes.
// The kept collection is not checked against the arguments beyond its size: after changing
// anything the ingest or the index depends on, run once without REUSE.
// WRITERS threads call upsert() at once, each with its own batches, as concurrent clients of a
// server do (concurrent batches share a synced write: Collection::upsert).
#include <algorithm>
#include <atomic>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <limits>
#include <optional>
#include <string>
#include <thread>
#include <utility>
#include <vector>

#include "index/collection.h"
#include "support/random_shapes.h"
#include "support/recall.h"

using namespace waymark;
using Clock = std::chrono::steady_clock;

namespace {

double milliseconds(Clock::duration d) { return std::chrono::duration<double, std::milli>(d).count(); }

double percentile(std::vector<double> values, double p) {
  std::sort(values.begin(), values.end());
  return values[std::min(values.size() - 1, static_cast<std::size_t>(p * values.size()))];
}

// Perturbed copies of random-walk templates (seeded, invented): 500 unless
// WAYMARK_BENCHMARK_TEMPLATES says otherwise (the fewer templates, the more near-copies a
// query's answer must be told apart from).
Shape synthetic(std::size_t n, const std::vector<Shape>& templates) {
  SeededRandom random(n * 7919 + 1);
  return testing::jittered(templates[random.below(templates.size())], random, 0.3);
}

}  // namespace

// The child of a timed restart: opens DIRECTORY with float copies of up to COPY_CAPACITY bytes
// and prints the open's seconds, the seconds until the float copies (made after the open, in
// the background) were done, and the approximate index's snapshot note. It exits without
// closing: a server is ready once open() returns.
int open_and_exit(const char* directory, const char* copy_capacity) {
  set_resident_copy_capacity(std::strtoull(copy_capacity, nullptr, 10));
  const auto start = Clock::now();
  Result<std::unique_ptr<Collection>> collection = Collection::open(directory);
  const double seconds = milliseconds(Clock::now() - start) / 1000;
  if (!collection) {
    std::printf("0 0 %s\n", collection.status().to_string().c_str());
    std::fflush(stdout);
    std::_Exit(1);
  }
  (*collection)->wait_for_resident_copies();
  const double copies_seconds = milliseconds(Clock::now() - start) / 1000;
  std::printf("%.3f %.3f %s\n", seconds, copies_seconds, (*collection)->statistics().approximate.snapshot.c_str());
  std::fflush(stdout);
  std::_Exit(0);
}

int main(int argc, char** argv) {
  if (argc == 4 && std::string(argv[1]) == "--open") return open_and_exit(argv[2], argv[3]);
  const std::size_t shapes = argc > 1 ? std::strtoull(argv[1], nullptr, 10) : 100000;
  const std::size_t vertices = argc > 2 ? std::strtoull(argv[2], nullptr, 10) : 64;
  const std::size_t landmarks = argc > 3 ? std::strtoull(argv[3], nullptr, 10) : 64;
  const std::size_t queries = argc > 4 ? std::strtoull(argv[4], nullptr, 10) : 50;
  const Result<IndexKind> kind = parse_index_kind(argc > 5 ? argv[5] : "exhaustive");
  const std::size_t scanned_queries = argc > 6 ? std::strtoull(argv[6], nullptr, 10) : queries;
  const std::size_t exact_queries = argc > 7 ? std::strtoull(argv[7], nullptr, 10) : queries;
  const bool refit = argc > 8 && std::string(argv[8]) == "1";
  const bool refit_first = argc > 8 && std::string(argv[8]) == "2";
  // Comma-separated counts; anything else in the list makes it invalid (usage below).
  std::vector<std::size_t> fast_budgets;
  bool budgets_valid = true;
  for (const char* next = argc > 9 ? argv[9] : "0"; budgets_valid && *next != '\0';) {
    char* end = nullptr;
    const std::size_t budget = std::strtoull(next, &end, 10);
    budgets_valid = end != next && (*end == '\0' || (*end == ',' && end[1] != '\0'));
    fast_budgets.push_back(budget);
    next = *end == ',' ? end + 1 : end;
  }
  const std::size_t writers = argc > 10 ? std::strtoull(argv[10], nullptr, 10) : 1;
  if (!kind || queries == 0 || !budgets_valid || fast_budgets.empty() || writers == 0) {
    std::fprintf(stderr, "usage: index_benchmark [SHAPES] [VERTICES] [LANDMARKS] [QUERIES >= 1] [INDEX] [SCANNED_QUERIES] [EXACT_QUERIES] [REFIT] [FAST_BUDGETS] [WRITERS >= 1]\n");
    return 2;
  }
  const std::filesystem::path directory = std::filesystem::temp_directory_path() / "waymark-index-benchmark";
  const bool reuse = std::getenv("WAYMARK_BENCHMARK_REUSE") != nullptr && std::filesystem::exists(directory);
  SeededRandom random(1);
  std::vector<Shape> templates;
  const char* template_setting = std::getenv("WAYMARK_BENCHMARK_TEMPLATES");
  const std::size_t template_count = template_setting ? std::strtoull(template_setting, nullptr, 10) : 500;
  if (template_count == 0) {
    std::fprintf(stderr, "WAYMARK_BENCHMARK_TEMPLATES must be a number of at least 1\n");
    return 2;
  }
  for (std::size_t t = 0; t < template_count; ++t) templates.push_back(testing::random_walk(random, vertices));
  ApproximateIndexSettings build_now;
  build_now.minimum_size = 1;
  Result<std::unique_ptr<Collection>> collection = Status(StatusCode::not_found, "not made yet");
  double ingest_seconds = 0, reopen_seconds = 0, build_seconds = 0, longest_close_seconds = 0;
  std::vector<std::string> restarts;
  if (reuse) {
    collection = Collection::open(directory.string(), build_now);
    if (!collection || (*collection)->statistics().shape_count != shapes) {
      std::fprintf(stderr, "the kept collection in %s cannot be reused: %s\n", directory.string().c_str(),
                   collection ? "it holds another number of shapes" : collection.status().to_string().c_str());
      return 1;
    }
  } else {
    std::filesystem::remove_all(directory);
    CollectionSettings settings;
    settings.landmarks = *grid_landmarks(unit_frame_domain(), landmarks);
    settings.index_kind = *kind;
    settings.approximate.minimum_size = std::numeric_limits<std::size_t>::max();  // built below, timed
    collection = Collection::create(directory.string(), settings);
    if (!collection) {
      std::fprintf(stderr, "%s\n", collection.status().to_string().c_str());
      return 1;
    }

    // Ingest time is the upsert() calls' alone: making up the records is the clients' work, done
    // before the clock starts.
    std::vector<std::vector<ShapeRecord>> batches;
    for (std::size_t n = 0; n < shapes; ++n) {
      if (n % 1000 == 0) batches.emplace_back().reserve(1000);
      batches.back().push_back({"shape-" + std::to_string(n), synthetic(n, templates), "{}"});
    }
    std::atomic<std::size_t> next_batch = 0;
    std::atomic<bool> failed = false;
    auto write_batches = [&] {
      for (std::size_t b = next_batch++; b < batches.size() && !failed; b = next_batch++) {
        if (Status s = (*collection)->upsert(batches[b]); !s.is_ok()) {
          std::fprintf(stderr, "%s\n", s.to_string().c_str());
          failed = true;
        }
      }
    };
    const auto ingest_start = Clock::now();
    {
      std::vector<std::jthread> clients;
      for (std::size_t w = 1; w < writers; ++w) clients.emplace_back(write_batches);
      write_batches();
    }
    ingest_seconds = milliseconds(Clock::now() - ingest_start) / 1000;
    if (failed) return 1;
    batches = {};

    // Closes the collection, then opens it as a restarted server does; returns the open's
    // seconds. Closing (freeing indexes and copies; a server's exit skips most of it) is timed
    // apart: the longest close is printed with the restarts.
    auto reopen = [&] {
      const auto close_start = Clock::now();
      collection->reset();
      const auto start = Clock::now();
      longest_close_seconds = std::max(longest_close_seconds, milliseconds(start - close_start) / 1000);
      collection = Collection::open(directory.string(), build_now);
      return milliseconds(Clock::now() - start) / 1000;
    };
    reopen_seconds = reopen();
    const auto build_start = Clock::now();
    if (Status s = (*collection)->build_approximate_index_now(); !s.is_ok()) {
      std::fprintf(stderr, "%s\n", s.to_string().c_str());
      return 1;
    }
    build_seconds = milliseconds(Clock::now() - build_start) / 1000;
    // A restart as waymarkd does it: a fresh process opens the collection, and the approximate
    // index comes from the snapshot the build wrote. Timed in a child process (this program run
    // with --open): with one reading thread, reopening in this process took 3.1–3.7 s at 1M
    // shapes where a fresh process took 7.6–8.5 s (2026-12-03), the heap handing back memory that
    // the closed collection had freed. Three children: with float copies, without, and with again.
    if (*kind != IndexKind::exhaustive) {
      const auto close_start = Clock::now();
      collection->reset();
      longest_close_seconds = std::max(longest_close_seconds, milliseconds(Clock::now() - close_start) / 1000);
      const std::size_t copy_capacity = resident_copy_capacity();
      for (const std::size_t capacity : {copy_capacity, std::size_t{0}, copy_capacity}) {
        const std::string command = "'" + std::filesystem::read_symlink("/proc/self/exe").string() + "' --open '" +
                                    directory.string() + "' " + std::to_string(capacity);
        FILE* child = popen(command.c_str(), "r");
        char line[256] = {};
        const bool read = child && std::fgets(line, sizeof line, child) != nullptr;
        const int status = child ? pclose(child) : -1;
        double seconds = 0, copies_seconds = 0;
        char note[64] = {};
        if (!read || status != 0 || std::sscanf(line, "%lf %lf %63s", &seconds, &copies_seconds, note) != 3 ||
            std::string(note) != "loaded") {
          std::fprintf(stderr, "the restarted process did not load the snapshot: %s\n", line);
          return 1;
        }
        char figure[64];
        if (capacity > 0) {
          std::snprintf(figure, sizeof figure, "%.2f (copies done at %.2f)", seconds, copies_seconds);
        } else {
          std::snprintf(figure, sizeof figure, "%.2f", seconds);
        }
        restarts.push_back(figure);
      }
      collection = Collection::open(directory.string(), build_now);
      if (!collection) {
        std::fprintf(stderr, "%s\n", collection.status().to_string().c_str());
        return 1;
      }
    }
  }
  // A landmark refit of every stored shape: its seconds and shapes per second, or nullopt
  // (the error printed) when it fails.
  auto run_refit = [&]() -> std::optional<std::pair<double, double>> {
    RefitProgress progress;
    const auto started = Clock::now();
    if (Result<std::uint64_t> generation = (*collection)->refit(RefitOptions{}, progress); !generation) {
      std::fprintf(stderr, "%s\n", generation.status().to_string().c_str());
      return std::nullopt;
    }
    const double seconds = milliseconds(Clock::now() - started) / 1000;
    return std::pair{seconds, static_cast<double>(progress.shapes_done) / seconds};
  };
  if (refit_first) {
    const std::optional<std::pair<double, double>> refitted = run_refit();
    if (!refitted) return 1;
    std::printf("landmark refit before the queries: %.2f s\n", refitted->first);
    if (*kind != IndexKind::exhaustive) {
      if (Status s = (*collection)->build_approximate_index_now(); !s.is_ok()) {
        std::fprintf(stderr, "%s\n", s.to_string().c_str());
        return 1;
      }
    }
  }
  (*collection)->wait_for_resident_copies();  // queries are timed with every copy in place

  const CollectionStatistics statistics = (*collection)->statistics();
  const double raw_bytes = 16.0 * vertices + 4.0 * landmarks;  // vertices as float64 pairs + the vector
  std::printf("shapes %zu (jittered copies of %zu figures), vertices %zu, landmarks %zu, queries %zu (%zu with full "
              "scan), index %s, one thread\n",
              shapes, template_count, vertices, landmarks, queries, std::min(queries, scanned_queries), index_kind_name(*kind));
  if (reuse) {
    std::printf("the collection kept by an earlier run, reused: ingest, build and restarts not timed\n");
  } else {
    std::printf("durable ingest (batches of 1000, %zu writer%s): %.0f shapes/s\n", writers, writers == 1 ? "" : "s",
                shapes / ingest_seconds);
    std::printf("reopen (reads every record and sketch, rebuilds the exhaustive index): %.2f s\n", reopen_seconds);
    if (*kind != IndexKind::exhaustive) {
      std::printf("approximate index build after reopen: %.2f s\n", build_seconds);
      std::printf("restart in a fresh process with the approximate index's snapshot (open, load, catch up): %s s; "
                  "again with a copy capacity of 0 / as before: %s / %s s; closing took up to %.2f s more\n",
                  restarts[0].c_str(), restarts[1].c_str(), restarts[2].c_str(), longest_close_seconds);
    }
  }
  const double memory_bytes = static_cast<double>(statistics.index_bytes + statistics.resident_copy_bytes) / shapes;
  std::printf("per shape: %.0f bytes in memory (indexes and id maps %.0f, float copies %.0f), %.0f bytes on disk; raw "
              "vertices + vector %.0f bytes; memory / raw %.2f, disk / raw %.2f\n",
              memory_bytes, static_cast<double>(statistics.index_bytes) / shapes,
              static_cast<double>(statistics.resident_copy_bytes) / shapes,
              static_cast<double>(statistics.store_bytes) / shapes, raw_bytes, memory_bytes / raw_bytes,
              statistics.store_bytes / shapes / raw_bytes);
  std::printf("%-34s %10s %10s %13s %8s %8s %9s %12s %10s\n", "kNN k=10", "p50 ms", "p99 ms", "index p50 ms", "drawn",
              "fetched", "refused", "exact evals", "certified");
  for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
    struct Mode {
      std::string name;  // the row's label: metric, then mode
      bool exact = false;
      bool scan = false;
      std::size_t budget = 0;  // candidate budget; 0: the default
      std::vector<double> times;
      std::vector<double> index_times;  // QueryStats::index_milliseconds
      double drawn = 0, fetched = 0, refused_by_decision = 0, evaluations = 0;
      int certified = 0;
      std::vector<QueryAnswer> answers;  // by query; empty where the mode did not run
      testing::RecallCount recall, recall_against_certified;  // fast modes
      std::vector<double> kth_ratios;  // fast modes: k-th distance ÷ the certified k-th distance
    };
    std::vector<Mode> modes;
    auto add_mode = [&](const std::string& name, bool exact, bool scan, std::size_t budget) {
      Mode& mode = modes.emplace_back();
      mode.name = std::string(metric_name(metric)) + ", " + name;
      mode.exact = exact;
      mode.scan = scan;
      mode.budget = budget;
    };
    for (std::size_t budget : fast_budgets) {
      add_mode(budget == 0 ? "fast" : "fast, budget " + std::to_string(budget), false, false, budget);
    }
    const std::size_t exact_mode = modes.size(), scan_mode = exact_mode + 1;
    add_mode("exact (certified)", true, false, 0);
    add_mode("full exact scan", true, true, 0);
    std::vector<Shape> query_shapes;
    for (std::size_t q = 0; q < queries; ++q) query_shapes.push_back(synthetic(shapes + q, templates));
    for (Mode& mode : modes) {
      mode.answers.resize(queries);
      for (std::size_t q = 0; q < queries; ++q) {
        if ((mode.scan && q >= scanned_queries) || (mode.exact && !mode.scan && q >= exact_queries)) continue;
        QueryOptions options;
        options.metric = metric;
        options.exact = mode.exact;
        options.candidate_budget = mode.budget;
        const auto start = Clock::now();
        Result<QueryAnswer> answer = mode.scan ? (*collection)->nearest_by_full_scan(query_shapes[q], options)
                                               : (*collection)->nearest(query_shapes[q], options);
        mode.times.push_back(milliseconds(Clock::now() - start));
        if (!answer) {
          std::fprintf(stderr, "%s\n", answer.status().to_string().c_str());
          return 1;
        }
        mode.index_times.push_back(answer->stats.index_milliseconds);
        mode.drawn += answer->stats.candidates_drawn;
        mode.fetched += answer->stats.candidates_fetched;
        mode.refused_by_decision += answer->stats.pruned_by_decision;
        mode.evaluations += answer->stats.exact_evaluations;
        mode.certified += answer->certified;
        mode.answers[q] = std::move(*answer);
      }
    }
    for (std::size_t m = 0; m < exact_mode; ++m) {
      for (std::size_t q = 0; q < queries; ++q) {
        const QueryAnswer& answer = modes[m].answers[q];
        if (q < scanned_queries) modes[m].recall.add(modes[scan_mode].answers[q], answer);
        // A certified answer is the full scan's (tests/index check this on every query tried).
        const QueryAnswer& certified = modes[exact_mode].answers[q];
        if (!certified.certified) continue;
        modes[m].recall_against_certified.add(certified, answer);
        if (!certified.hits.empty() && certified.hits.back().distance > 0 && answer.hits.size() == certified.hits.size()) {
          modes[m].kth_ratios.push_back(answer.hits.back().distance / certified.hits.back().distance);
        }
      }
    }
    for (const Mode& mode : modes) {
      if (mode.times.empty()) continue;
      const double count = static_cast<double>(mode.times.size());
      std::printf("%-34s %10.2f %10.2f %13.2f %8.0f %8.0f %9.1f %12.1f %9d/%zu\n", mode.name.c_str(),
                  percentile(mode.times, 0.5), percentile(mode.times, 0.99), percentile(mode.index_times, 0.5),
                  mode.drawn / count, mode.fetched / count, mode.refused_by_decision / count,
                  mode.evaluations / count, mode.certified, mode.times.size());
    }
    if (!modes[scan_mode].times.empty() && !modes[exact_mode].times.empty()) {
      std::printf("%s: full scan / exact mode, median time ratio: %.1fx\n", metric_name(metric),
                  percentile(modes[scan_mode].times, 0.5) / percentile(modes[exact_mode].times, 0.5));
    }
    for (std::size_t m = 0; m < exact_mode; ++m) {
      const std::string& label = modes[m].name;
      if (!modes[scan_mode].times.empty()) {
        std::printf("%s: recall@10 against the full scan: %.3f\n", label.c_str(), modes[m].recall.recall());
      }
      if (modes[exact_mode].certified > 0) {
        std::printf("%s: recall@10 against the %d certified exact-mode answers: %.3f; 10th distance / certified "
                    "10th distance: median %.4f, p99 %.4f\n",
                    label.c_str(), modes[exact_mode].certified, modes[m].recall_against_certified.recall(),
                    modes[m].kth_ratios.empty() ? 0.0 : percentile(modes[m].kth_ratios, 0.5),
                    modes[m].kth_ratios.empty() ? 0.0 : percentile(modes[m].kth_ratios, 0.99));
      }
    }
  }
  if (refit) {
    const std::optional<std::pair<double, double>> refitted = run_refit();
    if (!refitted) return 1;
    std::printf("landmark refit (fit, re-sketch every shape, switch): %.2f s, %.0f shapes/s\n", refitted->first,
                refitted->second);
  }
  if (std::getenv("WAYMARK_BENCHMARK_KEEP") != nullptr) {
    std::printf("collection kept in %s\n", directory.string().c_str());
  } else {
    std::error_code ignored;
    std::filesystem::remove_all(directory, ignored);
  }
  return 0;
}
