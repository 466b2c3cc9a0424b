// The API without a socket: the OpenAPI document and the route table agree, and access rules,
// routing errors and not-ready answers come out as documented. (tests/server/server_test.py
// drives the real server over HTTP.)
#include <catch2/catch.hpp>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <set>
#include <sstream>

#include "server/api.h"
#include "server/request_json.h"
#include "sketch/landmarks/landmark_set.h"
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

// Bulk lines are read without a JSON document when they have the plain form
// (read_plain_bulk_line); every line it reads must come out exactly as the general reading
// (parse, then the id, geometry and metadata fields) gives it, and every other line is left
// to the general reading. Seeded lines in the plain form and in the forms around it.
TEST_CASE("PlainBulkLinesReadAsTheGeneralReadingDoes") {
  SeededRandom random(77);
  const ShapeLimits limits;
  static const char* kIds[] = {R"("part-1")", R"("a b")", R"("")", R"("caf\u00e9")", R"("tab\there")", R"(17)",
                               R"("x\"y")", "\"\xc3\xa9t\xc3\xa9\""};
  static const char* kGeometries[] = {
      R"({"type":"LineString","coordinates":[[0,0],[1,-0],[2.5,1e2]]})",
      R"({ "coordinates" : [[[0,0],[4,0],[4,3],[0,0]]] , "type" : "Polygon" })",
      R"({"type":"Point","coordinates":[1,2]})",
      R"({"type":"Feature","properties":{"a":"}"},"geometry":{"type":"LineString","coordinates":[[0,0],[1,1]]}})",
      R"({"type":"LineString","coordinates":[[0,0],[1,1,1]]})",
      R"({"type":"Polygon","coordinates":[[[0,0],[4,0],[4,3]]]})",
      R"x("LINESTRING (0 0, 3 4)")x",
      R"([[0,0],[1,1]])",
      R"(null)",
      R"({"type":"LineString","coordinates":[[0,0],[1e400,1]]})"};
  static const char* kMetadata[] = {R"({})", R"({"b":2,"a":[1,{"c":"]}"}]})", R"({"name":"\u00e9\"q"})", R"(null)",
                                    R"([1])", R"({"x":1e400})", R"({"a":1,"a":2})"};
  std::size_t plain_lines = 0, general_only = 0;
  for (int t = 0; t < 3000; ++t) {
    std::vector<std::string> members;
    if (random.below(20)) members.push_back(std::string("\"id\":") + kIds[random.below(random.below(2) ? 2 : std::size(kIds))]);
    if (random.below(20)) {
      members.push_back(std::string("\"geometry\": ") +
                        kGeometries[random.below(random.below(2) ? 3 : std::size(kGeometries))]);
    }
    if (random.below(2)) {
      members.push_back(std::string("\"metadata\" :") +
                        kMetadata[random.below(random.below(2) ? 3 : std::size(kMetadata))]);
    }
    if (random.below(30) == 0) members.push_back("\"extra\":1");
    if (random.below(30) == 0 && !members.empty()) members.push_back(members.front());  // a member twice
    for (std::size_t i = members.size(); i > 1; --i) std::swap(members[i - 1], members[random.below(i)]);
    std::string line = random.below(4) ? "" : " ";
    line += "{";
    for (std::size_t i = 0; i < members.size(); ++i) line += (i ? (random.below(3) ? "," : " ,\t") : "") + members[i];
    line += random.below(40) ? "}" : "},";
    INFO(line);
    const std::optional<PlainBulkLine> plain = read_plain_bulk_line(line, limits);
    const Json document = Json::parse(line, nullptr, false);
    if (!plain) {
      ++general_only;
      continue;
    }
    ++plain_lines;
    REQUIRE(document.is_object());
    CHECK(check_known_fields(document, {"id", "geometry", "metadata"}).is_ok());
    Result<std::string> id = string_field(document, "id", "");
    Result<Shape> shape = shape_field(document, "geometry", limits);
    Result<std::string> metadata = metadata_field(document, "metadata");
    REQUIRE(id.is_ok());
    REQUIRE(shape.is_ok());
    REQUIRE(metadata.is_ok());
    CHECK(plain->id == *id);
    CHECK(plain->metadata == *metadata);
    REQUIRE(plain->shape == *shape);
    for (std::size_t i = 0; i < shape->parts.size(); ++i) {
      for (std::size_t j = 0; j < shape->parts[i].size(); ++j) {
        CHECK(std::signbit(plain->shape.parts[i][j].x) == std::signbit(shape->parts[i][j].x));
        CHECK(std::signbit(plain->shape.parts[i][j].y) == std::signbit(shape->parts[i][j].y));
      }
    }
  }
  INFO("plain " << plain_lines << ", left to the general reading " << general_only);
  CHECK(plain_lines > 300);
  CHECK(general_only > 300);
}
