// Fuzz target: request bodies as the API sees them — bulk NDJSON lines, collection settings,
// kNN and range queries, distance requests — against a real catalog in a temporary folder.
// The first byte picks the route; the rest is the body. Every reply must be JSON, and no input
// may produce a 5xx other than the documented 503/507 (a 500 is a bug).
#include <unistd.h>

#include <cstdint>
#include <cstdlib>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <string>

#include "server/api.h"

namespace {

constexpr const char* kToken = "fuzz-write-token-0123456789";

// The catalog's folder, removed when the process exits (each fuzzing or replay process makes its
// own; left behind, every ctest run added one to the temporary folder).
struct TemporaryCatalogFolder {
  std::filesystem::path path =
      std::filesystem::temp_directory_path() / ("waymark-request-fuzz-" + std::to_string(::getpid()));
  ~TemporaryCatalogFolder() {
    std::error_code ignored;
    std::filesystem::remove_all(path, ignored);
  }
};

waymark::server::Api& api() {
  static waymark::server::Metrics metrics;
  static const TemporaryCatalogFolder folder;
  static waymark::server::Api* instance = [] {
    const std::filesystem::path& directory = folder.path;
    std::filesystem::remove_all(directory);
    waymark::server::ServerConfig config;
    config.data_directory = directory.string();
    config.write_tokens = {kToken};
    auto* created = new waymark::server::Api(config, metrics);
    auto catalog = waymark::Catalog::open(directory.string());
    if (!catalog) std::abort();
    created->install_catalog(std::move(*catalog));
    waymark::server::HttpRequest make{"PUT", "/v1/collections/fuzz", std::string("Bearer ") + kToken,
                                      R"({"frame": "unit", "landmarks": {"count": 16}})"};
    if (created->handle(make).status != 201) std::abort();
    return created;
  }();
  return *instance;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  static const char* const kRoutes[][2] = {
      {"POST", "/v1/collections/fuzz/shapes"},  {"POST", "/v1/collections/fuzz/nearest"},
      {"POST", "/v1/collections/fuzz/within"},  {"POST", "/v1/distance"},
      {"PUT", "/v1/collections/other"},         {"PUT", "/v1/collections/fuzz/shapes/one"},
      {"POST", "/v1/collections/fuzz/refit"},
  };
  const auto& route = kRoutes[data[0] % (sizeof kRoutes / sizeof kRoutes[0])];
  waymark::server::HttpRequest request{route[0], route[1], std::string("Bearer ") + kToken,
                                       std::string(reinterpret_cast<const char*>(data) + 1, size - 1)};
  const waymark::server::HttpResponse response = api().handle(request);
  if (response.status == 500 || nlohmann::json::parse(response.body, nullptr, false).is_discarded()) std::abort();
  if (response.status == 201 && request.target == "/v1/collections/other") {
    waymark::server::HttpRequest drop{"DELETE", "/v1/collections/other", request.authorization, ""};
    if (api().handle(drop).status != 200) std::abort();
  }
  return 0;
}
