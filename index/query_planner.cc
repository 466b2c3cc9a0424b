// Query planning for Collection::nearest: candidates in sketch order, cheap bounds, decision
// procedure, exact distance, and the certification test (see collection.h).
#include <rocksdb/iterator.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstring>
#include <deque>
#include <limits>
#include <optional>
#include <queue>
#include <span>
#include <utility>
#include <nlohmann/json.hpp>

#include "index/collection_state.h"
#include "sketch/distance/bounds.h"
#include "sketch/distance/frechet.h"
#include "sketch/distance/hausdorff.h"

namespace waymark {
namespace {

constexpr double kInfinity = std::numeric_limits<double>::infinity();
// Fast mode's default candidate budget, per hit asked for. It is the one knob between speed
// and recall on a graph or partitioned index, whose order is only roughly the order of the
// metric's lower bound (a graph's L∞ over landmark distances cannot see the curve ends that
// bound Fréchet; partitions group by weighted L2). Recall@10 against certified answers and p50
// (Hausdorff; Fréchet), synthetic 64-vertex shapes (`index_benchmark SHAPES 64 64 300 KIND 0
// 300 0 0,BUDGETS 4`; 200k: 400 near-copies of each figure, 1M: 2,000):
//   graph, L∞   1M, 2026-12-05 (second session), this build, each budget's queries run apart:
//                 40·k 0.978, 0.781 (4.24, 4.23 ms); 60·k 0.991, 0.920 (4.44, 4.89 ms);
//                 80·k 0.991, 0.972 (4.47, 5.71 ms); 100·k 0.991, 0.987 (5.17, 5.62 ms;
//                 p99 7.8, 7.6); another run: 40·k 0.978, 0.781 (4.23, 4.17 ms), 100·k
//                 0.990, 0.988 (4.86, 5.81 ms)
//               1M, 2026-12-05, with FAISS's graph search:
//                 30·k 0.952, 0.680 (4.5, 4.9 ms); 40·k 0.984, 0.783 (4.6, 5.4 ms);
//                 60·k 0.993, 0.919 (5.3, 6.8 ms); 100·k 0.996, 0.990 (7.0, 8.9 ms)
//   graph, weighted L2 (before 2026-12-05), 1M: 40·k 0.870, 0.711 (4.2, 4.8 ms);
//                 100·k 0.989, 0.948; 200k: 40·k 1.000, 0.999
//   partitioned  200k: 40·k 1.000, 1.000 (2.1–2.4, 3.2–3.5 ms); 100·k the same (2.8–2.9, 4.0–4.1)
//                1M:   40·k 0.856, 0.719 (3.7, 4.5 ms); 100·k 0.989, 0.946 (4.3, 5.7 ms; p99 6.5, 7.6)
//                1M, 2026-12-05 (second session): 100·k 0.992, 0.951 (4.36, 5.00 ms; p99 7.9,
//                      7.8); 150·k 1.000, 0.996 (4.80, 5.80 ms); 200·k 1.000, 1.000 (5.04, 6.17)
// Recall comes first: the default must find ≥ 0.95 of the certified neighbours, and at 1M
// only 100·k does so for Fréchet (the exhaustive index's first 40·k in L∞ order found 0.818,
// so no index order over landmark distances does much better there). So the Fréchet metrics
// get 100·k on graphs and exhaustive indexes, and partitioned indexes 100·k for Hausdorff and
// the sketch metric (their candidates cost little more when more are asked for: a few more
// lists scanned) but 150·k for the Fréchet metrics, where 100·k found 0.946–0.951 in three 1M
// runs: too near the 0.95 line. Hausdorff and the sketch metric keep 40·k on graphs and
// exhaustive indexes, where it already finds 0.978.
// On a graph these budgets are ceilings (run_query): the walk takes 20·k, and widens (to 40·k,
// then for the Fréchet metrics 100·k) only while its frontier can still be within the k-th
// best distance. At 1M with 2,000 near-copies of each figure it widens on most queries (recall
// 0.982 / 0.987 before and after, p50 alike); with 20 copies of each of 50,000 figures it does
// not (recall 1.000, p50 1.40–1.46 → 0.96–1.03 ms and, against a fixed 100·k, 3.53–3.72 →
// 1.92–1.94 ms for Fréchet; reports/performance-log.md).
// Shifted rings (tests/index/approximate_index_test.cc): Fréchet 0.985 at 40·k.
constexpr std::size_t kFastCandidatesPerHit = 40;
constexpr std::size_t kFirstStepPerHit = 20;              // a graph's first step, widened as run_query says
constexpr std::size_t kWideFastCandidatesPerHit = 100;    // the Fréchet metrics; partitioned indexes
constexpr std::size_t kWidestFastCandidatesPerHit = 150;  // the Fréchet metrics on partitioned indexes
// How many of fast mode's Fréchet candidates, per hit asked for, get an upper bound from their
// float copies before any is scored (run_query). Each costs about 2.4 µs (the bound's walk is
// serial); a store read and search it saves, about 30 µs. Fréchet fast p50 at 1M, graph
// (WAYMARK_BENCHMARK_REUSE=1 index_benchmark 1000000 64 64 300 graph 0 0 0 0 4), one round
// with budgets alternating, none / 4·k / 8·k / all 40·k: 5.24, 5.06, 4.49, 5.12 ms (store
// reads 46, 40, 34, 24); then 8·k against none in eight alternating rounds: 4.36 against
// 4.50 ms on average, the ratio 0.88–1.09 (median 0.96), p99 alike; with the 100·k budget
// since, six rounds: 5.71 against 5.96 ms on average, ratio 0.86–1.04 (reads 50 → 38).
// Hausdorff gets none: ordered so, its queries read as many candidates as before (34), the
// Hausdorff distance of these curves lying well below the bound.
constexpr std::size_t kCoupledCandidatesPerHit = 8;

const char* const kMetricNames[] = {"hausdorff", "frechet", "discrete-frechet", "sketch"};

// Adds the time from its construction to its destruction to a QueryStats figure.
class TimeAddedTo {
 public:
  explicit TimeAddedTo(double& milliseconds) : milliseconds_(milliseconds) {}
  ~TimeAddedTo() {
    milliseconds_ += std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - start_).count();
  }
  TimeAddedTo(const TimeAddedTo&) = delete;
  TimeAddedTo& operator=(const TimeAddedTo&) = delete;

 private:
  double& milliseconds_;
  const std::chrono::steady_clock::time_point start_ = std::chrono::steady_clock::now();
};

// The largest coordinate magnitude in `box`.
double largest_magnitude(const Box& box) {
  return std::max({std::fabs(box.min_x), std::fabs(box.max_x), std::fabs(box.min_y), std::fabs(box.max_y)});
}

// The query, framed and prepared once for every candidate, in one landmark generation: the
// query holds that generation to its end, so it never compares sketches of two.
struct PreparedQuery {
  PreparedQuery(const Shape& framed, std::shared_ptr<const Generation> generation_in)
      : generation(std::move(generation_in)), shape(framed), prepared(framed) {
    generation->append_index_vector(generation->sketcher.sketch(framed), framed, Frame::absolute, raw);
    if (Result<Path> path = curve_of(framed)) curve = std::move(*path);
    for (float value : raw) largest_raw = std::max<double>(largest_raw, std::fabs(value));
    magnitude = largest_magnitude(prepared.box);
  }
  // The leading values of an index vector that are landmark distances.
  std::span<const float> landmark_distances(std::span<const float> index_vector) const {
    return index_vector.first(generation->landmark_count());
  }
  // A lower bound on the exact distance (under the metric the values were compared for) of a
  // shape whose index vector lies `difference` away in L∞, as the vector index computes it in
  // float: less the float rounding of the stored values (relative to the values, |b| ≤ |a| +
  // difference) and of the difference itself.
  double lower_bound_from(double difference) const {
    return std::max(0.0, difference * (1 - 1e-6) -
                             Sketcher::kUnweightedRelativeError * (2 * largest_raw + difference));
  }
  std::shared_ptr<const Generation> generation;
  Shape shape;
  PreparedShape prepared;
  std::vector<float> raw;  // the index vector (Generation): what the indexes are searched with
  double largest_raw = 0;  // largest magnitude in raw
  double magnitude = 0;    // largest coordinate magnitude of the framed query
  std::optional<Path> curve;  // when the query is a single curve
};

bool by_distance_then_id(const QueryHit& a, const QueryHit& b) {
  return a.distance != b.distance ? a.distance < b.distance : a.id < b.id;
}

// Keeps the k best hits, nearest first.
class TopHits {
 public:
  explicit TopHits(std::size_t k) : k_(k) {}
  double worst() const { return hits_.size() < k_ ? kInfinity : hits_.back().distance; }
  void offer(QueryHit hit) {
    if (hits_.size() == k_ && !by_distance_then_id(hit, hits_.back())) return;
    hits_.insert(std::upper_bound(hits_.begin(), hits_.end(), hit, by_distance_then_id), std::move(hit));
    if (hits_.size() > k_) hits_.pop_back();
  }
  std::vector<QueryHit> take() { return std::move(hits_); }

 private:
  std::size_t k_;
  std::vector<QueryHit> hits_;
};

// The weighted landmark (sketch) distance reported with each hit.
double sketch_distance(const PreparedQuery& query, const StoredShape& stored) {
  return query.generation->sketcher.weighted_distance_of_unweighted(query.landmark_distances(query.raw),
                                                                    query.landmark_distances(stored.raw));
}

// The lower bounds of a stored shape against the query, and its curve for the Fréchet metrics.
struct CandidateBounds {
  std::optional<Path> curve;
  double sketch = 0;  // the landmark bound
  double cheap = 0;   // the box bound, and for curves the endpoint bound
};

// The bounds of `stored` under `metric`, or nullopt when the metric does not apply to it.
std::optional<CandidateBounds> bounds_of(const PreparedQuery& query, const StoredShape& stored, Metric metric) {
  CandidateBounds bounds;
  if (metric != Metric::hausdorff) {
    Result<Path> path = curve_of(stored.shape);
    if (!path) return std::nullopt;
    bounds.curve = std::move(*path);
  }
  bounds.sketch = Sketcher::unweighted_linf_lower_bound(query.landmark_distances(query.raw),
                                                        query.landmark_distances(stored.raw));
  bounds.cheap = bounding_box_lower_bound(query.prepared.box, bounding_box(stored.shape));
  if (bounds.curve) {
    bounds.cheap = std::max(bounds.cheap, frechet_endpoint_lower_bound(query.curve->front(), query.curve->back(),
                                                                       bounds.curve->front(), bounds.curve->back()));
  }
  return bounds;
}

// Whether a lower bound shows the shape farther than `threshold`; counts which one did.
bool ruled_out_by_bounds(const CandidateBounds& bounds, double threshold, QueryStats& stats) {
  if (bounds.sketch > threshold) {
    ++stats.pruned_by_sketch_bound;
    return true;
  }
  if (bounds.cheap > threshold) {
    ++stats.pruned_by_box_or_endpoint_bound;
    return true;
  }
  return false;
}

// The exact distance from the query to `stored` when it can be ≤ threshold (∞: always);
// nullopt when the sketch bound, the box or endpoint bound or the decision procedure shows it
// is farther, or the metric does not apply to the stored shape. Cheapest test first.
std::optional<double> distance_within(const PreparedQuery& query, const StoredShape& stored, Metric metric,
                                      double threshold, QueryStats& stats) {
  std::optional<CandidateBounds> bounds = bounds_of(query, stored, metric);
  if (!bounds) {
    ++stats.not_applicable;
    return std::nullopt;
  }
  if (ruled_out_by_bounds(*bounds, threshold, stats)) return std::nullopt;
  double distance = 0;
  if (metric == Metric::hausdorff) {
    const PreparedShape candidate(stored.shape);
    if (threshold < kInfinity && !stored.passed_copy_decision &&
        !hausdorff_at_most(query.prepared, candidate, threshold)) {
      ++stats.pruned_by_decision;
      return std::nullopt;
    }
    distance = hausdorff(query.prepared, candidate).value;
  } else if (metric == Metric::frechet) {
    std::optional<FrechetSearch> search = FrechetSearch::start(*query.curve, *bounds->curve, threshold);
    if (!search) {
      ++stats.pruned_by_decision;
      return std::nullopt;
    }
    distance = search->value().value;
  } else {
    distance = discrete_frechet(*query.curve, *bounds->curve).value;
  }
  ++stats.exact_evaluations;
  return distance;
}

// Chooses the k nearest of the candidates shown to it. Hausdorff, discrete Fréchet and sketch
// distances are computed on arrival, after the bounds and the decision against the k-th best
// so far. A Fréchet value costs a dozen decisions, and candidates arriving in lower-bound
// order are often not in distance order, so computing each value on arrival spends most of
// them on shapes pushed out later. A Fréchet candidate that passes the decision is therefore
// only bracketed (a few bisection steps inside its band) and held; the k-th smallest upper
// end is the threshold for those that follow. At the end the held ones are completed in
// order of their upper end, and those that can no longer enter the answer are refused by one
// more decision instead of getting a value.
class NearestSelection {
 public:
  NearestSelection(const PreparedQuery& query, Metric metric, std::size_t k, QueryStats& stats)
      : query_(query), metric_(metric), k_(k), stats_(stats), top_(k) {}

  // No shape farther than this can be in the answer: the k-th smallest proven upper bound
  // (exact values included) of the candidates shown, or the cap if smaller; ∞ until k have
  // been kept.
  double threshold() const { return std::min(cap_, uppers_.size() < k_ ? kInfinity : uppers_.top()); }

  // An upper bound on the k-th smallest distance of the candidates that will be shown, known
  // before any is (run_query's fast mode): candidates proven farther are refused from the first.
  void cap_threshold(double cap) { cap_ = std::min(cap_, cap); }

  void consider(StoredShape& stored) {
    if (metric_ == Metric::frechet) return hold(stored);
    const std::optional<double> distance = metric_ == Metric::sketch
                                               ? std::optional<double>(sketch_distance(query_, stored))
                                               : distance_within(query_, stored, metric_, threshold(), stats_);
    if (!distance) return;
    keep_upper(*distance);
    top_.offer({std::move(stored.id), *distance, sketch_distance(query_, stored), std::move(stored.metadata)});
  }

  // The answer, nearest first.
  std::vector<QueryHit> finish() {
    complete_held();
    return top_.take();
  }

 private:
  // Bisection steps a held Fréchet candidate gets on arrival, of the six its value takes:
  // enough that its upper end is close to its value. Fréchet fast p50 at 200k graph
  // (index_benchmark 200000 64 64 500 graph 0 0), by steps 0–6: 6.05, 5.15, 3.79, 3.51,
  // 3.34, 3.65, 3.39 ms (one run each; 4–6 are within the machine's noise of each other).
  static constexpr int kStepsOnArrival = 4;
  // Held candidates are completed once this many wait, so that memory stays bounded when
  // thousands tie (an exact-mode query for a part stored in many copies).
  static constexpr std::size_t kMostHeld = 256;

  struct Held {
    StoredShape stored;
    CandidateBounds bounds;
    std::optional<FrechetSearch> search;  // over bounds.curve, which stays put (a deque)
  };

  // Values for the held candidates that can still enter the answer, in order of upper end.
  void complete_held() {
    std::vector<Held*> order;
    for (Held& held : held_) order.push_back(&held);
    std::sort(order.begin(), order.end(), [](const Held* a, const Held* b) { return a->search->upper() < b->search->upper(); });
    for (Held* held : order) {
      const double worst = top_.worst();
      if (ruled_out_by_bounds(held->bounds, worst, stats_)) continue;
      if (!held->search->at_most(worst)) {
        ++stats_.pruned_by_decision;
        continue;
      }
      ++stats_.exact_evaluations;
      const double distance = held->search->value().value;
      top_.offer({std::move(held->stored.id), distance, sketch_distance(query_, held->stored), std::move(held->stored.metadata)});
    }
    held_.clear();
  }

  void hold(StoredShape& stored) {
    std::optional<CandidateBounds> bounds = bounds_of(query_, stored, metric_);
    if (!bounds) {
      ++stats_.not_applicable;
      return;
    }
    const double threshold_now = threshold();
    if (ruled_out_by_bounds(*bounds, threshold_now, stats_)) return;
    Held& held = held_.emplace_back(Held{std::move(stored), std::move(*bounds), std::nullopt});
    held.search = FrechetSearch::start(*query_.curve, *held.bounds.curve, threshold_now);
    if (!held.search) {
      ++stats_.pruned_by_decision;
      held_.pop_back();
      return;
    }
    held.search->narrow(kStepsOnArrival);
    keep_upper(held.search->upper());
    if (held_.size() >= kMostHeld) complete_held();
  }

  // Keeps the k smallest upper bounds in a max-heap, whose top is the threshold.
  void keep_upper(double upper) {
    uppers_.push(upper);
    if (uppers_.size() > k_) uppers_.pop();
  }

  const PreparedQuery& query_;
  Metric metric_;
  std::size_t k_;
  QueryStats& stats_;
  TopHits top_;
  std::priority_queue<double> uppers_;
  double cap_ = kInfinity;
  std::deque<Held> held_;
};

// Metadata equality filter: every member of the filter object must be present with an equal
// value. Stored metadata is parsed only for candidates, never for pruned-by-index shapes.
class MetadataFilter {
 public:
  static Result<MetadataFilter> parse(const std::string& text) {
    MetadataFilter filter;
    if (text.empty()) return filter;
    filter.required_ = nlohmann::json::parse(text, nullptr, false);
    if (!filter.required_.is_object()) {
      return invalid_argument("metadata filter must be a JSON object", "metadata_filter");
    }
    return filter;
  }
  bool accepts(const std::string& metadata) const {
    if (required_.empty()) return true;
    const nlohmann::json stored = nlohmann::json::parse(metadata, nullptr, false);
    if (!stored.is_object()) return false;
    for (const auto& [key, value] : required_.items()) {
      auto found = stored.find(key);
      if (found == stored.end() || *found != value) return false;
    }
    return true;
  }

 private:
  nlohmann::json required_ = nlohmann::json::object();
};

// Discrete Fréchet has no decision procedure and Metric::sketch no exact distance.
bool copies_can_refuse(Metric metric) { return metric == Metric::hausdorff || metric == Metric::frechet; }

// How much wider than threshold + displacement a copy's decision is made, relative to the
// largest coordinate magnitude of the query and the copy. A copy lies about 1e-8 of it from its
// shape, and where two curves nearly coincide the Fréchet decision resolved distances only to
// about √(machine epsilon) × that magnitude until its free intervals stopped cancelling
// (frechet.cc, free_interval): ManyTiedCopiesKeepTheSmallestIdsAndMatchTheFullScan refused
// tied copies without this margin then. It stays as insurance: pruning loses nothing
// measurable at it.
constexpr double kCopyDecisionMargin = 1e-6;

// How far a distance computed on the float copy (with bounding box `copy_box`) may lie from
// the stored shape's: the copy's displacement plus the margin above.
double copy_allowance(const PreparedQuery& query, const ResidentCopy::Decoded& copy, const Box& copy_box) {
  return copy.displacement + kCopyDecisionMargin * std::max(query.magnitude, largest_magnitude(copy_box));
}

// Whether the shape's float copy (index/resident_copy.h) proves it farther than `threshold`
// under `metric` (one that copies_can_refuse): the decision procedure at threshold + the
// copy's allowance.
bool refused_by_copy(const PreparedQuery& query, const ResidentCopy::Decoded& copy, Metric metric, double threshold) {
  if (metric == Metric::hausdorff) {
    const PreparedShape prepared(copy.shape);  // its box too: no second pass over the copy
    return !hausdorff_at_most(query.prepared, prepared, threshold + copy_allowance(query, copy, prepared.box));
  }
  // The plain decision: a search started at the threshold would also record its band and
  // bracket the value, work that the copy's answer (refuse or read the record) never uses.
  Result<Path> curve = curve_of(copy.shape);
  return curve &&
         !frechet_at_most(*query.curve, *curve, threshold + copy_allowance(query, copy, bounding_box(copy.shape)));
}

// Upper bounds on the exact distance (Hausdorff or Fréchet) of each candidate, from float
// copies alone: ∞ unless it and the query are single curves and it has a copy, else the
// greedy coupling bound (sketch/distance/bounds.h) on the copy plus the copy's allowance
// (moving each vertex by at most δ moves the shape by at most δ).
// O(candidates · vertices), no store read.
std::vector<double> coupling_bounds(const Collection::State& state, const PreparedQuery& query,
                                    std::span<const Neighbour> candidates) {
  std::vector<double> bounds(candidates.size(), kInfinity);
  thread_local ResidentCopy::Decoded copy;  // reused: its vectors keep their memory
  for (std::size_t c = 0; c < candidates.size(); ++c) {
    {
      std::shared_lock lock(state.labels_mutex);
      auto found = state.shape_of_label.find(candidates[c].label);
      if (found == state.shape_of_label.end() || found->second.copy.empty()) continue;
      found->second.copy.decode(copy);
    }
    // The curve as curve_of makes it, but for repeated vertices, which change no coupling.
    if (copy.shape.parts.size() != 1 || copy.shape.kind == ShapeKind::points) continue;
    Path& curve = copy.shape.parts.front();
    if (curve.empty()) continue;
    if (copy.shape.kind == ShapeKind::polygon) curve.push_back(curve.front());
    bounds[c] = greedy_coupling_upper_bound(*query.curve, curve) + copy_allowance(query, copy, bounding_box(copy.shape));
  }
  return bounds;
}

// Puts `prefix` (candidates in lower-bound order) in order of their upper bounds from float
// copies (coupling_bounds; those without one keep their order, after the others) and returns
// the k-th smallest bound, or ∞ with fewer than k. The first 2·k are bounded, and of the rest
// only those whose lower bound is within the k-th smallest bound so far: where a few
// near-copies lead, the others could not use one.
double order_by_upper_bounds(const Collection::State& state, const PreparedQuery& query, std::size_t k,
                             std::span<Neighbour> prefix) {
  const std::size_t leading = std::min(prefix.size(), 2 * k);
  std::vector<double> bounds = coupling_bounds(state, query, prefix.first(leading));
  bounds.resize(prefix.size(), kInfinity);
  if (leading >= k) {
    std::vector<double> smallest(bounds.begin(), bounds.begin() + static_cast<std::ptrdiff_t>(leading));
    std::nth_element(smallest.begin(), smallest.begin() + static_cast<std::ptrdiff_t>(k - 1), smallest.end());
    std::vector<std::size_t> within;
    std::vector<Neighbour> within_candidates;
    for (std::size_t c = leading; c < prefix.size(); ++c) {
      if (query.lower_bound_from(prefix[c].distance) > smallest[k - 1]) continue;
      within.push_back(c);
      within_candidates.push_back(prefix[c]);
    }
    const std::vector<double> within_bounds = coupling_bounds(state, query, within_candidates);
    for (std::size_t w = 0; w < within.size(); ++w) bounds[within[w]] = within_bounds[w];
  }
  std::vector<std::pair<double, Neighbour>> by_upper;
  by_upper.reserve(prefix.size());
  for (std::size_t c = 0; c < prefix.size(); ++c) by_upper.push_back({bounds[c], prefix[c]});
  std::stable_sort(by_upper.begin(), by_upper.end(), [](const auto& a, const auto& b) { return a.first < b.first; });
  for (std::size_t c = 0; c < prefix.size(); ++c) prefix[c] = by_upper[c].second;
  return by_upper.size() >= k ? by_upper[k - 1].first : kInfinity;
}

// The stored shape under `label`, framed, when it is still stored under that label, can be
// within `threshold` (∞: any) and passes the filter; nullopt when it was removed or replaced
// since the index was searched (also how an approximate index's tombstones are skipped), its
// float copy proves it farther than `threshold` (no store read then), or it was filtered out.
Result<std::optional<StoredShape>> draw_candidate(const Collection::State& state, const PreparedQuery& query,
                                                  std::int64_t label, Metric metric, double threshold,
                                                  const MetadataFilter& filter, QueryStats& stats) {
  std::string id;
  thread_local ResidentCopy::Decoded copy;  // reused: its vectors keep their memory
  bool has_copy = false;
  {
    std::shared_lock lock(state.labels_mutex);
    auto found = state.shape_of_label.find(label);
    if (found == state.shape_of_label.end()) return std::optional<StoredShape>();
    id = found->second.id;
    if (threshold < kInfinity && copies_can_refuse(metric) && !found->second.copy.empty()) {
      found->second.copy.decode(copy);
      has_copy = true;
    }
  }
  if (has_copy && refused_by_copy(query, copy, metric, threshold)) {
    ++stats.pruned_by_decision;
    return std::optional<StoredShape>();
  }
  Result<StoredShape> candidate = state.load(id, *query.generation, label);
  if (!candidate) {
    if (candidate.status().code() == StatusCode::not_found) return std::optional<StoredShape>();
    return candidate.status();
  }
  candidate->passed_copy_decision = has_copy;
  ++stats.candidates_fetched;
  if (!filter.accepts(candidate->metadata)) {
    ++stats.filtered_out;
    return std::optional<StoredShape>();
  }
  return std::optional<StoredShape>(std::move(*candidate));
}

// Walks the exhaustive index in lower-bound order (L∞ over the index-vector values that bound
// `metric`: Generation::compared_dimensions), in rounds that grow ×4 from `first_fetch`,
// handing each stored candidate (not excluded, passing the filter, not refused at
// `threshold()` by its float copy) to `visit`. Before each candidate and after each round
// `enough(unseen_bound)` says whether to stop, where unseen_bound is a lower bound on the
// exact distance of every shape not drawn yet. Returns whether every stored shape was drawn
// or ruled out by the bound (so the caller's answer is complete).
template <typename Threshold, typename Visit, typename Enough>
Result<bool> walk_candidates(const Collection::State& state, const PreparedQuery& query,
                             Metric metric, std::optional<std::int64_t> excluded_label, const MetadataFilter& filter,
                             std::size_t first_fetch, std::size_t budget, QueryStats& stats, Threshold threshold,
                             Visit visit, Enough enough) {
  Result<VectorIndex::Scan> scan = [&] {
    TimeAddedTo timer(stats.index_milliseconds);
    return query.generation->index.scan(query.raw, query.generation->compared_dimensions(metric));
  }();
  if (!scan) return scan.status();
  // The scan is in that order, so every shape not drawn yet has an L∞ difference ≥ the next
  // one's (or the last one drawn), and that bounds its exact distance from below.
  std::size_t fetch = std::min(budget, first_fetch), drawn = 0;
  while (true) {
    const std::span<const Neighbour> round = [&] {
      TimeAddedTo timer(stats.index_milliseconds);
      return scan->next(fetch - drawn);
    }();
    drawn += round.size();
    stats.candidates_drawn += round.size();
    for (const Neighbour& n : round) {
      // Once this shape is ruled out, so is every later one: none of them is read.
      if (enough(query.lower_bound_from(n.distance))) return true;
      if (n.label == excluded_label) continue;
      Result<std::optional<StoredShape>> candidate =
          draw_candidate(state, query, n.label, metric, threshold(), filter, stats);
      if (!candidate) return candidate.status();
      if (*candidate && !visit(**candidate)) return false;
    }
    if (scan->exhausted()) return true;  // every stored shape was drawn
    if (!round.empty() && enough(query.lower_bound_from(round.back().distance))) return true;
    if (drawn >= budget) return false;
    fetch = std::min(budget, fetch * 4);
  }
}

Status check_query(const PreparedQuery& query, std::size_t k, Metric metric) {
  if (k == 0) return invalid_argument("k must be at least 1", "k");
  if ((metric == Metric::frechet || metric == Metric::discrete_frechet) && !query.curve) {
    return Status(StatusCode::not_applicable,
                  std::string(metric_name(metric)) + " needs a single-curve query (one stroke or one ring)");
  }
  return Status::ok();
}

Result<QueryAnswer> run_query(const Collection::State& state, const PreparedQuery& query, const QueryOptions& options,
                              std::optional<std::int64_t> excluded_label) {
  if (Status s = check_query(query, options.k, options.metric); !s.is_ok()) return s;
  Result<MetadataFilter> filter = MetadataFilter::parse(options.metadata_filter);
  if (!filter) return filter.status();
  const ApproximateIndex* approximate = query.generation->approximate.get();
  const bool frechet_metric = options.metric == Metric::frechet || options.metric == Metric::discrete_frechet;
  const bool partitioned = approximate && approximate->kind() == IndexKind::partitioned;
  const std::size_t per_hit = frechet_metric && partitioned   ? kWidestFastCandidatesPerHit
                              : frechet_metric || partitioned ? kWideFastCandidatesPerHit
                                                              : kFastCandidatesPerHit;
  const std::size_t budget = options.candidate_budget > 0 ? options.candidate_budget
                             : options.exact              ? query.generation->index.size()
                                                          : per_hit * options.k;
  QueryAnswer answer;
  if (!options.exact && approximate && approximate->ready()) {
    // Fast mode on a graph or partitioned collection: the approximate index's candidates,
    // scored exactly; which shapes are candidates is approximate, so the answer is not
    // certified. They are scored in order of the metric's lower bound (curve ends included for
    // Fréchet; as the graph hands them out, or from the exhaustive index's vectors for
    // partitions, which compare another way), so that once the next
    // bound passes the k-th best distance the rest cannot enter the answer and are never read
    // from the store.
    const std::size_t bound_values = query.generation->compared_dimensions(options.metric);
    Result<ApproximateIndex::CandidateWalk> walk = [&] {
      TimeAddedTo timer(answer.stats.index_milliseconds);
      return approximate->walk(query.raw, bound_values);
    }();
    if (!walk) return walk.status();
    // The next candidates, up to `count` in all, in lower-bound order.
    auto draw = [&](std::size_t count) -> Result<std::vector<Neighbour>> {
      TimeAddedTo timer(answer.stats.index_milliseconds);
      Result<std::vector<Neighbour>> candidates = walk->next(count + (excluded_label ? 1 : 0));
      if (!candidates) return candidates.status();
      answer.stats.candidates_drawn += candidates->size();
      const auto by_distance = [](const Neighbour& a, const Neighbour& b) { return a.distance < b.distance; };
      if (approximate->kind() == IndexKind::graph) {
        // A graph's distances are already the bound, L∞ over the metric's values as the
        // exhaustive index computes it (the same floats and kernel; ApproximateIndex::candidates).
        // Looking each label up there again cost about 5 % of a Hausdorff query at 1M and 8 % of
        // a Fréchet one; tombstones stay in, and draw_candidate finds no shape under them.
        std::erase_if(*candidates, [&](const Neighbour& n) { return n.label == excluded_label; });
        std::sort(candidates->begin(), candidates->end(), by_distance);
        return candidates;
      }
      std::vector<std::int64_t> labels;
      labels.reserve(candidates->size());
      for (const Neighbour& n : *candidates) {
        if (n.label != excluded_label) labels.push_back(n.label);
      }
      // Labels without a vector are tombstones (deleted or replaced since the build): left out.
      Result<std::vector<Neighbour>> distances = query.generation->index.distances_to(labels, query.raw, bound_values);
      if (!distances) return distances.status();
      std::sort(distances->begin(), distances->end(), by_distance);
      return distances;
    };
    // On a graph the default budget is a ceiling: the walk starts at 20·k and widens, to 40·k
    // and then the budget, only while its frontier (the last candidate it handed out) could
    // still be within the k-th best distance found, as on a graph holding thousands of
    // near-copies of the query; where the figure has a few, the first 20·k settle it. An
    // explicit budget is drawn whole, and the sketch metric, with no distance to compare the
    // frontier with, draws its budget whole too.
    std::vector<std::size_t> steps;
    if (options.candidate_budget == 0 && approximate->kind() == IndexKind::graph && options.metric != Metric::sketch) {
      for (const std::size_t per_hit : {kFirstStepPerHit, kFastCandidatesPerHit}) {
        if (per_hit * options.k < budget) steps.push_back(per_hit * options.k);
      }
    }
    steps.push_back(budget);
    Result<std::vector<Neighbour>> drawn = draw(steps.front());
    if (!drawn) return drawn.status();
    // Fréchet: the first candidates by lower bound are scored in order of an upper bound from
    // their copies, so that the first k scored are likely the k nearest and the threshold
    // falls to about the k-th distance at once; and the threshold starts at the k-th smallest
    // of those bounds: k candidates are each within their bound, so no candidate farther can
    // be among the k nearest of them. That holds only while those k stay stored and pass the
    // filter, so there is no cap with a filter, and a query that ends with fewer than k hits
    // (a concurrent delete took one) runs again without it.
    const bool coupled = options.metric == Metric::frechet && query.curve && options.metadata_filter.empty();
    const double cap = coupled ? order_by_upper_bounds(state, query, options.k,
                                                       std::span(*drawn).first(std::min(
                                                           drawn->size(), kCoupledCandidatesPerHit * options.k)))
                               : kInfinity;
    // Scores `candidates`, in their order, into `selection`.
    auto score = [&](NearestSelection& selection, std::span<const Neighbour> candidates) -> Status {
      for (const Neighbour& n : candidates) {
        if (options.metric != Metric::sketch && query.lower_bound_from(n.distance) > selection.threshold()) {
          answer.stats.pruned_by_sketch_bound += 1;
          continue;
        }
        Result<std::optional<StoredShape>> candidate =
            draw_candidate(state, query, n.label, options.metric, selection.threshold(), *filter, answer.stats);
        if (!candidate) return candidate.status();
        if (*candidate) selection.consider(**candidate);
      }
      return Status::ok();
    };
    {
      NearestSelection selection(query, options.metric, options.k, answer.stats);
      selection.cap_threshold(cap);
      if (Status s = score(selection, *drawn); !s.is_ok()) return s;
      for (std::size_t step = 1;
           step < steps.size() && query.lower_bound_from(walk->frontier()) <= selection.threshold(); ++step) {
        Result<std::vector<Neighbour>> wider = draw(steps[step]);
        if (!wider) return wider.status();
        if (Status s = score(selection, *wider); !s.is_ok()) return s;
        drawn->insert(drawn->end(), wider->begin(), wider->end());
      }
      answer.hits = selection.finish();
    }
    // The stats add up over both runs.
    if (cap < kInfinity && answer.hits.size() < options.k) {
      NearestSelection selection(query, options.metric, options.k, answer.stats);
      if (Status s = score(selection, *drawn); !s.is_ok()) return s;
      answer.hits = selection.finish();
    }
    return answer;
  }
  // Fast and exact mode walk alike and stop once certified; they differ only in the budget.
  // Metric::sketch has no exact distance to certify against: it stops only at the budget.
  NearestSelection selection(query, options.metric, options.k, answer.stats);
  Result<bool> complete = walk_candidates(
      state, query, options.metric, excluded_label, *filter, std::max<std::size_t>(4 * options.k, 32), budget,
      answer.stats, [&] { return selection.threshold(); },
      [&](StoredShape& candidate) {
        selection.consider(candidate);
        return true;
      },
      [&](double unseen_bound) { return options.metric != Metric::sketch && unseen_bound > selection.threshold(); });
  if (!complete) return complete.status();
  answer.certified = *complete;
  answer.hits = selection.finish();
  return answer;
}

}  // namespace

const char* metric_name(Metric metric) { return kMetricNames[static_cast<int>(metric)]; }

Result<Metric> parse_metric(const std::string& name) {
  for (int m = 0; m < 4; ++m) {
    if (name == kMetricNames[m]) return static_cast<Metric>(m);
  }
  return invalid_argument("unknown metric '" + name + "' (expected hausdorff, frechet, discrete-frechet or sketch)");
}

Result<QueryAnswer> Collection::nearest(const Shape& query, const QueryOptions& options) const {
  if (Status s = validate(query, state_->settings.limits); !s.is_ok()) return s;
  const PreparedQuery prepared(apply_frame(query, state_->settings.frame), state_->current_generation());
  return run_query(*state_, prepared, options, std::nullopt);
}

Result<QueryAnswer> Collection::nearest_to_stored(const std::string& id, const QueryOptions& options) const {
  std::shared_ptr<const Generation> generation = state_->current_generation();
  Result<StoredShape> stored = state_->load(id, *generation);
  if (!stored) return stored.status();
  const PreparedQuery prepared(stored->shape, std::move(generation));
  return run_query(*state_, prepared, options, stored->label);
}

Result<QueryAnswer> Collection::within(const Shape& query, const RangeOptions& options) const {
  if (Status s = validate(query, state_->settings.limits); !s.is_ok()) return s;
  if (!(options.radius >= 0) || !std::isfinite(options.radius)) {
    return invalid_argument("radius must be a finite number ≥ 0", "radius");
  }
  if (options.metric == Metric::sketch) {
    return invalid_argument("a range query needs an exact metric (hausdorff, frechet or discrete-frechet)", "metric");
  }
  if (options.max_results == 0) return invalid_argument("max_results must be at least 1", "max_results");
  const PreparedQuery prepared(apply_frame(query, state_->settings.frame), state_->current_generation());
  if (Status s = check_query(prepared, 1, options.metric); !s.is_ok()) return s;
  Result<MetadataFilter> filter = MetadataFilter::parse(options.metadata_filter);
  if (!filter) return filter.status();
  QueryAnswer answer;
  bool truncated = false;
  Result<bool> complete = walk_candidates(
      *state_, prepared, options.metric, std::nullopt, *filter, 64, prepared.generation->index.size(), answer.stats,
      [&] { return options.radius; },
      [&](const StoredShape& candidate) {
        if (std::optional<double> distance =
                distance_within(prepared, candidate, options.metric, options.radius, answer.stats);
            distance && *distance <= options.radius) {
          answer.hits.push_back({candidate.id, *distance, sketch_distance(prepared, candidate), candidate.metadata});
          if (answer.hits.size() >= options.max_results) {
            truncated = true;
            return false;
          }
        }
        return true;
      },
      // The budget is every stored shape, so the walk ends once no unseen shape can be in range.
      [&](double unseen_bound) { return unseen_bound > options.radius; });
  if (!complete) return complete.status();
  answer.certified = *complete && !truncated;
  std::sort(answer.hits.begin(), answer.hits.end(), by_distance_then_id);
  return answer;
}

Result<QueryAnswer> Collection::nearest_by_full_scan(const Shape& query, const QueryOptions& options) const {
  if (Status s = validate(query, state_->settings.limits); !s.is_ok()) return s;
  const PreparedQuery prepared(apply_frame(query, state_->settings.frame), state_->current_generation());
  if (Status s = check_query(prepared, options.k, options.metric); !s.is_ok()) return s;
  QueryAnswer answer;
  TopHits top(options.k);
  // No bounds: every stored shape gets its exact distance, so this is an independent baseline.
  std::unique_ptr<rocksdb::Iterator> it(state_->database->NewIterator(rocksdb::ReadOptions()));
  const std::string prefix = shape_key("");
  for (it->Seek(prefix); it->Valid() && it->key().starts_with(prefix); it->Next()) {
    Result<StoredShape> stored =
        decode_record(id_of_shape_key(it->key()), it->value().ToStringView(), state_->settings.limits);
    if (!stored) return stored.status();
    Result<std::vector<float>> raw = prepared.generation->index.vector_of(stored->label);
    if (!raw) continue;  // replaced since the scan began
    stored->raw = std::move(*raw);
    stored->shape = apply_frame(stored->shape, state_->settings.frame);
    ++answer.stats.candidates_fetched;
    const double sketch = sketch_distance(prepared, *stored);
    // Threshold ∞: no bound or decision can refuse, so every shape gets its exact value.
    const std::optional<double> distance =
        options.metric == Metric::sketch ? std::optional<double>(sketch)
                                         : distance_within(prepared, *stored, options.metric, kInfinity, answer.stats);
    if (distance) top.offer({stored->id, *distance, sketch, stored->metadata});
  }
  answer.hits = top.take();
  answer.certified = true;
  return answer;
}

}  // namespace waymark
