#include "server/metrics.h"

#include <unistd.h>

#include <fstream>
#include <sstream>

namespace waymark::server {
namespace {

// Label values escaped as the exposition format requires (backslash, quote, newline).
std::string label(const std::string& value) {
  std::string out;
  for (char c : value) {
    if (c == '\\' || c == '"') out += '\\';
    if (c == '\n') {
      out += "\\n";
      continue;
    }
    out += c;
  }
  return out;
}

void header(std::ostringstream& out, const char* name, const char* type, const char* help) {
  out << "# HELP " << name << ' ' << help << "\n# TYPE " << name << ' ' << type << '\n';
}

}  // namespace

void Metrics::record_request(const std::string& method, const std::string& route, int status, double seconds) {
  std::lock_guard lock(mutex_);
  ++requests_[{method, route, status}];
  Histogram& histogram = latency_[route];
  std::size_t bucket = 0;
  while (bucket < kBucketBounds.size() && seconds > kBucketBounds[bucket]) ++bucket;
  if (bucket < kBucketBounds.size()) ++histogram.buckets[bucket];
  ++histogram.count;
  histogram.sum += seconds;
}

void Metrics::record_ingest(std::size_t accepted, std::size_t rejected) {
  std::lock_guard lock(mutex_);
  ingest_accepted_ += accepted;
  ingest_rejected_ += rejected;
}

void Metrics::record_query(const QueryCounts& counts) {
  std::lock_guard lock(mutex_);
  ++queries_;
  if (counts.certified) ++queries_certified_;
  candidates_ += counts.candidates;
  pruned_ += counts.pruned;
  exact_evaluations_ += counts.exact_evaluations;
}

void Metrics::set_queries_waiting(std::size_t count) {
  std::lock_guard lock(mutex_);
  queries_waiting_ = count;
}

std::size_t resident_memory_bytes() {
  std::ifstream statm("/proc/self/statm");
  std::size_t total_pages = 0, resident_pages = 0;
  if (!(statm >> total_pages >> resident_pages)) return 0;
  return resident_pages * static_cast<std::size_t>(::sysconf(_SC_PAGESIZE));
}

std::string Metrics::exposition(const std::vector<CollectionGauges>& collections, const ProcessGauges& process) const {
  std::lock_guard lock(mutex_);
  std::ostringstream out;
  out.precision(10);
  header(out, "waymark_http_requests_total", "counter", "HTTP requests by method, route pattern and status.");
  for (const auto& [key, count] : requests_) {
    const auto& [method, route, status] = key;
    out << "waymark_http_requests_total{method=\"" << label(method) << "\",route=\"" << label(route)
        << "\",status=\"" << status << "\"} " << count << '\n';
  }
  header(out, "waymark_http_request_duration_seconds", "histogram", "Time from a whole request read to its reply.");
  for (const auto& [route, histogram] : latency_) {
    std::uint64_t cumulative = 0;
    for (std::size_t b = 0; b < kBucketBounds.size(); ++b) {
      cumulative += histogram.buckets[b];
      out << "waymark_http_request_duration_seconds_bucket{route=\"" << label(route) << "\",le=\"" << kBucketBounds[b]
          << "\"} " << cumulative << '\n';
    }
    out << "waymark_http_request_duration_seconds_bucket{route=\"" << label(route) << "\",le=\"+Inf\"} "
        << histogram.count << '\n';
    out << "waymark_http_request_duration_seconds_sum{route=\"" << label(route) << "\"} " << histogram.sum << '\n';
    out << "waymark_http_request_duration_seconds_count{route=\"" << label(route) << "\"} " << histogram.count << '\n';
  }
  header(out, "waymark_ingest_shapes_total", "counter", "Shapes offered to bulk ingest, by outcome.");
  out << "waymark_ingest_shapes_total{outcome=\"accepted\"} " << ingest_accepted_ << '\n';
  out << "waymark_ingest_shapes_total{outcome=\"rejected\"} " << ingest_rejected_ << '\n';
  auto single = [&](const char* name, const char* type, const char* help, std::uint64_t value) {
    header(out, name, type, help);
    out << name << ' ' << value << '\n';
  };
  single("waymark_queries_total", "counter", "kNN and range queries answered.", queries_);
  single("waymark_queries_certified_total", "counter", "Queries whose answer was certified exact or complete.",
         queries_certified_);
  single("waymark_query_candidates_total", "counter", "Candidates drawn from vector indexes.", candidates_);
  single("waymark_query_pruned_total", "counter", "Candidates ruled out by a lower bound or the decision procedure.",
         pruned_);
  single("waymark_query_exact_evaluations_total", "counter", "Exact distance computations.", exact_evaluations_);
  single("waymark_queries_waiting", "gauge", "Queries queued or running on the worker pool.", queries_waiting_);
  auto per_collection = [&](const char* name, const char* help, std::size_t CollectionGauges::*field) {
    header(out, name, "gauge", help);
    for (const CollectionGauges& c : collections) {
      out << name << "{collection=\"" << label(c.name) << "\"} " << c.*field << '\n';
    }
  };
  per_collection("waymark_collection_shapes", "Shapes stored, by collection.", &CollectionGauges::shapes);
  per_collection("waymark_collection_index_bytes", "Memory of the vector index and id maps, by collection.",
                 &CollectionGauges::index_bytes);
  per_collection("waymark_collection_resident_copy_bytes", "Float copies of the stored shapes, in memory, by collection.",
                 &CollectionGauges::resident_copy_bytes);
  per_collection("waymark_collection_store_bytes", "Store files and memtables, by collection.",
                 &CollectionGauges::store_bytes);
  per_collection("waymark_collection_memtable_bytes", "Store writes not yet flushed to files, in memory, by collection.",
                 &CollectionGauges::memtable_bytes);
  per_collection("waymark_collection_table_reader_bytes", "Store file indexes and filters in memory, by collection.",
                 &CollectionGauges::table_reader_bytes);
  single("process_resident_memory_bytes", "gauge", "Resident memory of waymarkd.", process.resident_bytes);
  single("waymark_block_cache_bytes", "gauge", "Store blocks held by the block cache all collections share.",
         process.block_cache_bytes);
  single("waymark_block_cache_capacity_bytes", "gauge", "Capacity of the shared block cache.",
         process.block_cache_capacity_bytes);
  single("waymark_resident_copy_bytes", "gauge",
         "Float copies of stored shapes that queries refuse candidates on without a store read.",
         process.resident_copy_bytes);
  single("waymark_resident_copy_capacity_bytes", "gauge", "Capacity of the float copies (resident_copy_bytes).",
         process.resident_copy_capacity_bytes);
  return out.str();
}

}  // namespace waymark::server
