// Query planning for Collection::nearest: candidates in sketch order, cheap bounds, decision
// procedure, exact distance, and the certification test (see collection.h).
#include <rocksdb/iterator.h>

#include <algorithm>
#include <cmath>
#include <cstring>
#include <limits>
#include <optional>
#include <unordered_set>

#include "index/collection_state.h"
#include "sketch/distance/bounds.h"
#include "sketch/distance/frechet.h"
#include "sketch/distance/hausdorff.h"

namespace waymark {
namespace {

constexpr double kInfinity = std::numeric_limits<double>::infinity();

const char* const kMetricNames[] = {"hausdorff", "frechet", "discrete-frechet", "sketch"};

// The query, framed and prepared once for every candidate.
struct PreparedQuery {
  PreparedQuery(const Shape& framed, const Collection::State& state)
      : shape(framed), prepared(framed), sketch(state.sketcher->sketch(framed)), raw(state.sketcher->unweighted(sketch)) {
    if (Result<Path> path = curve_of(framed)) curve = std::move(*path);
  }
  Shape shape;
  PreparedShape prepared;
  std::vector<float> sketch;
  std::vector<float> raw;  // what the index is searched with
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

// Scores one stored shape into `top`, applying the bounds and the decision first.
void score(const PreparedQuery& query, const StoredShape& stored, const Collection::State& state,
           const QueryOptions& options, TopHits& top, QueryStats& stats) {
  const double sketch_distance = Sketcher::weighted_distance(query.sketch, stored.sketch);
  if (options.metric == Metric::sketch) {
    top.offer({stored.id, sketch_distance, sketch_distance, stored.metadata});
    return;
  }
  std::optional<Path> curve;
  if (options.metric != Metric::hausdorff) {
    Result<Path> path = curve_of(stored.shape);
    if (!path) {
      ++stats.not_applicable;
      return;
    }
    curve = std::move(*path);
  }
  const double worst = top.worst();
  if (state.sketcher->linf_lower_bound(query.sketch, stored.sketch) > worst) {
    ++stats.pruned_by_sketch_bound;
    return;
  }
  double cheap = bounding_box_lower_bound(query.prepared.box, bounding_box(stored.shape));
  if (curve) {
    cheap = std::max(cheap, frechet_endpoint_lower_bound(query.curve->front(), query.curve->back(), curve->front(),
                                                         curve->back()));
  }
  if (cheap > worst) {
    ++stats.pruned_by_box_or_endpoint_bound;
    return;
  }
  double distance = 0;
  if (options.metric == Metric::hausdorff) {
    const PreparedShape candidate(stored.shape);
    if (worst < kInfinity && !hausdorff_at_most(query.prepared, candidate, worst)) {
      ++stats.pruned_by_decision;
      return;
    }
    distance = hausdorff(query.prepared, candidate).value;
  } else if (options.metric == Metric::frechet) {
    if (worst < kInfinity && !frechet_at_most(*query.curve, *curve, worst)) {
      ++stats.pruned_by_decision;
      return;
    }
    distance = frechet(*query.curve, *curve).value;
  } else {
    distance = discrete_frechet(*query.curve, *curve).value;
  }
  ++stats.exact_evaluations;
  top.offer({stored.id, distance, sketch_distance, stored.metadata});
}

Status check_query(const PreparedQuery& query, const QueryOptions& options) {
  if (options.k == 0) return invalid_argument("k must be at least 1");
  if ((options.metric == Metric::frechet || options.metric == Metric::discrete_frechet) && !query.curve) {
    return Status(StatusCode::not_applicable, std::string(metric_name(options.metric)) +
                                                  " needs a single-curve query (one stroke or one ring)");
  }
  return Status::ok();
}

Result<QueryAnswer> run_query(const Collection::State& state, const Shape& framed, const QueryOptions& options,
                              std::optional<std::int64_t> excluded_label) {
  const PreparedQuery query(framed, state);
  if (Status s = check_query(query, options); !s.is_ok()) return s;
  const std::size_t stored = state.index->size();
  const std::size_t budget = options.candidate_budget > 0 ? options.candidate_budget
                             : options.exact              ? stored
                                                          : 20 * options.k;
  QueryAnswer answer;
  TopHits top(options.k);
  std::unordered_set<std::int64_t> seen;  // labels already scored (rounds overlap)
  std::size_t fetch = std::min(budget, std::max<std::size_t>(4 * options.k, 32));
  while (true) {
    Result<std::vector<Neighbour>> neighbours = state.index->search(query.raw, fetch + (excluded_label ? 1 : 0));
    if (!neighbours) return neighbours.status();
    for (const Neighbour& n : *neighbours) {
      if (n.label == excluded_label || !seen.insert(n.label).second) continue;
      std::string id;
      {
        std::shared_lock lock(state.labels_mutex);
        auto found = state.id_of_label.find(n.label);
        if (found == state.id_of_label.end()) continue;  // removed since the search
        id = found->second;
      }
      Result<StoredShape> candidate = state.load(id);
      if (!candidate) {
        if (candidate.status().code() == StatusCode::not_found) continue;  // removed since the search
        return candidate.status();
      }
      ++answer.stats.candidates_fetched;
      score(query, *candidate, state, options, top, answer.stats);
    }
    const std::size_t usable = neighbours->size() - (excluded_label ? 1 : 0);
    const bool exhausted = neighbours->size() < fetch + (excluded_label ? 1 : 0);
    // Every shape not yet drawn has a raw L∞ sketch difference ≥ the last one drawn, and that
    // bounds its exact distance from below. The factor allows for float rounding.
    const double unseen_bound = neighbours->empty() ? kInfinity : neighbours->back().distance * (1 - 1e-5);
    if (exhausted || (options.metric != Metric::sketch && unseen_bound > top.worst())) {
      answer.certified = exhausted || unseen_bound > top.worst();
      break;
    }
    // Fast and exact mode grow alike and stop once certified; they differ only in the budget.
    if (fetch >= budget || usable == 0) break;
    fetch = std::min(budget, fetch * 4);
  }
  answer.hits = top.take();
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
  return run_query(*state_, apply_frame(query, state_->settings.frame), options, std::nullopt);
}

Result<QueryAnswer> Collection::nearest_to_stored(const std::string& id, const QueryOptions& options) const {
  Result<StoredShape> stored = state_->load(id);
  if (!stored) return stored.status();
  return run_query(*state_, stored->shape, options, stored->label);
}

Result<QueryAnswer> Collection::nearest_by_full_scan(const Shape& query, const QueryOptions& options) const {
  if (Status s = validate(query, state_->settings.limits); !s.is_ok()) return s;
  const PreparedQuery prepared(apply_frame(query, state_->settings.frame), *state_);
  if (Status s = check_query(prepared, options); !s.is_ok()) return s;
  QueryAnswer answer;
  TopHits top(options.k);
  // No bounds: every stored shape gets its exact distance, so this is an independent baseline.
  std::unique_ptr<rocksdb::Iterator> it(state_->database->NewIterator(rocksdb::ReadOptions()));
  const std::string prefix = shape_key("");
  for (it->Seek(prefix); it->Valid() && it->key().starts_with(prefix); it->Next()) {
    Result<StoredShape> stored = decode_record(it->key().ToString().substr(prefix.size()), it->value().ToStringView(),
                                               state_->sketcher->dimension(), state_->settings.limits);
    if (!stored) return stored.status();
    ++answer.stats.candidates_fetched;
    TopHits single(1);
    QueryStats ignored;
    score(prepared, *stored, *state_, options, single, ignored);  // top of 1 with worst = ∞: never pruned
    answer.stats.not_applicable += ignored.not_applicable;
    answer.stats.exact_evaluations += ignored.exact_evaluations;
    for (QueryHit& hit : single.take()) top.offer(std::move(hit));
  }
  answer.hits = top.take();
  answer.certified = true;
  return answer;
}

}  // namespace waymark
