#include "index/approximate_index.h"

#include <faiss/IndexFlat.h>
#include <faiss/IndexHNSW.h>
#include <faiss/IndexIVFFlat.h>
#include <faiss/impl/AuxIndexStructures.h>
#include <faiss/impl/io.h>
#include <faiss/index_io.h>
#include <xxhash.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstring>
#include <functional>
#include <limits>
#include <mutex>
#include <optional>
#include <unordered_map>
#include <unordered_set>
#include <utility>
#include <vector>

#include "index/linf_distances.h"

namespace waymark {
namespace {

const char* const kKindNames[] = {"exhaustive", "graph", "partitioned"};

Status from_exception(const std::exception& error) {
  return Status(StatusCode::internal, std::string("approximate index: ") + error.what());
}

// The L∞ distance between two vectors (the exhaustive index's kernel, index/linf_distances.h).
float linf_distance(const float* a, const float* b, std::size_t dimension) {
  float distance = 0;
  linf_distances(b, 1, dimension, dimension, a, &distance);
  return distance;
}

// The graph is FAISS's HNSW over a flat L∞ index of the raw landmark distances: the metric whose
// order is the sketch lower bound's, so the candidates it returns are those the bound is least
// likely to refuse. Against the weighted L2 graph it replaced, at 1M synthetic shapes and 400
// candidates, recall@10 rose from 0.870 to about 0.98 (Hausdorff) and from 0.711 to about 0.78
// (Fréchet) (reports/performance-log.md, 2026-12-05). FAISS as Debian builds it computes L∞ with a scalar
// generic loop (its "extra" metrics); the storage below gives the graph this vectorised
// distance computer instead, for builds and searches alike. The bytes stored and serialised are
// FAISS's own flat L∞ index.
class VectorisedLinfComputer final : public faiss::FlatCodesDistanceComputer {
 public:
  explicit VectorisedLinfComputer(const faiss::IndexFlat& storage)
      : FlatCodesDistanceComputer(storage.codes.data(), storage.code_size),
        vectors_(reinterpret_cast<const float*>(storage.codes.data())),
        dimension_(static_cast<std::size_t>(storage.d)) {}
  void set_query(const float* query) override { query_ = query; }
  float distance_to_code(const std::uint8_t* code) override {
    return linf_distance(query_, reinterpret_cast<const float*>(code), dimension_);
  }
  float symmetric_dis(idx_t i, idx_t j) override {
    return linf_distance(vectors_ + static_cast<std::size_t>(i) * dimension_,
                         vectors_ + static_cast<std::size_t>(j) * dimension_, dimension_);
  }

 private:
  const float* vectors_;
  std::size_t dimension_;
  const float* query_ = nullptr;
};

struct VectorisedFlatLinf final : faiss::IndexFlat {
  explicit VectorisedFlatLinf(faiss::Index::idx_t dimension) : IndexFlat(dimension, faiss::METRIC_Linf) {}
  faiss::FlatCodesDistanceComputer* get_FlatCodesDistanceComputer() const override {
    return new VectorisedLinfComputer(*this);
  }
};

// Gives a graph VectorisedFlatLinf storage (the same vectors); FAISS reads its storage back as a
// plain flat index, so this runs after every read too. False when `index` is a graph whose
// storage is not a flat L∞ index: a snapshot of the weighted L2 graph of earlier builds.
bool use_vectorised_storage(faiss::Index& index) {
  auto* graph = dynamic_cast<faiss::IndexHNSWFlat*>(&index);
  if (!graph) return true;
  auto* plain = dynamic_cast<faiss::IndexFlat*>(graph->storage);
  if (!plain || plain->metric_type != faiss::METRIC_Linf) return false;
  if (dynamic_cast<VectorisedFlatLinf*>(plain)) return true;
  auto vectorised = std::make_unique<VectorisedFlatLinf>(plain->d);
  vectorised->codes = std::move(plain->codes);
  vectorised->ntotal = plain->ntotal;
  if (graph->own_fields) delete plain;
  graph->storage = vectorised.release();
  graph->own_fields = true;
  return true;
}

using GraphEntry = std::pair<float, faiss::HNSW::storage_idx_t>;  // (distance, node)

// The bottom layer's walk between steps (walk_graph), so that a later step with a larger ef
// goes on from where the last stopped.
struct GraphWalkState {
  std::vector<GraphEntry> unexpanded;  // heap, nearest on top: reached, not expanded yet
  std::vector<GraphEntry> kept;        // heap, farthest on top: the ef nearest reached (empty: not begun)
  // Reached while the list was full and no nearer than its farthest: neither queued nor kept.
  std::vector<GraphEntry> passed_over;
  // Kept, then pushed out of the full list (queued still, or expanded already).
  std::vector<GraphEntry> dropped;
};

// A visited table for one walk: the thread's own, reset by advancing its mark when the walk
// ends (also after a throw, whose marks would otherwise read as "visited" in the next walk), or
// a private one while another walk on this thread holds it.
class VisitedMarks {
 public:
  explicit VisitedMarks(std::size_t stored) {
    thread_local std::unique_ptr<faiss::VisitedTable> shared;
    thread_local bool shared_in_use = false;
    if (shared_in_use) {
      own_ = std::make_unique<faiss::VisitedTable>(static_cast<int>(stored));
      table_ = own_.get();
      return;
    }
    if (!shared || shared->visited.size() < stored) shared = std::make_unique<faiss::VisitedTable>(static_cast<int>(stored));
    table_ = shared.get();
    in_use_ = &shared_in_use;
    shared_in_use = true;
  }
  VisitedMarks(const VisitedMarks&) = delete;
  VisitedMarks& operator=(const VisitedMarks&) = delete;
  ~VisitedMarks() {
    if (!in_use_) return;
    table_->advance();
    *in_use_ = false;
  }
  faiss::VisitedTable& table() { return *table_; }

 private:
  std::unique_ptr<faiss::VisitedTable> own_;
  faiss::VisitedTable* table_ = nullptr;
  bool* in_use_ = nullptr;
};

// One step of a graph search on the calling thread, over FAISS's HNSW graph and L∞ storage: at
// the first step a greedy descent through the upper layers, then a best-first walk of the
// bottom layer that keeps the `ef` nearest nodes seen and stops once the nearest unexpanded
// node is farther than all of them (the HNSW paper's search; Malkov & Yashunin, IEEE TPAMI
// 42(4), 2020, algorithms 2 and 5, cited from memory). A later step with a larger ef first
// takes back the nodes the last one passed over or dropped, then walks on. FAISS's own walk
// (HNSW::search) was replaced for two reasons. Its
// candidate list finds its minimum by a linear scan of ef entries per step. And it computes
// each neighbour's distance as it reaches it, where at a million shapes each neighbour's vector
// is a cache miss (cold, 256 bytes): here a node's unvisited neighbours are gathered first and
// their vectors prefetched, so the misses overlap (index time at 1M: 1.40–2.32 → 0.82–1.00 ms,
// reports/performance-log.md, 2026-12-05). IndexHNSW::search is avoided altogether: it opens an
// OpenMP region on every call, and each of its threads zeroes a visited table of one byte per
// stored vector (VisitedMarks keeps one per thread).
void walk_graph(const faiss::IndexHNSW& graph, const float* query, std::size_t ef, faiss::VisitedTable& visited,
                GraphWalkState& state) {
  const faiss::HNSW& hnsw = graph.hnsw;
  if (graph.ntotal == 0 || hnsw.entry_point < 0) return;
  const auto& storage = dynamic_cast<const faiss::IndexFlat&>(*graph.storage);
  const std::size_t dimension = static_cast<std::size_t>(storage.d);
  const float* vectors = reinterpret_cast<const float*>(storage.codes.data());
  auto vector_of = [&](faiss::HNSW::storage_idx_t node) { return vectors + static_cast<std::size_t>(node) * dimension; };
  auto distance_to = [&](faiss::HNSW::storage_idx_t node) { return linf_distance(query, vector_of(node), dimension); };
  auto prefetch = [&](faiss::HNSW::storage_idx_t node) {
    const char* bytes = reinterpret_cast<const char*>(vector_of(node));
    for (std::size_t offset = 0; offset < dimension * sizeof(float); offset += 64) __builtin_prefetch(bytes + offset);
  };
  const auto farther = std::greater<GraphEntry>();  // a min-heap's comparison
  auto queue = [&](GraphEntry entry) {
    state.unexpanded.push_back(entry);
    std::push_heap(state.unexpanded.begin(), state.unexpanded.end(), farther);
  };
  auto keep = [&](GraphEntry entry) {
    state.kept.push_back(entry);
    std::push_heap(state.kept.begin(), state.kept.end());
    if (state.kept.size() > ef) {
      std::pop_heap(state.kept.begin(), state.kept.end());
      state.dropped.push_back(state.kept.back());
      state.kept.pop_back();
    }
  };

  if (state.kept.empty()) {
    faiss::HNSW::storage_idx_t nearest = hnsw.entry_point;
    float nearest_distance = distance_to(nearest);
    for (int level = hnsw.max_level; level > 0; --level) {
      for (bool moved = true; moved;) {
        moved = false;
        std::size_t begin = 0, end = 0;
        hnsw.neighbor_range(nearest, level, &begin, &end);
        for (std::size_t i = begin; i < end && hnsw.neighbors[i] >= 0; ++i) prefetch(hnsw.neighbors[i]);
        for (std::size_t i = begin; i < end && hnsw.neighbors[i] >= 0; ++i) {
          const float d = distance_to(hnsw.neighbors[i]);
          if (d < nearest_distance) {
            nearest_distance = d;
            nearest = hnsw.neighbors[i];
            moved = true;
          }
        }
      }
    }
    queue({nearest_distance, nearest});
    keep({nearest_distance, nearest});
    visited.set(nearest);
  } else {
    const std::vector<GraphEntry> passed_over = std::exchange(state.passed_over, {});
    const std::vector<GraphEntry> dropped = std::exchange(state.dropped, {});
    for (const GraphEntry& entry : passed_over) {
      queue(entry);
      keep(entry);
    }
    for (const GraphEntry& entry : dropped) keep(entry);
  }

  thread_local std::vector<faiss::HNSW::storage_idx_t> fresh;
  while (!state.unexpanded.empty()) {
    std::pop_heap(state.unexpanded.begin(), state.unexpanded.end(), farther);
    const GraphEntry node = state.unexpanded.back();
    state.unexpanded.pop_back();
    if (state.kept.size() >= ef && node.first > state.kept.front().first) {
      queue(node);  // for a wider step
      break;
    }
    std::size_t begin = 0, end = 0;
    hnsw.neighbor_range(node.second, 0, &begin, &end);
    fresh.clear();
    for (std::size_t i = begin; i < end && hnsw.neighbors[i] >= 0; ++i) {
      const faiss::HNSW::storage_idx_t neighbour = hnsw.neighbors[i];
      if (visited.get(neighbour)) continue;
      visited.set(neighbour);
      prefetch(neighbour);
      fresh.push_back(neighbour);
    }
    for (const faiss::HNSW::storage_idx_t neighbour : fresh) {
      const float d = distance_to(neighbour);
      if (state.kept.size() >= ef && d >= state.kept.front().first) {
        state.passed_over.push_back({d, neighbour});
        continue;
      }
      queue({d, neighbour});
      keep({d, neighbour});
    }
  }
}

}  // namespace

const char* index_kind_name(IndexKind kind) { return kKindNames[static_cast<int>(kind)]; }

Result<IndexKind> parse_index_kind(const std::string& name) {
  for (int k = 0; k < 3; ++k) {
    if (name == kKindNames[k]) return static_cast<IndexKind>(k);
  }
  return invalid_argument("unknown index kind '" + name + "' (expected exhaustive, graph or partitioned)", "index");
}

ApproximateIndex::ApproximateIndex(IndexKind kind, std::vector<double> root_weights, std::size_t dimension,
                                   ApproximateIndexSettings settings)
    : kind_(kind), root_weights_(std::move(root_weights)), settings_(settings), fresh_(dimension) {}

ApproximateIndex::~ApproximateIndex() = default;

std::vector<float> ApproximateIndex::compared_values(std::span<const float> raw) const {
  // fresh_ holds raw vectors, so its dimension is theirs.
  const std::size_t compared = root_weights_.size(), dimension = fresh_.dimension(), count = raw.size() / dimension;
  const bool weighted = kind_ == IndexKind::partitioned;
  std::vector<float> out(count * compared);
  for (std::size_t row = 0; row < count; ++row) {
    for (std::size_t i = 0; i < compared; ++i) {
      const float value = raw[row * dimension + i];
      out[row * compared + i] = weighted ? static_cast<float>(value * root_weights_[i]) : value;
    }
  }
  return out;
}

std::vector<float> ApproximateIndex::uncompared_values(std::span<const float> raw) const {
  const std::size_t compared = root_weights_.size(), dimension = fresh_.dimension(), count = raw.size() / dimension;
  std::vector<float> out;
  out.reserve(count * (dimension - compared));
  for (std::size_t row = 0; row < count; ++row) {
    out.insert(out.end(), raw.begin() + static_cast<std::ptrdiff_t>(row * dimension + compared),
               raw.begin() + static_cast<std::ptrdiff_t>((row + 1) * dimension));
  }
  return out;
}

Status ApproximateIndex::added(std::span<const std::int64_t> labels, std::span<const float> raw_vectors) {
  return fresh_.add(labels, raw_vectors);
}

void ApproximateIndex::removed(std::span<const std::int64_t> labels) {
  const std::size_t fresh_before = fresh_.size();
  (void)fresh_.remove(labels);  // never fails
  // Labels that were not fresh are in the built index: tombstones there.
  tombstones_ += labels.size() - (fresh_before - fresh_.size());
}

bool ApproximateIndex::ready() const {
  std::shared_lock lock(mutex_);
  return built_ != nullptr;
}

bool ApproximateIndex::rebuild_due(std::size_t stored) const {
  std::shared_lock lock(mutex_);
  if (!built_) return stored >= settings_.minimum_size;
  const double changed = static_cast<double>(fresh_.size() + tombstones_);
  return changed > settings_.rebuild_fraction * static_cast<double>(label_of_row_.size());
}

Status ApproximateIndex::build(const VectorIndex::Contents& copy) {
  const auto started = std::chrono::steady_clock::now();
  const std::size_t dimension = root_weights_.size();
  const std::size_t count = copy.labels.size();
  if (count == 0) return Status::ok();
  const std::vector<float> vectors = compared_values(copy.vectors);
  std::unique_ptr<faiss::Index> index;
  std::size_t partitions = 0;
  try {
    if (kind_ == IndexKind::graph) {
      auto graph = std::make_unique<faiss::IndexHNSWFlat>(
          static_cast<int>(dimension), static_cast<int>(settings_.graph_neighbours), faiss::METRIC_Linf);
      use_vectorised_storage(*graph);
      graph->hnsw.efConstruction = static_cast<int>(settings_.graph_build_effort);
      graph->add(static_cast<faiss::Index::idx_t>(count), vectors.data());
      index = std::move(graph);
    } else {
      // About √n partitions (common practice, no source), trained on up to 64 points each.
      partitions = std::clamp<std::size_t>(static_cast<std::size_t>(std::sqrt(static_cast<double>(count))), 1, 65536);
      auto quantizer = new faiss::IndexFlatL2(static_cast<faiss::Index::idx_t>(dimension));
      auto lists = std::make_unique<faiss::IndexIVFFlat>(quantizer, dimension, partitions, faiss::METRIC_L2);
      lists->own_fields = true;
      const std::size_t training = std::min(count, 64 * partitions);
      // An evenly spaced sample: the copy's order is insertion order, so this spans the history.
      std::vector<float> sample(training * dimension);
      for (std::size_t i = 0; i < training; ++i) {
        const std::size_t row = i * count / training;
        std::copy_n(vectors.begin() + static_cast<std::ptrdiff_t>(row * dimension), dimension,
                    sample.begin() + static_cast<std::ptrdiff_t>(i * dimension));
      }
      lists->cp.verbose = false;
      lists->train(static_cast<faiss::Index::idx_t>(training), sample.data());
      lists->add(static_cast<faiss::Index::idx_t>(count), vectors.data());
      index = std::move(lists);
    }
  } catch (const std::exception& error) {
    return from_exception(error);
  }
  {
    std::unique_lock lock(mutex_);
    built_ = std::move(index);
    ++swaps_;
    label_of_row_ = copy.labels;
    uncompared_of_row_ = kind_ == IndexKind::graph ? uncompared_values(copy.vectors) : std::vector<float>();
    partitions_ = partitions;
    tombstones_ = 0;
  }
  (void)fresh_.remove(copy.labels);  // now in the built index
  ++builds_;
  last_build_seconds_ = std::chrono::duration<double>(std::chrono::steady_clock::now() - started).count();
  return Status::ok();
}

struct ApproximateIndex::CandidateWalk::State {
  const ApproximateIndex* index = nullptr;
  std::vector<float> raw_query;
  std::vector<float> query;  // its compared values, as the built index holds them
  std::size_t bound_values = 0;
  std::uint64_t swaps = 0;   // the built index's swap count when the walk began
  bool built_gone = false;   // swapped since: nothing more from it
  std::size_t built_count = 0, fresh_count = 0;  // what each index was last asked for
  float built_frontier = 0, fresh_frontier = 0;
  std::optional<VisitedMarks> visited;  // a graph's, from its first step
  GraphWalkState graph;
  std::optional<VectorIndex::Scan> fresh;
  // Labels handed out; `returned_set` holds them too once a step must check against them
  // (the first step's built candidates are distinct rows, so it needs no set).
  std::vector<std::int64_t> returned;
  std::unordered_set<std::int64_t> returned_set;
  bool set_made = false;

  // Records `label` as handed out; with `check`, false (and nothing recorded) when it was.
  bool hand_out(std::int64_t label, bool check) {
    if (check && !set_made) {
      returned_set.insert(returned.begin(), returned.end());
      set_made = true;
    }
    if (set_made && !returned_set.insert(label).second) return false;
    returned.push_back(label);
    return true;
  }
};

ApproximateIndex::CandidateWalk::CandidateWalk(std::unique_ptr<State> state) : state_(std::move(state)) {}
ApproximateIndex::CandidateWalk::CandidateWalk(CandidateWalk&&) noexcept = default;
ApproximateIndex::CandidateWalk::~CandidateWalk() = default;

float ApproximateIndex::CandidateWalk::frontier() const { return std::min(state_->built_frontier, state_->fresh_frontier); }

Result<std::vector<Neighbour>> ApproximateIndex::CandidateWalk::next(std::size_t count) {
  State& walk = *state_;
  const ApproximateIndex& index = *walk.index;
  const std::size_t compared = index.root_weights_.size();
  std::vector<Neighbour> out;
  if (count > walk.built_count && !walk.built_gone) {
    std::shared_lock lock(index.mutex_);
    if (!index.built_ || index.swaps_ != walk.swaps) {
      walk.built_gone = true;
      walk.built_frontier = std::numeric_limits<float>::infinity();
    } else {
      const bool check = walk.built_count > 0;
      const std::size_t wanted = std::min(count, index.label_of_row_.size());
      std::vector<float> distances(wanted);
      std::vector<faiss::Index::idx_t> rows(wanted, -1);  // -1: none found (FAISS's convention)
      try {
        if (wanted == 0) {
          // Nothing to search (FAISS would refuse k = 0).
        } else if (index.kind_ == IndexKind::graph) {
          const auto& graph = dynamic_cast<const faiss::IndexHNSW&>(*index.built_);
          if (!walk.visited) walk.visited.emplace(static_cast<std::size_t>(graph.ntotal));
          const std::size_t ef = std::max<std::size_t>(64, wanted);
          walk_graph(graph, walk.query.data(), ef, walk.visited->table(), walk.graph);
          std::vector<GraphEntry> nearest = walk.graph.kept;
          std::sort(nearest.begin(), nearest.end());
          for (std::size_t i = 0; i < std::min(wanted, nearest.size()); ++i) {
            distances[i] = nearest[i].first;
            rows[i] = nearest[i].second;
          }
          // Nodes not handed out lie (approximately) beyond the last one that was, while any
          // are left: kept and not handed out, queued, passed over or dropped.
          const std::size_t handed = std::min(wanted, nearest.size());
          const bool more = nearest.size() > handed || !walk.graph.unexpanded.empty() ||
                            !walk.graph.passed_over.empty() || !walk.graph.dropped.empty();
          walk.built_frontier = handed > 0 && more ? nearest[handed - 1].first : std::numeric_limits<float>::infinity();
        } else {
          faiss::SearchParametersIVF parameters;
          // Enough lists to hold about 8·count vectors, and at least 8 (common practice, no source).
          const std::size_t per_list =
              std::max<std::size_t>(1, index.label_of_row_.size() / std::max<std::size_t>(1, index.partitions_));
          parameters.nprobe = std::clamp<std::size_t>(8 * wanted / per_list, 8, index.partitions_);
          index.built_->search(1, walk.query.data(), static_cast<faiss::Index::idx_t>(wanted), distances.data(),
                               rows.data(), &parameters);
        }
      } catch (const std::exception& error) {
        return from_exception(error);
      }
      // The graph's distance is L∞ over the compared values; the kept values extend it.
      const std::size_t kept = index.fresh_.dimension() - compared;
      const std::size_t extended = index.kind_ == IndexKind::graph ? walk.bound_values - compared : 0;
      for (std::size_t i = 0; i < wanted; ++i) {
        if (rows[i] < 0) continue;
        const std::size_t row = static_cast<std::size_t>(rows[i]);
        if (!walk.hand_out(index.label_of_row_[row], check)) continue;
        float distance = distances[i];
        if (extended > 0) {
          float kept_distance = 0;
          linf_distances(index.uncompared_of_row_.data() + row * kept, 1, kept, extended,
                         walk.raw_query.data() + compared, &kept_distance);
          distance = std::max(distance, kept_distance);
        }
        out.push_back({index.label_of_row_[row], distance});
      }
      walk.built_count = count;
    }
  }
  // Fresh vectors, nearest by L∞; a label can be in both only while a build is swapping in.
  if (count > walk.fresh_count) {
    if (!walk.fresh) {
      Result<VectorIndex::Scan> scan =
          index.fresh_.scan(walk.raw_query, index.kind_ == IndexKind::graph ? walk.bound_values : compared);
      if (!scan) return scan.status();
      walk.fresh.emplace(std::move(*scan));
    }
    const std::span<const Neighbour> fresh_nearest = walk.fresh->next(count - walk.fresh_count);
    walk.fresh_count = count;
    for (const Neighbour& n : fresh_nearest) {
      if (walk.hand_out(n.label, true)) out.push_back(n);
    }
    walk.fresh_frontier = walk.fresh->exhausted() || fresh_nearest.empty() ? std::numeric_limits<float>::infinity()
                                                                           : fresh_nearest.back().distance;
  }
  return out;
}

Result<ApproximateIndex::CandidateWalk> ApproximateIndex::walk(std::span<const float> raw_query,
                                                               std::size_t bound_values) const {
  auto state = std::make_unique<CandidateWalk::State>();
  state->index = this;
  state->raw_query.assign(raw_query.begin(), raw_query.end());
  state->bound_values = std::clamp(bound_values, root_weights_.size(), fresh_.dimension());
  {
    std::shared_lock lock(mutex_);
    if (!built_) return Status(StatusCode::failed_precondition, "the approximate index is not built yet");
    state->swaps = swaps_;
  }
  state->query = compared_values(raw_query);
  return CandidateWalk(std::move(state));
}

Result<std::vector<Neighbour>> ApproximateIndex::candidates(std::span<const float> raw_query, std::size_t count,
                                                            std::size_t bound_values) const {
  Result<CandidateWalk> walk = this->walk(raw_query, bound_values);
  if (!walk) return walk.status();
  return walk->next(count);
}

namespace {

constexpr char kSnapshotMagic[8] = {'W', 'M', 'A', 'P', 'P', 'R', 'X', '2'};
// Format 1 ended with an FNV-1a checksum; such a file is rebuilt, not read.
constexpr char kFormat1Magic[8] = {'W', 'M', 'A', 'P', 'P', 'R', 'X', '1'};

std::string_view as_bytes(const void* data, std::size_t size) { return {static_cast<const char*>(data), size}; }

// FAISS serialises through an IOWriter; these two pass its pieces on. The first only counts
// (the file states the FAISS part's length before it), the second forwards to `write`.
struct CountingWriter : faiss::IOWriter {
  std::uint64_t bytes = 0;
  size_t operator()(const void*, size_t size, size_t items) override {
    bytes += size * items;
    return items;
  }
};

struct ForwardingWriter : faiss::IOWriter {
  explicit ForwardingWriter(const std::function<Status(std::string_view)>& write) : write(write) {}
  size_t operator()(const void* data, size_t size, size_t items) override {
    if (!failure.is_ok()) return 0;
    failure = write(as_bytes(data, size * items));
    return failure.is_ok() ? items : 0;  // FAISS then throws; the caller reports `failure`
  }
  const std::function<Status(std::string_view)>& write;
  Status failure;
};

// Reads at most `remaining` bytes of `in` for FAISS: a damaged length can never make it read
// past the part of the file that is its own.
struct BoundedReader : faiss::IOReader {
  BoundedReader(std::istream& in, std::uint64_t remaining) : in(in), remaining(remaining) {}
  size_t operator()(void* data, size_t size, size_t items) override {
    if (size == 0) return items;
    const std::uint64_t wanted = std::min<std::uint64_t>(items, remaining / size);
    in.read(static_cast<char*>(data), static_cast<std::streamsize>(wanted * size));
    const std::uint64_t got = static_cast<std::uint64_t>(in.gcount()) / size;
    remaining -= got * size;
    return got;
  }
  std::istream& in;
  std::uint64_t remaining;
};

// The snapshot's checksum: XXH3 64-bit (xxHash, seed 0), fed piece by piece. A snapshot is
// hundreds of MB at a million shapes; byte-at-a-time FNV-1a took 0.7 s of a restart there.
struct ChecksumStateDeleter {
  void operator()(XXH3_state_t* state) const { XXH3_freeState(state); }
};
using ChecksumState = std::unique_ptr<XXH3_state_t, ChecksumStateDeleter>;

Result<ChecksumState> new_checksum_state() {
  ChecksumState state(XXH3_createState());
  if (!state || XXH3_64bits_reset(state.get()) != XXH_OK) {
    return Status(StatusCode::resource_exhausted, "approximate index snapshot: no memory for the checksum state");
  }
  return state;
}

}  // namespace

Status ApproximateIndex::write_snapshot(std::uint64_t generation, const ByteSink& sink) const {
  std::shared_lock lock(mutex_);
  if (!built_) return Status(StatusCode::failed_precondition, "the approximate index is not built");
  Result<ChecksumState> checksum = new_checksum_state();
  if (!checksum) return checksum.status();
  // Every piece but the checksum itself goes through `put`, which checksums it on the way.
  const ByteSink put = [&](std::string_view piece) {
    XXH3_64bits_update(checksum->get(), piece.data(), piece.size());
    return sink(piece);
  };
  auto put_u64 = [&](std::uint64_t value) { return put(as_bytes(&value, sizeof value)); };
  CountingWriter counter;
  ForwardingWriter forward(put);
  try {
    faiss::write_index(built_.get(), &counter);
    Status status = put(as_bytes(kSnapshotMagic, sizeof kSnapshotMagic));
    for (std::uint64_t value : {static_cast<std::uint64_t>(kind_), generation, std::uint64_t{partitions_},
                                std::uint64_t{label_of_row_.size()}}) {
      if (status.is_ok()) status = put_u64(value);
    }
    if (status.is_ok()) status = put(as_bytes(label_of_row_.data(), label_of_row_.size() * sizeof(std::int64_t)));
    if (status.is_ok()) status = put_u64(counter.bytes);
    if (!status.is_ok()) return status;
    faiss::write_index(built_.get(), &forward);
  } catch (const std::exception& error) {
    return forward.failure.is_ok() ? from_exception(error) : forward.failure;
  }
  if (!forward.failure.is_ok()) return forward.failure;
  const std::uint64_t digest = XXH3_64bits_digest(checksum->get());
  return sink(as_bytes(&digest, sizeof digest));
}

ApproximateIndex::Snapshot::Snapshot() = default;
ApproximateIndex::Snapshot::Snapshot(Snapshot&&) noexcept = default;
ApproximateIndex::Snapshot& ApproximateIndex::Snapshot::operator=(Snapshot&&) noexcept = default;
ApproximateIndex::Snapshot::~Snapshot() = default;

Result<ApproximateIndex::Snapshot> ApproximateIndex::read_snapshot(std::istream& in, std::uint64_t generation) const {
  auto damaged = [](const std::string& what) {
    return Status(StatusCode::data_loss, "approximate index snapshot is damaged: " + what);
  };
  in.seekg(0, std::ios::end);
  const std::streamoff end = in.tellg();
  if (!in || end < static_cast<std::streamoff>(sizeof kSnapshotMagic + 8)) return damaged("not a snapshot (size)");
  const std::uint64_t body_size = static_cast<std::uint64_t>(end) - 8;
  // The magic first, so that a format-1 file is named as such rather than failing the checksum.
  in.seekg(0);
  char magic[sizeof kSnapshotMagic];
  if (!in.read(magic, sizeof magic)) return damaged("unreadable");
  if (std::memcmp(magic, kFormat1Magic, sizeof magic) == 0) {
    return Status(StatusCode::failed_precondition, "snapshot is of an older format (1)");
  }
  if (std::memcmp(magic, kSnapshotMagic, sizeof magic) != 0) return damaged("not a snapshot (magic)");
  // First pass: the checksum over everything before its own 8 bytes.
  in.seekg(0);
  Result<ChecksumState> checksum = new_checksum_state();
  if (!checksum) return checksum.status();
  std::string chunk(1 << 20, '\0');
  for (std::uint64_t left = body_size; left > 0;) {
    const std::size_t take = static_cast<std::size_t>(std::min<std::uint64_t>(left, chunk.size()));
    if (!in.read(chunk.data(), static_cast<std::streamsize>(take))) return damaged("unreadable");
    XXH3_64bits_update(checksum->get(), chunk.data(), take);
    left -= take;
  }
  std::uint64_t stored_checksum = 0;
  if (!in.read(reinterpret_cast<char*>(&stored_checksum), 8)) return damaged("unreadable");
  if (XXH3_64bits_digest(checksum->get()) != stored_checksum) return damaged("checksum mismatch");
  chunk = std::string();

  // Second pass: the fields after the magic.
  std::uint64_t offset = sizeof kSnapshotMagic;
  in.seekg(static_cast<std::streamoff>(offset));
  auto read_exactly = [&](void* data, std::uint64_t size) {
    if (body_size - offset < size || !in.read(static_cast<char*>(data), static_cast<std::streamsize>(size))) return false;
    offset += size;
    return true;
  };
  std::uint64_t kind = 0, snapshot_generation = 0, partitions = 0, count = 0, faiss_size = 0;
  if (!read_exactly(&kind, 8) || !read_exactly(&snapshot_generation, 8) || !read_exactly(&partitions, 8) ||
      !read_exactly(&count, 8)) {
    return damaged("truncated header");
  }
  if (kind != static_cast<std::uint64_t>(kind_) || snapshot_generation != generation) {
    return Status(StatusCode::failed_precondition, "snapshot is of another index kind or landmark generation");
  }
  if (count > (body_size - offset) / sizeof(std::int64_t)) return damaged("label count exceeds the file");
  Snapshot snapshot;
  snapshot.partitions = partitions;
  std::vector<std::int64_t>& labels = snapshot.labels;
  labels.resize(count);
  if (!read_exactly(labels.data(), count * sizeof(std::int64_t))) return damaged("truncated labels");
  if (!read_exactly(&faiss_size, 8) || faiss_size != body_size - offset) return damaged("index length");
  BoundedReader reader(in, faiss_size);
  std::unique_ptr<faiss::Index>& index = snapshot.index;
  try {
    index.reset(faiss::read_index(&reader));
  } catch (const std::exception& error) {
    return damaged(error.what());
  }
  if (!use_vectorised_storage(*index)) {
    return Status(StatusCode::failed_precondition, "snapshot's graph compares by weighted L2 (written by an older build)");
  }
  if (reader.remaining != 0) return damaged("index length");
  if (static_cast<std::uint64_t>(index->ntotal) != count) return damaged("index size does not match its labels");
  if (static_cast<std::size_t>(index->d) != root_weights_.size()) {
    return Status(StatusCode::failed_precondition,
                  "snapshot compares " + std::to_string(index->d) + " values per vector, this collection " +
                      std::to_string(root_weights_.size()) + " (written by an older build)");
  }
  return snapshot;
}

Status ApproximateIndex::restore(Snapshot snapshot, const VectorIndex::Contents& all) {
  // Catch up with the store: what it holds beyond the snapshot is fresh; what the snapshot
  // holds beyond the store is a tombstone.
  const std::unordered_set<std::int64_t> in_snapshot(snapshot.labels.begin(), snapshot.labels.end());
  std::unordered_map<std::int64_t, std::size_t> stored_row;
  stored_row.reserve(all.labels.size());
  std::vector<std::int64_t> fresh_labels;
  std::vector<float> fresh_vectors;
  const std::size_t dimension = fresh_.dimension(), compared = root_weights_.size(), kept = dimension - compared;
  for (std::size_t i = 0; i < all.labels.size(); ++i) {
    stored_row.emplace(all.labels[i], i);
    if (in_snapshot.contains(all.labels[i])) continue;
    fresh_labels.push_back(all.labels[i]);
    fresh_vectors.insert(fresh_vectors.end(), all.vectors.begin() + static_cast<std::ptrdiff_t>(i * dimension),
                         all.vectors.begin() + static_cast<std::ptrdiff_t>((i + 1) * dimension));
  }
  std::size_t tombstones = 0;
  // A graph keeps its rows' uncompared values (the snapshot holds only the compared ones);
  // a tombstone's are never read, as no shape is found under it: zeros.
  std::vector<float> uncompared(kind_ == IndexKind::graph ? snapshot.labels.size() * kept : 0);
  for (std::size_t row = 0; row < snapshot.labels.size(); ++row) {
    auto found = stored_row.find(snapshot.labels[row]);
    if (found == stored_row.end()) {
      ++tombstones;
    } else if (kind_ == IndexKind::graph) {
      std::copy_n(all.vectors.begin() + static_cast<std::ptrdiff_t>(found->second * dimension + compared), kept,
                  uncompared.begin() + static_cast<std::ptrdiff_t>(row * kept));
    }
  }
  std::unique_lock lock(mutex_);
  (void)fresh_.remove(fresh_.copy().labels);
  if (Status s = fresh_.add(fresh_labels, fresh_vectors); !s.is_ok()) return s;
  built_ = std::move(snapshot.index);
  ++swaps_;
  label_of_row_ = std::move(snapshot.labels);
  uncompared_of_row_ = std::move(uncompared);
  partitions_ = snapshot.partitions;
  tombstones_ = tombstones;
  return Status::ok();
}

void ApproximateIndex::set_snapshot_note(std::string note) {
  std::unique_lock lock(mutex_);
  snapshot_note_ = std::move(note);
}

std::int64_t ApproximateIndex::largest_label() const {
  std::shared_lock lock(mutex_);
  return label_of_row_.empty() ? 0 : *std::max_element(label_of_row_.begin(), label_of_row_.end());
}

ApproximateIndexStatus ApproximateIndex::status() const {
  std::shared_lock lock(mutex_);
  return {built_ != nullptr, snapshot_note_, label_of_row_.size(), fresh_.size(), tombstones_, builds_, last_build_seconds_};
}

std::size_t ApproximateIndex::memory_bytes() const {
  std::shared_lock lock(mutex_);
  const std::size_t n = label_of_row_.size(), dimension = root_weights_.size();
  std::size_t bytes = fresh_.memory_bytes() + n * sizeof(std::int64_t) + n * dimension * sizeof(float);
  // HNSW: about 2·M neighbour ids per vector on level 0 and a few more above (FAISS layout).
  if (kind_ == IndexKind::graph) {
    bytes += n * (2 * settings_.graph_neighbours + 4) * sizeof(std::int32_t) + uncompared_of_row_.size() * sizeof(float);
  }
  if (kind_ == IndexKind::partitioned) bytes += n * sizeof(std::int64_t) + partitions_ * dimension * sizeof(float);
  return bytes;
}

}  // namespace waymark
