// waymarkd's configuration: defaults, then a JSON file, then environment variables, then
// command-line flags, each overriding the one before.
//
// Every field has one name used in all three places: "max_body_bytes" in the file,
// WAYMARK_MAX_BODY_BYTES in the environment, --max-body-bytes (or --max-body-bytes=VALUE) on
// the command line. Lists (tokens) are comma-separated in the environment and on the command
// line. config/waymarkd.json holds the defaults, and config/README.md documents each field; a
// test keeps both equal to default_config_json().
//
// Errors name the source and the field: "environment WAYMARK_PORT: expected an integer",
// "config/waymarkd.json: unknown field 'prot'". Tokens are never echoed in errors or logs.
#pragma once

#include <cstdint>
#include <map>
#include <string>
#include <vector>

#include "sketch/status.h"

namespace waymark::server {

struct ServerConfig {
  std::string data_directory;
  std::string listen_address;
  std::uint16_t port = 0;  // 0: an ephemeral port, printed at startup
  std::size_t io_threads = 1;
  std::size_t worker_threads = 2;

  std::size_t max_body_bytes = 0;       // any request but bulk ingest
  std::size_t max_bulk_body_bytes = 0;  // POST .../shapes (NDJSON)
  // Writes are refused (507) while the data directory's file system has less free space than
  // this; 0 turns the check off. RocksDB is not safe to drive into ENOSPC (see README Security).
  std::uint64_t min_free_disk_bytes = 0;
  // Capacity of the store's block cache, shared by every collection: the bound on the memory
  // that query reads keep (index and id maps come on top, in proportion to the shapes stored).
  std::size_t block_cache_bytes = 0;
  std::size_t resident_copy_bytes = 0;
  std::size_t bulk_batch_size = 0;      // shapes per durable batch during bulk ingest
  std::size_t max_vertices = 0;         // per shape, for new collections and for queries
  std::size_t max_k = 0;
  std::size_t max_candidates = 0;
  std::size_t max_range_results = 0;
  std::size_t max_concurrent_queries = 0;  // queued or running; past it, 429
  std::size_t read_timeout_ms = 0;         // to receive one whole request
  std::size_t write_timeout_ms = 0;        // to send one whole reply
  std::size_t idle_timeout_ms = 0;         // a kept-alive connection with no request
  std::size_t shutdown_timeout_ms = 0;     // SIGTERM: how long in-flight requests may take
  std::size_t slow_query_ms = 0;           // queries slower than this get a log line
  std::size_t approximate_index_minimum_size = 0;    // graph/partitioned: build from this many shapes
  std::size_t approximate_index_rebuild_percent = 0; // rebuild when changes pass this % of the built size

  std::vector<std::string> read_tokens;
  std::vector<std::string> write_tokens;  // also allowed to read
  bool reads_require_token = false;

  std::string tls_certificate_file;  // both set: HTTPS only; both empty: plain HTTP
  std::string tls_private_key_file;

  std::string log_level;  // trace, debug, info, warn, error
};

// The defaults as the JSON object a config file holds.
std::string default_config_json();

// `arguments` excludes the program name. `environment` maps variable names to values (only
// WAYMARK_* are read). "--config PATH" (or WAYMARK_CONFIG) names the file; without one only
// defaults, environment and flags apply. "--help" is not handled here.
Result<ServerConfig> load_config(const std::vector<std::string>& arguments,
                                 const std::map<std::string, std::string>& environment);

// "--data-directory" for "data_directory"; "WAYMARK_DATA_DIRECTORY" likewise.
std::string flag_name(const std::string& field);
std::string environment_name(const std::string& field);

}  // namespace waymark::server
