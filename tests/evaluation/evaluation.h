// The evaluation's shared pieces: labelled data sets read from Debian and npm packages,
// temporary collections with a chosen landmark layout, and the quality measurement. Used by
// waymark_evaluation (evaluate.cc, the report) and by evaluation_test.cc (which pins them).
#pragma once

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include "evaluation/retrieval_metrics.h"
#include "index/collection.h"

namespace waymark::evaluation {

struct Labelled {
  std::string id;
  std::string label;
  Shape shape;
};

struct DataSet {
  std::string name;
  std::string source;           // package and licence, for the report
  Frame frame = Frame::unit;
  Box domain = unit_frame_domain();
  std::vector<Labelled> stored;
  std::vector<Labelled> queries;  // empty: leave-one-out over `stored`
  std::size_t query_stride = 1;   // leave-one-out: every n-th stored shape is a query
};

// Hershey single-stroke glyphs: 52 letters in the 11 distinct Latin styles (label: the letter).
// `single_curve`: each glyph's longest stroke (for Fréchet). `styles` empty: all eleven.
DataSet hershey_set(bool single_curve, std::size_t query_stride, const std::vector<std::string>& styles = {});
// TrueType letter outlines of the installed DejaVu, Liberation and FreeFont faces.
DataSet truetype_set(bool single_curve, std::size_t query_stride);
// Natural Earth countries: 110m outlines stored; queries jittered (0.1 degree), thinned (every
// other vertex) and, unless `single_curve`, the 50m outlines. Every `query_stride`-th country.
DataSet country_set(bool single_curve, std::size_t query_stride);

enum class Layout { grid, random, fitted };
const char* layout_name(Layout layout);

// A collection in a temporary folder holding a data set's stored shapes, removed on destruction.
class TemporaryCollection {
 public:
  TemporaryCollection(const DataSet& set, Layout layout, std::size_t landmarks);
  ~TemporaryCollection();
  TemporaryCollection(const TemporaryCollection&) = delete;
  TemporaryCollection& operator=(const TemporaryCollection&) = delete;
  Collection& operator*() { return *collection_; }
  Collection* operator->() { return collection_.get(); }

 private:
  std::filesystem::path directory_;
  std::unique_ptr<Collection> collection_;
};

struct Query {
  const Labelled* shape;
  bool stored;  // leave-one-out: query by stored id, excluding itself
};
std::vector<Query> queries_of(const DataSet& set);

// A fast-mode (or exact, per options) query; `full_scan`: the brute-force answer instead.
Result<QueryAnswer> ask(const Collection& collection, const Query& query, const QueryOptions& options, bool full_scan = false);

// A query whose first result by sketch distance has the wrong label while the exact Hausdorff
// distance puts a right one first.
struct WorstCase {
  std::string query, wrong, right;
  double wrong_sketch, right_sketch, wrong_exact, right_exact;
};

struct QualityRow {
  std::string set, metric, layout;
  std::size_t landmarks;
  QualitySums sums;
  double median_ms;
};

// Precision and mAP of fast-mode top-10 answers (k = 10) over the set's queries. Exits the
// process with a message on a store or query error (this is a measurement program).
QualityRow measure_quality(const DataSet& set, Metric metric, Layout layout, std::size_t landmarks,
                           std::vector<WorstCase>* worst = nullptr);

double percentile(std::vector<double> values, double p);

inline double milliseconds(std::chrono::steady_clock::duration d) {
  return std::chrono::duration<double, std::milli>(d).count();
}

// This is a measurement program: a failed store or query operation ends it with a message.
[[noreturn]] inline void fail(const std::string& message) {
  std::fprintf(stderr, "waymark_evaluation: %s\n", message.c_str());
  std::exit(1);
}

template <typename T>
T need(Result<T> result, const char* what) {
  if (!result) fail(std::string(what) + ": " + result.status().to_string());
  return std::move(*result);
}

inline void need(const Status& status, const char* what) {
  if (!status.is_ok()) fail(std::string(what) + ": " + status.to_string());
}

}  // namespace waymark::evaluation
