// Counters and latency histograms for /metrics, in the Prometheus text exposition format
// (version 0.0.4: "# HELP", "# TYPE", then one sample per line).
// Thread safety: every member may be called concurrently (one mutex; a request takes it once).
#pragma once

#include <array>
#include <cstdint>
#include <map>
#include <mutex>
#include <string>
#include <tuple>
#include <vector>

namespace waymark::server {

struct CollectionGauges {
  std::string name;
  std::size_t shapes = 0;
  std::size_t index_bytes = 0;
  std::size_t resident_copy_bytes = 0;
  std::size_t store_bytes = 0;
  std::size_t memtable_bytes = 0;
  std::size_t table_reader_bytes = 0;
};

// Resident memory of this process (Linux /proc/self/statm); 0 where unavailable.
std::size_t resident_memory_bytes();

// Process-wide memory figures for /metrics: what the soak and operators watch for growth.
struct ProcessGauges {
  std::size_t resident_bytes = 0;            // from /proc/self/statm; 0 where unavailable
  std::size_t block_cache_bytes = 0;         // the store's shared block cache
  std::size_t block_cache_capacity_bytes = 0;
  std::size_t resident_copy_bytes = 0;  // float copies of stored shapes, every collection
  std::size_t resident_copy_capacity_bytes = 0;
};

struct QueryCounts {
  std::size_t candidates = 0;
  std::size_t pruned = 0;  // by any bound or the decision procedure
  std::size_t exact_evaluations = 0;
  bool certified = false;
};

class Metrics {
 public:
  // `route` is the route's pattern ("/v1/collections/{name}"), never the raw path, so the
  // number of series stays bounded.
  void record_request(const std::string& method, const std::string& route, int status, double seconds);
  void record_ingest(std::size_t accepted, std::size_t rejected);
  void record_query(const QueryCounts& counts);
  void set_queries_waiting(std::size_t count);

  std::string exposition(const std::vector<CollectionGauges>& collections, const ProcessGauges& process) const;

  static constexpr std::array<double, 14> kBucketBounds = {0.0005, 0.001, 0.0025, 0.005, 0.01, 0.025, 0.05,
                                                          0.1,    0.25,  0.5,    1,     2.5,   5,    10};

 private:
  struct Histogram {
    std::array<std::uint64_t, kBucketBounds.size()> buckets{};  // not cumulative; summed on output
    std::uint64_t count = 0;
    double sum = 0;
  };
  mutable std::mutex mutex_;
  std::map<std::tuple<std::string, std::string, int>, std::uint64_t> requests_;  // method, route, status
  std::map<std::string, Histogram> latency_;                                     // route
  std::uint64_t ingest_accepted_ = 0, ingest_rejected_ = 0;
  std::uint64_t queries_ = 0, queries_certified_ = 0, candidates_ = 0, pruned_ = 0, exact_evaluations_ = 0;
  std::size_t queries_waiting_ = 0;
};

}  // namespace waymark::server
