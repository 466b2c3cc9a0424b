// The API without a socket: the OpenAPI document and the route table agree, and access rules,
// routing errors and not-ready answers come out as documented. (tests/server/server_test.py
// drives the real server over HTTP.)
#include <catch2/catch.hpp>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>

#include "server/api.h"
#include "support/collection_helpers.h"

using namespace waymark;
using namespace waymark::server;
using waymark::testing::TemporaryDirectory;
using Json = nlohmann::json;

namespace {

Json openapi() {
  std::ifstream in(WAYMARK_SOURCE_DIR "/server/openapi.json");
  std::stringstream text;
  text << in.rdbuf();
  return Json::parse(text.str());
}

std::string lower(std::string text) {
  for (char& c : text) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return text;
}

ServerConfig test_config() {
  Result<ServerConfig> config = load_config({"--write-tokens", "write-token-0123456789", "--read-tokens",
                                             "read-token-0123456789"},
                                            {});
  REQUIRE(config.is_ok());
  return *config;
}

std::string error_code(const HttpResponse& response) {
  return Json::parse(response.body).at("error").at("code").get<std::string>();
}


}  // namespace

TEST_CASE("OpenApiDocumentListsExactlyTheRoutes") {
  const Json document = openapi();
  CHECK(document.at("openapi").get<std::string>().starts_with("3.0"));
  std::set<std::pair<std::string, std::string>> documented, served;
  for (const auto& [path, item] : document.at("paths").items()) {
    for (const auto& [key, operation] : item.items()) {
      if (key == "parameters") continue;
      documented.insert({key, path});
      // Every operation documents its success reply and has a unique operationId.
      CHECK(operation.contains("operationId"));
      CHECK(operation.at("responses").size() >= 1);
    }
  }
  for (const RouteDescription& route : Api::routes()) {
    served.insert({lower(route.method), route.pattern});
    INFO(route.method << " " << route.pattern);
    const Json& operation = document.at("paths").at(route.pattern).at(lower(route.method));
    // Write routes say they need the bearer token; open and read routes do not demand it.
    const bool demands_token = operation.contains("security") && !operation.at("security").empty() &&
                               operation.at("security")[0].contains("bearer");
    CHECK(demands_token == (route.access == Access::write));
  }
  CHECK(documented == served);
}

TEST_CASE("AccessRulesAndRoutingErrors") {
  Metrics metrics;
  ServerConfig config = test_config();
  config.reads_require_token = true;
  TemporaryDirectory directory;  // before the Api: outlives the catalog it hands over
  Api api(config, metrics);
  Result<std::unique_ptr<Catalog>> catalog = Catalog::open(directory.path.string());
  REQUIRE(catalog.is_ok());

  // Not ready yet: /healthz answers, /v1 and /readyz do not.
  CHECK(api.handle({"GET", "/healthz", "", ""}).status == 200);
  const HttpResponse early = api.handle({"GET", "/v1/collections", "Bearer read-token-0123456789", ""});
  CHECK(early.status == 503);
  CHECK(error_code(early) == "not_ready");
  CHECK(api.handle({"GET", "/readyz", "", ""}).status == 503);
  api.install_catalog(std::move(*catalog));
  CHECK(api.handle({"GET", "/readyz", "", ""}).status == 200);

  const HttpResponse anonymous = api.handle({"GET", "/v1/collections", "", ""});
  CHECK(anonymous.status == 401);
  CHECK(error_code(anonymous) == "unauthenticated");
  CHECK(api.handle({"GET", "/v1/collections", "Basic read-token-0123456789", ""}).status == 401);
  CHECK(api.handle({"GET", "/v1/collections", "Bearer read-token-012345678", ""}).status == 401);  // one short
  CHECK(api.handle({"GET", "/v1/collections", "Bearer read-token-0123456789", ""}).status == 200);
  CHECK(api.handle({"GET", "/v1/collections", "Bearer write-token-0123456789", ""}).status == 200);
  const HttpResponse read_only = api.handle({"PUT", "/v1/collections/c", "Bearer read-token-0123456789", "{}"});
  CHECK(read_only.status == 403);
  CHECK(error_code(read_only) == "forbidden");
  CHECK(api.handle({"PUT", "/v1/collections/c", "Bearer write-token-0123456789", "{}"}).status == 201);

  const HttpResponse wrong_method = api.handle({"POST", "/v1/collections/c", "Bearer write-token-0123456789", ""});
  CHECK(wrong_method.status == 405);
  CHECK(error_code(wrong_method) == "method_not_allowed");
  CHECK(api.handle({"GET", "/v2/anything", "", ""}).status == 404);
  CHECK(api.handle({"GET", "/v1/collections/c/shapes/%zz", "Bearer read-token-0123456789", ""}).status == 404);
  const HttpResponse control = api.handle({"GET", "/v1/collections/c/shapes/a%0Ab", "Bearer read-token-0123456789", ""});
  CHECK(control.status == 400);
  CHECK(Json::parse(control.body)["error"]["where"] == "id");

  // Classification for the transport: patterns, queries and bulk bodies.
  CHECK(api.classify("POST", "/v1/collections/c/nearest?x=1").pattern == "/v1/collections/{name}/nearest");
  CHECK(api.classify("POST", "/v1/collections/c/nearest").is_query);
  CHECK(api.classify("POST", "/v1/collections/c/shapes").is_bulk);
  CHECK_FALSE(api.classify("PUT", "/v1/collections/c/shapes/x").is_bulk);
  CHECK(api.classify("GET", "/etc/passwd").pattern == "unmatched");
}

TEST_CASE("WritesAreRefusedWhenNoWriteTokenIsConfigured") {
  Metrics metrics;
  TemporaryDirectory directory;  // before the Api: outlives the catalog it hands over
  Api api(*load_config({}, {}), metrics);
  Result<std::unique_ptr<Catalog>> catalog = Catalog::open(directory.path.string());
  REQUIRE(catalog.is_ok());
  api.install_catalog(std::move(*catalog));
  const HttpResponse refused = api.handle({"PUT", "/v1/collections/c", "Bearer anything-at-all-here", "{}"});
  CHECK(refused.status == 403);
  CHECK(Json::parse(refused.body)["error"]["message"].get<std::string>().find("no write token") != std::string::npos);
  CHECK(api.handle({"GET", "/v1/collections", "", ""}).status == 200);  // reads open by default
}
