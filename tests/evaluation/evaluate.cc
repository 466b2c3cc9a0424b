// The evaluation report's measurements: retrieval quality on labelled real shapes, fast-mode
// recall against the candidate budget, scaling on synthetic shapes with the full exact scan and
// GEOS side by side, and the worst cases where the sketch misleads.
//
// Usage: waymark_evaluation OUTPUT_DIRECTORY [--quick] [--sizes 10000,100000,1000000]
// Writes OUTPUT_DIRECTORY/measurements.md (markdown sections) and recall-hausdorff.dat,
// recall-frechet.dat (for gnuplot); scripts/evaluate.sh wraps them into reports/evaluation.md
// with the plots.
// --quick shrinks every part (smaller sets, fewer queries, sizes 2000,10000) for a smoke run.
#include <sys/resource.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include "evaluation/evaluation.h"
#include "support/geos_reference.h"
#include "support/random_shapes.h"
#include "support/recall.h"

using namespace waymark;
using namespace waymark::evaluation;
using Clock = std::chrono::steady_clock;

namespace {


void quality_section(std::ostream& out, bool quick, std::vector<WorstCase>& worst) {
  out << "## 1. Retrieval quality\n\n"
         "Each query's ten nearest stored shapes in fast mode (default candidate budget 20·k); a result is\n"
         "relevant when it has the query's label: the same character in another style or font, or the\n"
         "same country. Glyph sets are queried leave-one-out (the query shape is stored, and left out of\n"
         "its own answer); countries are stored at 110m and queried with altered outlines. Glyphs are\n"
         "compared in the unit frame, countries in longitude/latitude degrees. P@k = precision at k;\n"
         "mAP@10 = mean average precision over the first ten results. `sketch` ranks by sketch distance\n"
         "alone; `hausdorff` and `frechet` re-rank candidates by the exact distance (Fréchet on single\n"
         "curves: each glyph's longest stroke, each outline's longest ring).\n\n";
  const std::vector<std::size_t> counts = quick ? std::vector<std::size_t>{16, 64} : std::vector<std::size_t>{16, 32, 64, 128, 256};
  struct Part {
    DataSet set;
    std::vector<Metric> metrics;
  };
  std::vector<Part> parts;
  parts.push_back({hershey_set(false, quick ? 6 : 2), {Metric::sketch, Metric::hausdorff}});
  parts.push_back({hershey_set(true, quick ? 6 : 2), {Metric::frechet}});
  parts.push_back({truetype_set(false, quick ? 9 : 2), {Metric::sketch, Metric::hausdorff}});
  parts.push_back({truetype_set(true, quick ? 9 : 4), {Metric::frechet}});
  parts.push_back({country_set(false, quick ? 5 : 1), {Metric::sketch, Metric::hausdorff}});
  parts.push_back({country_set(true, quick ? 5 : 1), {Metric::frechet}});
  for (const Part& part : parts) {
    out << "### " << part.set.name << "\n\n" << part.set.stored.size() << " stored shapes, " << queries_of(part.set).size()
        << " queries. Data: " << part.set.source << ".\n\n"
        << "| metric | layout | landmarks | P@1 | P@5 | P@10 | mAP@10 | median ms |\n|---|---|---|---|---|---|---|---|\n";
    for (Metric metric : part.metrics) {
      for (Layout layout : {Layout::grid, Layout::random, Layout::fitted}) {
        for (std::size_t count : counts) {
          const bool keep_worst = part.set.name.rfind("Hershey glyphs", 0) == 0 && metric == Metric::sketch &&
                                  layout == Layout::grid && count == 64;
          const QualityRow row = measure_quality(part.set, metric, layout, count, keep_worst ? &worst : nullptr);
          char line[256];
          std::snprintf(line, sizeof line, "| %s | %s | %zu | %.3f | %.3f | %.3f | %.3f | %.2f |\n", row.metric.c_str(),
                        row.layout.c_str(), row.landmarks, row.sums.mean(row.sums.precision_1),
                        row.sums.mean(row.sums.precision_5), row.sums.mean(row.sums.precision_10),
                        row.sums.mean(row.sums.average_precision_10), row.median_ms);
          out << line;
          std::fprintf(stderr, "quality: %s %s", part.set.name.c_str(), line);
        }
      }
    }
    out << "\n";
  }
}

// --- 2. recall against the candidate budget ----------------------------------------------------

void recall_section(std::ostream& out, const std::filesystem::path& directory, bool quick) {
  out << "## 2. Fast-mode recall against the candidate budget\n\n"
         "Recall@10 of fast mode against the full exact scan (every stored shape, exact metric), for\n"
         "each candidate budget and landmark count (grid layout), with the median query time. Data: the\n"
         "Hershey glyphs (Fréchet: longest strokes), leave-one-out. The plot is `recall-latency.png`.\n\n"
         "| metric | landmarks | budget | recall@10 | median ms |\n|---|---|---|---|---|\n";
  const std::vector<std::size_t> budgets = {10, 20, 40, 80, 160, 320};
  const std::vector<std::size_t> counts = quick ? std::vector<std::size_t>{16, 64} : std::vector<std::size_t>{16, 64, 256};
  for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
    // gnuplot data: one block per landmark count, its first row a title.
    std::ofstream data(directory / ("recall-" + std::string(metric_name(metric)) + ".dat"));
    const DataSet set = hershey_set(metric == Metric::frechet, quick ? 6 : 2);
    const std::vector<Query> queries = queries_of(set);
    // The truth does not depend on the landmarks: one full scan per query.
    std::vector<QueryAnswer> truth;
    {
      TemporaryCollection collection(set, Layout::grid, 16);
      QueryOptions options;
      options.metric = metric;
      for (const Query& query : queries) truth.push_back(need(ask(*collection, query, options, true), "full scan"));
    }
    for (std::size_t count : counts) {
      TemporaryCollection collection(set, Layout::grid, count);
      data << "\"" << count << " landmarks\" budget recall median_ms\n";
      for (std::size_t budget : budgets) {
        testing::RecallCount recall;
        std::vector<double> times;
        for (std::size_t q = 0; q < queries.size(); ++q) {
          QueryOptions options;
          options.metric = metric;
          options.candidate_budget = budget;
          const auto start = Clock::now();
          const QueryAnswer answer = need(ask(*collection, queries[q], options), "query");
          times.push_back(milliseconds(Clock::now() - start));
          recall.add(truth[q], answer);
        }
        char line[160];
        std::snprintf(line, sizeof line, "| %s | %zu | %zu | %.3f | %.3f |\n", metric_name(metric), count, budget,
                      recall.recall(), percentile(times, 0.5));
        out << line;
        data << count << ' ' << budget << ' ' << recall.recall() << ' ' << percentile(times, 0.5) << '\n';
      }
      data << "\n\n";  // gnuplot: one data block per line
    }
  }
  out << "\n";
}

// --- 3. scaling ---------------------------------------------------------------------------------

double resident_megabytes() {
  std::ifstream status("/proc/self/status");
  std::string line;
  while (std::getline(status, line)) {
    if (line.rfind("VmRSS:", 0) == 0) return std::stod(line.substr(6)) / 1024.0;
  }
  return 0;
}

void scaling_section(std::ostream& out, const std::vector<std::size_t>& sizes) {
  out << "## 3. Scaling\n\n"
         "Synthetic shapes: seeded perturbed copies of 500 random-walk templates, 64 vertices, unit frame,\n"
         "64 grid landmarks, exhaustive index, one thread. Ingest is durable (synced) in batches of 1,000.\n"
         "Latency over 20 queries (kNN, k = 10); the full exact scan over 2 queries. GEOS: the time GEOS\n"
         "3.11 takes for one densified Hausdorff distance (GEOSHausdorffDistanceDensify, fraction 0.25)\n"
         "over 2,000 pairs, times the collection size: what a scan computing GEOS's distance to every\n"
         "stored shape costs (an estimate from measured pairs, not a timed scan).\n\n"
         "| shapes | ingest shapes/s | index bytes/shape | RSS MB | Hausdorff fast p50 / p99 ms | exact p50 / p99 ms "
         "| full scan ms | scan / exact | GEOS scan ms (est.) | GEOS / exact | Fréchet fast p50 / p99 ms | exact p50 / p99 ms |\n"
         "|---|---|---|---|---|---|---|---|---|---|---|---|\n";
  SeededRandom template_random(1);
  std::vector<Shape> templates;
  for (int t = 0; t < 500; ++t) templates.push_back(testing::random_walk(template_random, 64));
  auto synthetic = [&](std::size_t n) {
    SeededRandom random(n * 7919 + 1);
    return testing::jittered(templates[random.below(templates.size())], random, 0.3);
  };
  // GEOS per pair, measured once.
  double geos_pair_ms = 0;
  {
    testing::Geos geos;
    const auto start = Clock::now();
    double sink = 0;
    for (std::size_t i = 0; i < 2000; ++i) {
      sink += geos.hausdorff(apply_frame(synthetic(i), Frame::unit), apply_frame(synthetic(i + 5000), Frame::unit), 0.25);
    }
    geos_pair_ms = milliseconds(Clock::now() - start) / 2000;
    if (sink < 0) std::printf("%f", sink);
  }
  for (std::size_t size : sizes) {
    const std::filesystem::path directory = std::filesystem::temp_directory_path() / "waymark-evaluation-scaling";
    std::filesystem::remove_all(directory);
    CollectionSettings settings;
    settings.landmarks = need(grid_landmarks(unit_frame_domain(), 64), "grid");
    auto collection = need(Collection::create(directory.string(), settings), "create");
    std::vector<ShapeRecord> batch;
    const auto ingest_start = Clock::now();
    for (std::size_t n = 0; n < size; ++n) {
      batch.push_back({"shape-" + std::to_string(n), synthetic(n), "{}"});
      if (batch.size() == 1000 || n + 1 == size) {
        need(collection->upsert(batch), "upsert");
        batch.clear();
      }
    }
    const double ingest_rate = size / (milliseconds(Clock::now() - ingest_start) / 1000);
    const CollectionStatistics statistics = collection->statistics();
    std::map<std::string, std::vector<double>> times;
    for (Metric metric : {Metric::hausdorff, Metric::frechet}) {
      for (std::size_t q = 0; q < 20; ++q) {
        const Shape query = synthetic(size + q);
        for (bool exact : {false, true}) {
          QueryOptions options;
          options.metric = metric;
          options.exact = exact;
          const auto start = Clock::now();
          need(collection->nearest(query, options), "query");
          times[std::string(metric_name(metric)) + (exact ? " exact" : " fast")].push_back(milliseconds(Clock::now() - start));
        }
        if (metric == Metric::hausdorff && q < 2) {
          QueryOptions options;
          const auto start = Clock::now();
          need(collection->nearest_by_full_scan(query, options), "full scan");
          times["scan"].push_back(milliseconds(Clock::now() - start));
        }
      }
    }
    const double exact_p50 = percentile(times["hausdorff exact"], 0.5);
    const double scan = percentile(times["scan"], 0.5);
    char line[512];
    std::snprintf(line, sizeof line,
                  "| %zu | %.0f | %.0f | %.0f | %.2f / %.2f | %.2f / %.2f | %.0f | %.0f× | %.0f | %.0f× | %.2f / %.2f | %.2f / %.2f |\n",
                  size, ingest_rate, static_cast<double>(statistics.index_bytes) / size, resident_megabytes(),
                  percentile(times["hausdorff fast"], 0.5), percentile(times["hausdorff fast"], 0.99), exact_p50,
                  percentile(times["hausdorff exact"], 0.99), scan, scan / exact_p50, geos_pair_ms * size,
                  geos_pair_ms * size / exact_p50, percentile(times["frechet fast"], 0.5),
                  percentile(times["frechet fast"], 0.99), percentile(times["frechet exact"], 0.5),
                  percentile(times["frechet exact"], 0.99));
    out << line;
    out.flush();
    std::fprintf(stderr, "scaling: %s", line);
    collection.reset();
    std::filesystem::remove_all(directory);
  }
  out << "\nRSS is the whole evaluation process after the run at that size (it includes earlier sections'\n"
         "freed memory that the allocator kept).\n\n";
}

// --- 4. worst cases ---------------------------------------------------------------------------

void worst_section(std::ostream& out, std::vector<WorstCase> worst) {
  out << "## 4. Where the sketch misleads\n\n"
         "Hershey glyphs, 64 grid landmarks, ranked by sketch distance alone: queries whose first result\n"
         "has the wrong character although the exact Hausdorff distance ranks the right one first. The\n"
         "sketch distance is an estimate, not a bound: it can rate a different glyph closer when the two\n"
         "differ where no landmark looks (inside strokes' shared envelope). Sorted by how much the sketch\n"
         "underestimates the wrong glyph's true distance. Re-ranking (`hausdorff`, `frechet`) fixes these\n"
         "cases whenever the right glyph is among the candidates.\n\n"
         "| query | sketch's first | sketch distance | its exact distance | exact first | sketch distance | its exact distance |\n"
         "|---|---|---|---|---|---|---|\n";
  std::sort(worst.begin(), worst.end(), [](const WorstCase& a, const WorstCase& b) {
    return a.wrong_exact / std::max(a.wrong_sketch, 1e-12) > b.wrong_exact / std::max(b.wrong_sketch, 1e-12);
  });
  for (std::size_t i = 0; i < std::min<std::size_t>(8, worst.size()); ++i) {
    const WorstCase& w = worst[i];
    char line[320];
    std::snprintf(line, sizeof line, "| %s | %s | %.4f | %s | %s | %s | %.4f |\n", w.query.c_str(), w.wrong.c_str(),
                  w.wrong_sketch, w.wrong_exact < 0 ? "not in exact top 10" : std::to_string(w.wrong_exact).substr(0, 6).c_str(),
                  w.right.c_str(), w.right_sketch < 0 ? "not in sketch top 10" : std::to_string(w.right_sketch).substr(0, 6).c_str(),
                  w.right_exact);
    out << line;
  }
  out << "\n" << worst.size() << " such queries in all.\n\n";
}

}  // namespace

int main(int argc, char** argv) {
  if (argc < 2) {
    std::fprintf(stderr, "usage: waymark_evaluation OUTPUT_DIRECTORY [--quick] [--sizes N,N,...] [--only quality|recall|scaling]\n");
    return 2;
  }
  const std::filesystem::path output = argv[1];
  bool quick = false;
  std::string only;
  std::vector<std::size_t> sizes = {10000, 100000, 1000000};
  bool sizes_given = false;
  for (int i = 2; i < argc; ++i) {
    const std::string flag = argv[i];
    if (flag == "--quick") {
      quick = true;
    } else if (flag == "--sizes" && i + 1 < argc) {
      sizes.clear();
      std::stringstream list(argv[++i]);
      for (std::string item; std::getline(list, item, ',');) sizes.push_back(std::stoull(item));
      sizes_given = true;
    } else if (flag == "--only" && i + 1 < argc) {
      only = argv[++i];
    } else {
      std::fprintf(stderr, "waymark_evaluation: unknown argument %s\n", flag.c_str());
      return 2;
    }
  }
  if (quick && !sizes_given) sizes = {2000, 10000};
  std::filesystem::create_directories(output);
  std::ofstream out(output / "measurements.md");
  std::vector<WorstCase> worst;
  if (only.empty() || only == "quality") quality_section(out, quick, worst);
  if (only.empty() || only == "recall") recall_section(out, output, quick);
  if (only.empty() || only == "scaling") scaling_section(out, sizes);
  if (only.empty() || only == "quality") worst_section(out, worst);
  return out ? 0 : 1;
}
