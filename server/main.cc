// waymarkd: the Waymark search server. Configuration: server/config.h and config/README.md.
#include <spdlog/sinks/stdout_sinks.h>
#include <spdlog/spdlog.h>

#include <chrono>
#include <csignal>
#include <cstdio>
#include <cstdlib>
#include <thread>

#include "index/collection.h"
#include "server/api.h"
#include "server/http_server.h"

extern char** environ;

namespace {

using namespace waymark;
using namespace waymark::server;

void print_help() {
  std::printf(
      "usage: waymarkd [--config FILE] [--FIELD VALUE ...]\n"
      "Every configuration field can be set in the JSON file, as WAYMARK_FIELD in the environment, or as\n"
      "--field on the command line (later wins). Fields and defaults (config/README.md explains each):\n%s",
      default_config_json().c_str());
}

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::string> arguments(argv + 1, argv + argc);
  for (const std::string& argument : arguments) {
    if (argument == "--help" || argument == "-h") {
      print_help();
      return 0;
    }
  }
  std::map<std::string, std::string> environment;
  for (char** variable = environ; *variable; ++variable) {
    const std::string entry = *variable;
    if (const std::size_t equals = entry.find('='); entry.starts_with("WAYMARK_") && equals != std::string::npos) {
      environment[entry.substr(0, equals)] = entry.substr(equals + 1);
    }
  }
  Result<ServerConfig> config = load_config(arguments, environment);
  if (!config) {
    std::fprintf(stderr, "waymarkd: %s\n", config.status().to_string().c_str());
    return 2;
  }
  // libgomp (FAISS) spin-waits by default, stealing the worker threads' cores (shared/deps.md).
  setenv("OMP_WAIT_POLICY", "PASSIVE", 0);

  auto logger = spdlog::stdout_logger_mt("waymarkd");
  spdlog::set_default_logger(logger);
  spdlog::set_pattern("%Y-%m-%dT%H:%M:%S.%eZ %l %v", spdlog::pattern_time_type::utc);
  spdlog::set_level(spdlog::level::from_str(config->log_level));
  spdlog::flush_on(spdlog::level::info);

  Metrics metrics;
  Api api(*config, metrics);
  HttpServer server(*config, api, metrics);
  if (Status s = server.listen(); !s.is_ok()) {
    spdlog::error("startup failed: {}", s.to_string());
    return 1;
  }
  spdlog::info("waymarkd starting: data_directory={} io_threads={} worker_threads={} tls={} reads_require_token={} "
               "read_tokens={} write_tokens={}",
               config->data_directory, config->io_threads, config->worker_threads, server.uses_tls(),
               config->reads_require_token, config->read_tokens.size(), config->write_tokens.size());
  if (config->write_tokens.empty()) spdlog::warn("no write token is configured: every write is refused (403)");
  std::printf("waymarkd: listening on %s://%s:%u\n", server.uses_tls() ? "https" : "http",
              config->listen_address.c_str(), server.port());
  std::fflush(stdout);

  // Stores open while /healthz already answers; /readyz and /v1 say 503 until they are open.
  int exit_code = 0;
  std::thread opener;
  server.run([&] {
    opener = std::thread([&] {
      const auto start = std::chrono::steady_clock::now();
      ApproximateIndexSettings approximate;
      approximate.minimum_size = config->approximate_index_minimum_size;
      approximate.rebuild_fraction = static_cast<double>(config->approximate_index_rebuild_percent) / 100;
      set_shared_block_cache_capacity(config->block_cache_bytes);
      set_resident_copy_capacity(config->resident_copy_bytes);
      Result<std::unique_ptr<Catalog>> catalog = Catalog::open(config->data_directory, approximate);
      if (!catalog) {
        spdlog::critical("cannot open the data directory '{}': {}", config->data_directory,
                         catalog.status().to_string());
        exit_code = 1;
        std::raise(SIGTERM);  // stop serving: nothing could ever become ready
        return;
      }
      std::size_t shapes = 0;
      const auto collections = (*catalog)->list();
      for (const auto& [name, collection] : collections) {
        shapes += collection->size();
        const CollectionSettings settings = collection->settings();
        if (settings.index_kind == IndexKind::exhaustive) continue;
        const ApproximateIndexStatus approximate = collection->statistics().approximate;
        // A snapshot that could not be used is worth a warning: the rebuild can take minutes.
        const auto level = approximate.snapshot.starts_with("rebuilding") ? spdlog::level::warn : spdlog::level::info;
        spdlog::log(level, "collection {}: {} index: snapshot {}; {} fresh, {} tombstones", name,
                    index_kind_name(settings.index_kind), approximate.snapshot, approximate.fresh, approximate.tombstones);
      }
      const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - start).count();
      spdlog::info("ready: {} collections, {} shapes, opened in {:.2f} s", collections.size(), shapes, seconds);
      api.install_catalog(std::move(*catalog));
    });
  });
  if (opener.joinable()) opener.join();
  spdlog::info("stopped");
  return exit_code;
}
