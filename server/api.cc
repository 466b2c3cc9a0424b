#include "server/api.h"

#include <spdlog/spdlog.h>
#include <sys/statvfs.h>

#include <chrono>
#include <cmath>
#include <ctime>
#include <map>

#include "server/request_json.h"
#include "server/web_assets.h"
#include "sketch/distance/frechet.h"
#include "sketch/distance/hausdorff.h"
#include "sketch/geometry/formats.h"
#include "sketch/own_thread.h"

namespace waymark::server {

struct Api::Context {
  const RouteDescription* route = nullptr;
  std::map<std::string, std::string> parameters;  // {name}, {id}: percent-decoded
  std::map<std::string, std::string> query;       // ?key=value, percent-decoded
  Catalog* catalog = nullptr;
};

namespace {

using Clock = std::chrono::steady_clock;

const std::vector<RouteDescription> kRoutes = {
    {"GET", "/healthz", Access::open, false, false},
    {"GET", "/readyz", Access::open, false, false},
    {"GET", "/", Access::open, false, false},
    {"GET", "/ui/{file}", Access::open, false, false},
    {"GET", "/metrics", Access::read, false, false},
    {"GET", "/v1/collections", Access::read, false, false},
    {"PUT", "/v1/collections/{name}", Access::write, false, false},
    {"GET", "/v1/collections/{name}", Access::read, false, false},
    {"DELETE", "/v1/collections/{name}", Access::write, false, false},
    {"GET", "/v1/collections/{name}/shapes", Access::read, false, false},
    {"POST", "/v1/collections/{name}/shapes", Access::write, false, true},
    {"PUT", "/v1/collections/{name}/shapes/{id}", Access::write, false, false},
    {"GET", "/v1/collections/{name}/shapes/{id}", Access::read, false, false},
    {"DELETE", "/v1/collections/{name}/shapes/{id}", Access::write, false, false},
    {"POST", "/v1/collections/{name}/nearest", Access::read, true, false},
    {"POST", "/v1/collections/{name}/within", Access::read, true, false},
    {"POST", "/v1/distance", Access::read, true, false},
    {"POST", "/v1/collections/{name}/refit", Access::write, false, false},
    {"GET", "/v1/jobs", Access::read, false, false},
    {"GET", "/v1/jobs/{id}", Access::read, false, false},
    {"DELETE", "/v1/jobs/{id}", Access::write, false, false},
};

std::string dump(const Json& json) { return json.dump(-1, ' ', false, Json::error_handler_t::replace); }

HttpResponse json_response(int status, const Json& body) {
  HttpResponse response;
  response.status = status;
  response.body = dump(body) + "\n";
  return response;
}

std::pair<int, const char*> http_status_of(StatusCode code) {
  switch (code) {
    case StatusCode::invalid_argument: return {400, "invalid_argument"};
    case StatusCode::not_applicable: return {422, "not_applicable"};
    case StatusCode::not_found: return {404, "not_found"};
    case StatusCode::already_exists: return {409, "already_exists"};
    case StatusCode::resource_exhausted: return {413, "too_large"};
    case StatusCode::storage_full: return {507, "storage_full"};
    case StatusCode::failed_precondition: return {409, "failed_precondition"};
    case StatusCode::data_loss: return {500, "data_loss"};
    case StatusCode::io_error: return {500, "io_error"};
    default: return {500, "internal"};
  }
}

// Refuses writes while the data directory's file system has less than min_free_disk_bytes free:
// RocksDB as Debian builds it aborts when a write meets a full disk, so the server stops short.
Status check_free_space(const ServerConfig& config) {
  if (config.min_free_disk_bytes == 0) return Status::ok();
  struct statvfs info {};
  if (::statvfs(config.data_directory.c_str(), &info) != 0) return Status::ok();  // unknown: the store reports
  const std::uint64_t free_bytes = static_cast<std::uint64_t>(info.f_bavail) * info.f_frsize;
  if (free_bytes >= config.min_free_disk_bytes) return Status::ok();
  spdlog::warn("write refused: {} bytes free on the data directory's disk, min_free_disk_bytes is {}", free_bytes,
               config.min_free_disk_bytes);
  return Status(StatusCode::storage_full,
                "the data directory's disk has " + std::to_string(free_bytes) + " bytes free, less than min_free_disk_bytes (" +
                    std::to_string(config.min_free_disk_bytes) + "); writes are refused until space is freed, reads and "
                    "deletions go on",
                "disk");
}

HttpResponse from_status(const Status& status) {
  const auto [http, code] = http_status_of(status.code());
  if (http >= 500) spdlog::error("request failed: {} ({})", status.message(), status_code_name(status.code()));
  return Api::error_response(http, code, status.message(), status.where());
}

// --- paths ----------------------------------------------------------------------------------

int hex_value(char c) {
  if (c >= '0' && c <= '9') return c - '0';
  if (c >= 'a' && c <= 'f') return c - 'a' + 10;
  if (c >= 'A' && c <= 'F') return c - 'A' + 10;
  return -1;
}

Result<std::string> percent_decode(std::string_view text, bool plus_is_space) {
  std::string out;
  for (std::size_t i = 0; i < text.size(); ++i) {
    if (text[i] == '%') {
      const int high = i + 1 < text.size() ? hex_value(text[i + 1]) : -1;
      const int low = i + 2 < text.size() ? hex_value(text[i + 2]) : -1;
      if (high < 0 || low < 0) return invalid_argument("bad percent escape", "path");
      out += static_cast<char>(high * 16 + low);
      i += 2;
    } else if (plus_is_space && text[i] == '+') {
      out += ' ';
    } else {
      out += text[i];
    }
  }
  return out;
}

bool valid_utf8(std::string_view text) {
  for (std::size_t i = 0; i < text.size();) {
    const unsigned char c = static_cast<unsigned char>(text[i]);
    const std::size_t length = c < 0x80 ? 1 : (c >> 5) == 0x6 ? 2 : (c >> 4) == 0xE ? 3 : (c >> 3) == 0x1E ? 4 : 0;
    if (length == 0 || i + length > text.size()) return false;
    for (std::size_t k = 1; k < length; ++k) {
      if ((static_cast<unsigned char>(text[i + k]) >> 6) != 0x2) return false;
    }
    i += length;
  }
  return true;
}

// Shape ids are the caller's keys: any UTF-8 text without control characters.
Status check_shape_id(const std::string& id, const std::string& where) {
  if (id.empty()) return invalid_argument("a shape id must not be empty", where);
  for (unsigned char c : id) {
    if (c < 0x20 || c == 0x7f) return invalid_argument("a shape id must not contain control characters", where);
  }
  if (!valid_utf8(id)) return invalid_argument("a shape id must be UTF-8 text", where);
  return Status::ok();
}

std::vector<std::string_view> split(std::string_view text, char separator) {
  std::vector<std::string_view> parts;
  std::size_t start = 0;
  while (true) {
    const std::size_t end = text.find(separator, start);
    parts.push_back(text.substr(start, end == std::string_view::npos ? std::string_view::npos : end - start));
    if (end == std::string_view::npos) return parts;
    start = end + 1;
  }
}

// Matches a raw (still encoded) path against a pattern; fills the parameters on success.
bool match(std::string_view pattern, std::string_view path, std::map<std::string, std::string>& parameters) {
  const auto pattern_parts = split(pattern, '/');
  const auto path_parts = split(path, '/');
  if (pattern_parts.size() != path_parts.size()) return false;
  std::map<std::string, std::string> found;
  for (std::size_t i = 0; i < pattern_parts.size(); ++i) {
    const std::string_view want = pattern_parts[i];
    if (want.starts_with('{')) {
      if (path_parts[i].empty()) return false;
      Result<std::string> decoded = percent_decode(path_parts[i], false);
      if (!decoded) return false;
      found[std::string(want.substr(1, want.size() - 2))] = *decoded;
    } else if (want != path_parts[i]) {
      return false;
    }
  }
  parameters = std::move(found);
  return true;
}

// --- access ---------------------------------------------------------------------------------

// Compares in time that depends on the lengths only, never on where the bytes differ.
bool token_in(const std::string& presented, const std::vector<std::string>& tokens) {
  bool found = false;
  for (const std::string& token : tokens) {
    unsigned difference = presented.size() == token.size() ? 0 : 1;
    const std::size_t length = std::max(presented.size(), token.size());
    for (std::size_t i = 0; i < length; ++i) {
      const unsigned char a = i < presented.size() ? presented[i] : 0;
      const unsigned char b = i < token.size() ? token[i] : 0;
      difference |= a ^ b;
    }
    found |= difference == 0;
  }
  return found;
}

std::optional<HttpResponse> check_access(const HttpRequest& request, Access access, const ServerConfig& config) {
  if (access == Access::open || (access == Access::read && !config.reads_require_token)) return std::nullopt;
  auto unauthenticated = [](const std::string& message) {
    HttpResponse response = Api::error_response(401, "unauthenticated", message, "Authorization");
    response.headers.emplace_back("WWW-Authenticate", "Bearer realm=\"waymark\"");
    return response;
  };
  if (access == Access::write && config.write_tokens.empty()) {
    return Api::error_response(403, "forbidden", "writes are disabled: no write token is configured (write_tokens)",
                               "Authorization");
  }
  constexpr std::string_view kScheme = "Bearer ";
  if (request.authorization.empty()) return unauthenticated("this route needs a bearer token");
  if (!request.authorization.starts_with(kScheme)) {
    return unauthenticated("the Authorization header must be \"Bearer <token>\"");
  }
  const std::string token = request.authorization.substr(kScheme.size());
  const bool writes = token_in(token, config.write_tokens);
  const bool reads = writes || token_in(token, config.read_tokens);
  if (!reads) return unauthenticated("the token is not valid");
  if (access == Access::write && !writes) return Api::error_response(403, "forbidden", "this token may only read", "Authorization");
  return std::nullopt;
}

// --- collections ----------------------------------------------------------------------------

// null for exhaustive collections.
Json approximate_json(IndexKind kind, const ApproximateIndexStatus& status) {
  if (kind == IndexKind::exhaustive) return nullptr;
  return {{"built", status.built},
          {"snapshot", status.snapshot},
          {"built_size", status.built_size},
          {"fresh", status.fresh},
          {"tombstones", status.tombstones},
          {"builds", status.builds},
          {"last_build_seconds", status.last_build_seconds}};
}

Json describe(const std::string& name, const Collection& collection) {
  const CollectionSettings& settings = collection.settings();
  const CollectionStatistics statistics = collection.statistics();
  const Box& domain = settings.landmarks.domain;
  char checksum[20];
  std::snprintf(checksum, sizeof checksum, "%016llx", static_cast<unsigned long long>(settings.landmarks.checksum()));
  return {{"name", name},
          {"frame", frame_name(settings.frame)},
          {"index", index_kind_name(settings.index_kind)},
          {"default_metric", metric_name(settings.default_metric)},
          {"landmarks",
           {{"layout", landmark_layout_name(settings.landmarks.layout)},
            {"count", settings.landmarks.size()},
            {"generation", settings.landmarks.generation},
            {"checksum", checksum},
            {"domain", {domain.min_x, domain.min_y, domain.max_x, domain.max_y}}}},
          {"limits",
           {{"max_vertices", settings.limits.max_vertices},
            {"max_parts", settings.limits.max_parts},
            {"max_id_bytes", settings.max_id_bytes},
            {"max_metadata_bytes", settings.max_metadata_bytes}}},
          {"stats",
           {{"shapes", statistics.shape_count},
            {"index_bytes", statistics.index_bytes},
            {"resident_copy_bytes", statistics.resident_copy_bytes},
            {"making_resident_copies", statistics.making_resident_copies},
            {"store_bytes", statistics.store_bytes},
            {"last_write", statistics.last_write_unix_ms == 0 ? Json(nullptr) : Json(iso_time(statistics.last_write_unix_ms))},
            {"approximate_index", approximate_json(settings.index_kind, statistics.approximate)}}}};
}

Result<CollectionSettings> settings_from(const Json& body, const ServerConfig& config) {
  if (Status s = check_known_fields(body, {"frame", "landmarks", "index", "default_metric", "max_vertices", "max_parts",
                                           "max_id_bytes", "max_metadata_bytes"});
      !s.is_ok()) {
    return s;
  }
  CollectionSettings settings;
  Result<std::string> frame = string_field(body, "frame", "unit");
  if (!frame) return frame.status();
  Result<Frame> parsed_frame = parse_frame(*frame);
  if (!parsed_frame) return invalid_argument(parsed_frame.status().message(), "frame");
  settings.frame = *parsed_frame;

  Result<std::string> index = string_field(body, "index", "exhaustive");
  if (!index) return index.status();
  Result<IndexKind> kind = parse_index_kind(*index);
  if (!kind) return kind.status();
  settings.index_kind = *kind;

  Result<std::string> metric = string_field(body, "default_metric", "hausdorff");
  if (!metric) return metric.status();
  Result<Metric> parsed_metric = parse_metric(*metric);
  if (!parsed_metric) return invalid_argument(parsed_metric.status().message(), "default_metric");
  settings.default_metric = *parsed_metric;

  Result<std::size_t> max_vertices = size_field(body, "max_vertices", config.max_vertices, 2, config.max_vertices);
  Result<std::size_t> max_parts = size_field(body, "max_parts", settings.limits.max_parts, 1, 1'000'000);
  Result<std::size_t> max_id_bytes = size_field(body, "max_id_bytes", settings.max_id_bytes, 1, 4096);
  Result<std::size_t> max_metadata_bytes =
      size_field(body, "max_metadata_bytes", settings.max_metadata_bytes, 2, 1024 * 1024);
  for (const Result<std::size_t>* field : {&max_vertices, &max_parts, &max_id_bytes, &max_metadata_bytes}) {
    if (!*field) return field->status();
  }
  settings.limits.max_vertices = *max_vertices;
  settings.limits.max_parts = *max_parts;
  settings.max_id_bytes = *max_id_bytes;
  settings.max_metadata_bytes = *max_metadata_bytes;

  const Json landmarks = body.value("landmarks", Json::object());
  if (!landmarks.is_object()) return invalid_argument("landmarks must be an object", "landmarks");
  if (Status s = check_known_fields(landmarks, {"layout", "count", "seed", "domain"}, "landmarks."); !s.is_ok()) return s;
  Result<std::string> layout = string_field(landmarks, "layout", "grid", "landmarks.");
  Result<std::size_t> count = size_field(landmarks, "count", 64, 1, LandmarkLimits{}.max_count, "landmarks.");
  Result<std::size_t> seed = size_field(landmarks, "seed", 1, 0, std::numeric_limits<std::size_t>::max(), "landmarks.");
  if (!layout) return layout.status();
  if (!count) return count.status();
  if (!seed) return seed.status();
  Box domain = unit_frame_domain();
  if (landmarks.contains("domain")) {
    const Json& box = landmarks.at("domain");
    if (!box.is_array() || box.size() != 4 || !std::all_of(box.begin(), box.end(), [](const Json& v) { return v.is_number(); })) {
      return invalid_argument("landmarks.domain must be [min_x, min_y, max_x, max_y]", "landmarks.domain");
    }
    domain = {box[0].get<double>(), box[1].get<double>(), box[2].get<double>(), box[3].get<double>()};
  } else if (settings.frame != Frame::unit) {
    return invalid_argument("landmarks.domain (the box the shapes lie in) is required unless the frame is unit",
                            "landmarks.domain");
  }
  Result<LandmarkSet> set = Status(StatusCode::invalid_argument, "unset");
  if (*layout == "grid") {
    set = grid_landmarks(domain, *count);
  } else if (*layout == "random") {
    set = random_landmarks(domain, *count, *seed);
  } else if (*layout == "fitted") {
    return Status(StatusCode::failed_precondition, "fitted landmarks are fitted to stored shapes: create the collection with grid or random landmarks, "
                  "store shapes, then refit it (POST /v1/collections/{name}/refit)", "landmarks.layout");
  } else {
    return invalid_argument("landmarks.layout must be grid or random", "landmarks.layout");
  }
  if (!set) return invalid_argument(set.status().message(), "landmarks");
  settings.landmarks = std::move(*set);
  return settings;
}

Result<RefitOptions> refit_options_from(const Json& body) {
  if (Status s = check_known_fields(body, {"landmark_count", "sample_size", "seed"}); !s.is_ok()) return s;
  RefitOptions options;
  Result<std::size_t> count = size_field(body, "landmark_count", 0, 0, LandmarkLimits{}.max_count);
  Result<std::size_t> sample = size_field(body, "sample_size", options.sample_size, 2, 100000);
  Result<std::size_t> seed = size_field(body, "seed", options.seed, 0, std::numeric_limits<std::size_t>::max());
  for (const Status& s : {count.status(), sample.status(), seed.status()}) {
    if (!s.is_ok()) return s;
  }
  options.landmark_count = *count;
  options.sample_size = *sample;
  options.seed = *seed;
  return options;
}

// --- the drawing-search page ---------------------------------------------------------------

HttpResponse web_asset_response(const std::string& name) {
  for (const WebAsset& asset : web_assets()) {
    if (asset.name != name) continue;
    HttpResponse response;
    response.content_type = std::string(asset.content_type);
    response.body = std::string(asset.body);
    response.headers.emplace_back("Cache-Control", "no-cache");
    response.headers.emplace_back("X-Content-Type-Options", "nosniff");
    // The page loads nothing from elsewhere and may not be framed.
    response.headers.emplace_back("Content-Security-Policy",
                                  "default-src 'self'; script-src 'self'; style-src 'self'; connect-src 'self'; "
                                  "img-src 'self' data:; frame-ancestors 'none'; base-uri 'none'; form-action 'none'");
    return response;
  }
  return Api::error_response(404, "not_found", "no page file named " + name, "path");
}

// --- queries --------------------------------------------------------------------------------

const char* guarantee_of(bool certified, Metric metric, bool range) {
  if (metric == Metric::sketch) {
    return "estimate: ranked by sketch distance, which approximates shape distance; neither the order nor the "
           "distances are exact";
  }
  if (range) {
    return certified ? "complete: every stored shape within the radius is listed, with its exact distance"
                     : "incomplete: max_results was reached; more stored shapes may be within the radius";
  }
  return certified ? "exact: no stored shape outside these results is closer (distances are exact)"
                   : "approximate: distances are exact, but the candidate budget ran out before the answer was "
                     "certified, so closer shapes may exist; use mode \"exact\" for a certified answer";
}

Json answer_json(const QueryAnswer& answer, Metric metric, bool range, double milliseconds) {
  Json results = Json::array();
  for (const QueryHit& hit : answer.hits) {
    results.push_back({{"id", hit.id},
                       {"distance", hit.distance},
                       {"sketch_distance", hit.sketch_distance},
                       {"metadata", Json::parse(hit.metadata, nullptr, false)}});
  }
  const QueryStats& s = answer.stats;
  return {{"results", results},
          {"metric", metric_name(metric)},
          {"certified", answer.certified},
          {"guarantee", guarantee_of(answer.certified, metric, range)},
          {"stats",
           {{"candidates_drawn", s.candidates_drawn},
            {"candidates_fetched", s.candidates_fetched},
            {"pruned_by_sketch_bound", s.pruned_by_sketch_bound},
            {"pruned_by_box_or_endpoint_bound", s.pruned_by_box_or_endpoint_bound},
            {"pruned_by_decision", s.pruned_by_decision},
            {"exact_evaluations", s.exact_evaluations},
            {"not_applicable", s.not_applicable},
            {"filtered_out", s.filtered_out},
            {"index_milliseconds", s.index_milliseconds},
            {"milliseconds", milliseconds}}}};
}

QueryCounts counts_of(const QueryAnswer& answer) {
  const QueryStats& s = answer.stats;
  return {s.candidates_fetched, s.pruned_by_sketch_bound + s.pruned_by_box_or_endpoint_bound + s.pruned_by_decision,
          s.exact_evaluations, answer.certified};
}

double milliseconds_since(Clock::time_point start) {
  return std::chrono::duration<double, std::milli>(Clock::now() - start).count();
}

// The query shape: either "shape" (a geometry) or "id" (a stored shape), never both.
struct QueryTarget {
  std::optional<Shape> shape;
  std::optional<std::string> id;
};

Result<QueryTarget> query_target(const Json& body, const Collection& collection) {
  const bool has_shape = body.contains("shape"), has_id = body.contains("id");
  if (has_shape == has_id) return invalid_argument("give exactly one of shape (a geometry) and id (a stored shape)", "shape");
  QueryTarget target;
  if (has_id) {
    Result<std::string> id = string_field(body, "id", "");
    if (!id) return id.status();
    target.id = *id;
    return target;
  }
  Result<Shape> shape = shape_field(body, "shape", collection.settings().limits);
  if (!shape) return shape.status();
  target.shape = std::move(*shape);
  return target;
}

Result<Metric> metric_from(const Json& body, Metric fallback) {
  Result<std::string> name = string_field(body, "metric", metric_name(fallback));
  if (!name) return name.status();
  Result<Metric> metric = parse_metric(*name);
  if (!metric) return invalid_argument(metric.status().message(), "metric");
  return metric;
}

Result<std::string> filter_from(const Json& body) {
  auto found = body.find("filter");
  if (found == body.end() || found->is_null()) return std::string();
  if (!found->is_object()) return invalid_argument("filter must be an object of metadata fields and values", "filter");
  return found->dump();
}

}  // namespace

// --- Api --------------------------------------------------------------------------------------

Api::Api(ServerConfig config, Metrics& metrics) : config_(std::move(config)), metrics_(metrics) {}
Api::~Api() = default;

void Api::install_catalog(std::unique_ptr<Catalog> catalog) {
  owned_catalog_ = std::move(catalog);
  catalog_.store(owned_catalog_.get());
}

const std::vector<RouteDescription>& Api::routes() { return kRoutes; }

HttpResponse Api::error_response(int status, const std::string& code, const std::string& message,
                                 const std::string& where) {
  return json_response(status, {{"error", {{"code", code}, {"message", message}, {"where", where}}}});
}

RouteInfo Api::classify(const std::string& method, const std::string& target) const {
  const std::string_view path = std::string_view(target).substr(0, target.find('?'));
  std::map<std::string, std::string> ignored;
  for (const RouteDescription& route : kRoutes) {
    if (route.method == method && match(route.pattern, path, ignored)) return {route.pattern, route.is_query, route.is_bulk};
  }
  return {"unmatched", false, false};
}

HttpResponse Api::handle(const HttpRequest& request) {
  Context context;
  const std::string_view target = request.target;
  const std::size_t question = target.find('?');
  const std::string_view path = target.substr(0, question);
  bool path_known = false;
  std::string allowed;
  for (const RouteDescription& route : kRoutes) {
    std::map<std::string, std::string> parameters;
    if (!match(route.pattern, path, parameters)) continue;
    path_known = true;
    allowed += (allowed.empty() ? "" : ", ") + std::string(route.method);
    if (route.method == request.method) {
      context.route = &route;
      context.parameters = std::move(parameters);
    }
  }
  if (!context.route) {
    if (!path_known) return error_response(404, "not_found", "no route for " + std::string(path), "path");
    HttpResponse response = error_response(405, "method_not_allowed", request.method + " is not allowed here", "method");
    response.headers.emplace_back("Allow", allowed);
    return response;
  }
  if (question != std::string_view::npos) {
    for (std::string_view pair : split(target.substr(question + 1), '&')) {
      if (pair.empty()) continue;
      const std::size_t equals = pair.find('=');
      Result<std::string> key = percent_decode(pair.substr(0, equals), true);
      Result<std::string> value =
          percent_decode(equals == std::string_view::npos ? std::string_view() : pair.substr(equals + 1), true);
      if (!key || !value) return error_response(400, "invalid_argument", "bad percent escape in the query string", "query");
      context.query[*key] = *value;
    }
  }
  if (std::optional<HttpResponse> refused = check_access(request, context.route->access, config_)) return *refused;
  context.catalog = catalog_.load();
  const std::string pattern = context.route->pattern;
  if (!context.catalog && pattern != "/healthz" && pattern != "/metrics" && pattern != "/" && pattern != "/ui/{file}") {
    HttpResponse response = error_response(503, "not_ready", "the stores are still opening", "");
    response.headers.emplace_back("Retry-After", "1");
    return response;
  }
  return dispatch(request, context);
}

HttpResponse Api::dispatch(const HttpRequest& request, Context& context) {
  const std::string pattern = context.route->pattern;
  const std::string& method = request.method;
  Catalog* catalog = context.catalog;

  if (pattern == "/healthz") return json_response(200, {{"status", "up"}});
  // Writes that add data wait for disk space; deletions free it. A bulk load checks before each
  // of its batches instead, so it can report how far it got.
  if (context.route->access == Access::write && method != "DELETE" && !context.route->is_bulk) {
    if (Status s = check_free_space(config_); !s.is_ok()) return from_status(s);
  }
  if (pattern == "/" || pattern == "/ui/{file}") return web_asset_response(pattern == "/" ? "index.html" : context.parameters.at("file"));
  if (pattern == "/readyz") return json_response(200, {{"status", "ready"}, {"collections", catalog->list().size()}});
  if (pattern == "/metrics") {
    std::vector<CollectionGauges> gauges;
    if (catalog) {
      for (const auto& [name, collection] : catalog->list()) {
        const CollectionStatistics statistics = collection->statistics();
        gauges.push_back({name, statistics.shape_count, statistics.index_bytes, statistics.resident_copy_bytes,
                          statistics.store_bytes, statistics.memtable_bytes, statistics.table_reader_bytes});
      }
    }
    HttpResponse response;
    response.content_type = "text/plain; version=0.0.4";
    response.body = metrics_.exposition(gauges, {resident_memory_bytes(), shared_block_cache_bytes(),
                                                 shared_block_cache_capacity(), resident_copy_bytes(),
                                                 resident_copy_capacity()});
    return response;
  }
  if (pattern == "/v1/collections") {
    Json list = Json::array();
    for (const auto& [name, collection] : catalog->list()) list.push_back(describe(name, *collection));
    return json_response(200, {{"collections", list}});
  }
  if (pattern == "/v1/distance") {
    Result<Json> body = parse_object(request.body, false);
    if (!body) return from_status(body.status());
    if (Status s = check_known_fields(*body, {"a", "b", "metric", "frame"}); !s.is_ok()) return from_status(s);
    ShapeLimits limits;
    limits.max_vertices = config_.max_vertices;
    Result<Shape> a = shape_field(*body, "a", limits);
    if (!a) return from_status(a.status());
    Result<Shape> b = shape_field(*body, "b", limits);
    if (!b) return from_status(b.status());
    Result<Metric> metric = metric_from(*body, Metric::hausdorff);
    if (!metric) return from_status(metric.status());
    if (*metric == Metric::sketch) {
      return from_status(invalid_argument("the sketch distance needs a collection's landmarks; use nearest", "metric"));
    }
    Result<std::string> frame_text = string_field(*body, "frame", "absolute");
    if (!frame_text) return from_status(frame_text.status());
    Result<Frame> frame = parse_frame(*frame_text);
    if (!frame) return from_status(invalid_argument(frame.status().message(), "frame"));
    const Clock::time_point start = Clock::now();
    const Shape placed_a = apply_frame(*a, *frame), placed_b = apply_frame(*b, *frame);
    Result<DistanceResult> result = *metric == Metric::hausdorff ? Result<DistanceResult>(hausdorff(placed_a, placed_b))
                                    : *metric == Metric::frechet ? frechet(placed_a, placed_b)
                                                                 : discrete_frechet(placed_a, placed_b);
    if (!result) return from_status(result.status());
    return json_response(200, {{"metric", metric_name(*metric)},
                               {"frame", frame_name(*frame)},
                               {"distance", result->value},
                               {"upper_bound", result->upper_bound},
                               {"converged", result->converged},
                               {"from", {result->from.x, result->from.y}},
                               {"to", {result->to.x, result->to.y}},
                               {"milliseconds", milliseconds_since(start)}});
  }

  if (pattern == "/v1/jobs") return json_response(200, {{"jobs", jobs_.list()}});
  if (pattern == "/v1/jobs/{id}") {
    const std::string& id = context.parameters.at("id");
    Result<Json> job = method == "DELETE" ? jobs_.cancel(id) : jobs_.describe(id);
    if (!job) return from_status(job.status());
    return json_response(200, *job);
  }

  // Everything below is about one collection.
  const std::string& name = context.parameters.at("name");
  if (Status s = Catalog::check_name(name); !s.is_ok()) return from_status(s);
  if (pattern == "/v1/collections/{name}" && method == "PUT") {
    Result<Json> body = parse_object(request.body, true);
    if (!body) return from_status(body.status());
    Result<CollectionSettings> settings = settings_from(*body, config_);
    if (!settings) return from_status(settings.status());
    Result<std::shared_ptr<Collection>> created = catalog->create(name, *settings);
    if (!created) return from_status(created.status());
    spdlog::info("collection created: name={} landmarks={} frame={}", name, settings->landmarks.size(),
                 frame_name(settings->frame));
    return json_response(201, describe(name, **created));
  }
  if (pattern == "/v1/collections/{name}" && method == "DELETE") {
    if (Status s = catalog->drop(name); !s.is_ok()) return from_status(s);
    spdlog::info("collection dropped: name={}", name);
    return json_response(200, {{"name", name}, {"dropped", true}});
  }
  Result<std::shared_ptr<Collection>> found = catalog->find(name);
  if (!found) return from_status(found.status());
  Collection& collection = **found;
  if (pattern == "/v1/collections/{name}") return json_response(200, describe(name, collection));
  if (pattern == "/v1/collections/{name}/refit") {
    Result<Json> body = parse_object(request.body, true);
    if (!body) return from_status(body.status());
    Result<RefitOptions> options = refit_options_from(*body);
    if (!options) return from_status(options.status());
    if (collection.size() < 2) {
      return from_status(Status(StatusCode::failed_precondition, "a landmark refit needs at least two stored shapes"));
    }
    Result<Json> job = jobs_.start_refit(name, *found, *options);
    if (!job) return from_status(job.status());
    HttpResponse response = json_response(202, *job);
    response.headers.emplace_back("Location", "/v1/jobs/" + (*job)["id"].get<std::string>());
    return response;
  }

  if (pattern == "/v1/collections/{name}/shapes/{id}") {
    const std::string& id = context.parameters.at("id");
    if (Status s = check_shape_id(id, "id"); !s.is_ok()) return from_status(s);
    if (method == "GET") {
      Result<ShapeRecord> record = collection.get(id);
      if (!record) return from_status(record.status());
      return json_response(200, {{"id", id},
                                 {"geometry", Json::parse(to_geojson(record->shape))},
                                 {"metadata", Json::parse(record->metadata, nullptr, false)}});
    }
    if (method == "DELETE") {
      if (Result<ShapeRecord> record = collection.get(id); !record) return from_status(record.status());
      const std::string ids[] = {id};
      if (Status s = collection.remove(ids); !s.is_ok()) return from_status(s);
      return json_response(200, {{"id", id}, {"deleted", true}});
    }
    Result<Json> body = parse_object(request.body, false);
    if (!body) return from_status(body.status());
    if (Status s = check_known_fields(*body, {"geometry", "metadata"}); !s.is_ok()) return from_status(s);
    Result<Shape> shape = shape_field(*body, "geometry", collection.settings().limits);
    if (!shape) return from_status(shape.status());
    Result<std::string> metadata = metadata_field(*body, "metadata");
    if (!metadata) return from_status(metadata.status());
    const ShapeRecord record{id, std::move(*shape), std::move(*metadata)};
    if (Status s = collection.check(record); !s.is_ok()) return from_status(s);
    if (Status s = collection.upsert(std::span(&record, 1)); !s.is_ok()) return from_status(s);
    return json_response(200, {{"id", id}, {"stored", true}});
  }

  if (pattern == "/v1/collections/{name}/shapes" && method == "GET") {
    std::size_t limit = 100;
    if (auto text = context.query.find("limit"); text != context.query.end()) {
      char* end = nullptr;
      const unsigned long long value = std::strtoull(text->second.c_str(), &end, 10);
      if (text->second.empty() || *end != '\0' || value < 1 || value > 10000) {
        return from_status(invalid_argument("limit must be an integer from 1 to 10000", "limit"));
      }
      limit = value;
    }
    const std::string after = context.query.contains("after") ? context.query.at("after") : "";
    bool ids_only = false;
    if (auto text = context.query.find("ids_only"); text != context.query.end()) {
      if (text->second != "true" && text->second != "false") {
        return from_status(invalid_argument("ids_only must be true or false", "ids_only"));
      }
      ids_only = text->second == "true";
    }
    Result<std::vector<ShapeRecord>> page = collection.list(after, limit);
    if (!page) return from_status(page.status());
    // Written as text: each geometry's GeoJSON and each stored metadata object (a JSON object,
    // checked when it was stored) go in as they are, not parsed into a document and printed
    // again (a page of 10,000 64-vertex shapes took about 2 s that way). The members are in the
    // order a JSON document would print them.
    HttpResponse response;
    response.body = "{\"next_after\":" + (page->size() == limit ? dump(Json(page->back().id)) : std::string("null")) +
                    ",\"shapes\":[";
    for (std::size_t i = 0; i < page->size(); ++i) {
      const ShapeRecord& record = (*page)[i];
      if (i > 0) response.body += ',';
      if (ids_only) {
        response.body += "{\"id\":" + dump(Json(record.id)) + "}";
        continue;
      }
      response.body += "{\"geometry\":" + to_geojson(record.shape) + ",\"id\":" + dump(Json(record.id)) +
                       ",\"metadata\":" + (record.metadata.empty() ? std::string("{}") : record.metadata) + "}";
    }
    response.body += "]}\n";
    return response;
  }

  if (pattern == "/v1/collections/{name}/shapes") {  // POST: bulk NDJSON
    const Clock::time_point start = Clock::now();
    std::vector<ShapeRecord> batch;
    std::vector<std::size_t> batch_lines;
    std::size_t accepted = 0, rejected = 0, lines = 0, batches = 0;
    Json rejections = Json::array();
    constexpr std::size_t kMaxRejectionsListed = 1000;
    // Rejections of the lines read since the last batch was handed over. They count once the
    // batch they fall among is handed over (or the body ends), and are dropped when the batch
    // before fails: the reply reports no line after the failed batch.
    std::size_t rejected_pending = 0;
    Json rejections_pending = Json::array();
    auto reject = [&](std::size_t line, const std::string& id, const Status& status) {
      ++rejected_pending;
      if (rejections.size() + rejections_pending.size() >= kMaxRejectionsListed) return;
      Json entry = {{"line", line},
                    {"error",
                     {{"code", http_status_of(status.code()).second},
                      {"message", status.message()},
                      {"where", status.where()}}}};
      if (!id.empty()) entry["id"] = id;
      rejections_pending.push_back(std::move(entry));
    };
    // Each full batch commits on a thread of its own while the lines of the next one are read,
    // so that reading overlaps the synced write (one body of 30,000 64-vertex lines: 18–21k
    // shapes/s before, 33–34k after; reports/performance-log.md). Batches still commit one at
    // a time and in order: one is handed over only once the one before is durable, so a
    // failure leaves every batch before it stored and none after (tests/faults/fault_test.py).
    struct Commit {
      std::future<Status> done;
      std::size_t first_line = 0, size = 0;
    };
    std::optional<Commit> committing;
    std::optional<Status> failure;
    std::size_t failed_from_line = 0;
    auto wait_for_commit = [&]() {
      if (!committing) return;
      const Status s = committing->done.get();
      if (s.is_ok()) {
        accepted += committing->size;
        ++batches;
      } else {
        failure = s;
        failed_from_line = committing->first_line;
      }
      committing.reset();
    };
    auto hand_over = [&]() {
      wait_for_commit();
      if (failure) return;
      rejected += rejected_pending;
      rejected_pending = 0;
      for (Json& entry : rejections_pending) rejections.push_back(std::move(entry));
      rejections_pending = Json::array();
      if (batch.empty()) return;
      auto records = std::make_shared<const std::vector<ShapeRecord>>(std::move(batch));
      batch.clear();
      committing = Commit{on_own_thread([this, &collection, records] {
                            const Status space = check_free_space(config_);
                            return space.is_ok() ? collection.upsert(*records) : space;
                          }),
                          batch_lines.front(), records->size()};
      batch_lines.clear();
    };
    const ShapeLimits limits = collection.settings().limits;
    // A line read through a JSON document, for lines read_plain_bulk_line leaves to it; rejects
    // the line (nullopt) with the first problem found.
    auto read_in_general = [&](std::size_t line_number, std::string_view line) -> std::optional<ShapeRecord> {
      Json object;
      try {
        object = Json::parse(line);
      } catch (const Json::parse_error& error) {
        reject(line_number, "",
               invalid_argument("not valid JSON", "column " + std::to_string(error.byte > 0 ? error.byte : 1)));
        return std::nullopt;
      } catch (const Json::exception& error) {  // e.g. a number beyond the range of a double
        reject(line_number, "", invalid_argument(std::string("not valid JSON: ") + error.what(), "line"));
        return std::nullopt;
      }
      if (!object.is_object()) {
        reject(line_number, "", invalid_argument("each line must be a JSON object", "line"));
        return std::nullopt;
      }
      Result<std::string> id = string_field(object, "id", "");
      if (!id || id->empty()) {
        reject(line_number, "", id ? invalid_argument("id is required", "id") : id.status());
        return std::nullopt;
      }
      Status checked = check_known_fields(object, {"id", "geometry", "metadata"});
      if (checked.is_ok()) checked = check_shape_id(*id, "id");
      Result<Shape> shape = checked.is_ok() ? shape_field(object, "geometry", limits) : Result<Shape>(checked);
      Result<std::string> metadata = shape ? metadata_field(object, "metadata") : Result<std::string>(shape.status());
      if (!metadata) {
        reject(line_number, *id, metadata.status());
        return std::nullopt;
      }
      return ShapeRecord{*id, std::move(*shape), std::move(*metadata)};
    };
    const std::string_view body = request.body;
    std::size_t line_number = 0;
    for (std::size_t begin = 0; begin < body.size() && !failure;) {
      std::size_t end = body.find('\n', begin);
      if (end == std::string_view::npos) end = body.size();
      std::string_view line = body.substr(begin, end - begin);
      begin = end + 1;
      ++line_number;
      if (line.ends_with('\r')) line.remove_suffix(1);
      if (line.find_first_not_of(" \t") == std::string_view::npos) continue;
      ++lines;
      std::optional<ShapeRecord> record;
      if (std::optional<PlainBulkLine> plain = read_plain_bulk_line(line, limits);
          plain && check_shape_id(plain->id, "id").is_ok()) {
        record = ShapeRecord{std::move(plain->id), std::move(plain->shape), std::move(plain->metadata)};
      } else {
        record = read_in_general(line_number, line);  // its errors are the ones reported
        if (!record) continue;
      }
      if (Status s = collection.check(*record); !s.is_ok()) {
        reject(line_number, record->id, s);
        continue;
      }
      batch.push_back(std::move(*record));
      batch_lines.push_back(line_number);
      if (batch.size() >= config_.bulk_batch_size) hand_over();
    }
    hand_over();
    wait_for_commit();
    metrics_.record_ingest(accepted, rejected);
    const double milliseconds = milliseconds_since(start);
    spdlog::info("bulk ingest: collection={} lines={} accepted={} rejected={} batches={} ms={:.1f}", name, lines,
                 accepted, rejected, batches, milliseconds);
    Json reply = {{"accepted", accepted},
                  {"rejected", rejected},
                  {"lines", lines},
                  {"batches", batches},
                  {"rejections", rejections},
                  {"rejections_truncated", rejected > rejections.size()},
                  {"milliseconds", milliseconds}};
    if (failure) {
      // Batches before the failing one are durable; nothing from it on was stored.
      const auto [http, code] = http_status_of(failure->code());
      reply["error"] = {{"code", code},
                        {"message", "stopped at the batch starting on line " + std::to_string(failed_from_line) +
                                        ": " + failure->message() + "; lines before it are stored, none after"},
                        {"where", "line " + std::to_string(failed_from_line)}};
      spdlog::error("bulk ingest failed: collection={} {}", name, failure->message());
      return json_response(http, reply);
    }
    return json_response(200, reply);
  }

  // Queries.
  const bool range = pattern == "/v1/collections/{name}/within";
  Result<Json> body = parse_object(request.body, false);
  if (!body) return from_status(body.status());
  Status known = range ? check_known_fields(*body, {"shape", "id", "radius", "metric", "filter", "max_results"})
                       : check_known_fields(*body, {"shape", "id", "k", "metric", "mode", "candidates", "filter"});
  if (!known.is_ok()) return from_status(known);
  Result<QueryTarget> target = query_target(*body, collection);
  if (!target) return from_status(target.status());
  Result<Metric> metric = metric_from(*body, collection.settings().default_metric);
  if (!metric) return from_status(metric.status());
  Result<std::string> filter = filter_from(*body);
  if (!filter) return from_status(filter.status());
  const Clock::time_point start = Clock::now();
  Result<QueryAnswer> answer = Status(StatusCode::internal, "unset");
  std::size_t k = 0;
  if (range) {
    RangeOptions options;
    Result<double> radius = number_field(*body, "radius", -1);
    if (!radius) return from_status(radius.status());
    if (!body->contains("radius")) return from_status(invalid_argument("radius is required", "radius"));
    Result<std::size_t> max_results =
        size_field(*body, "max_results", std::min<std::size_t>(1000, config_.max_range_results), 1, config_.max_range_results);
    if (!max_results) return from_status(max_results.status());
    options.radius = *radius;
    options.metric = *metric;
    options.metadata_filter = *filter;
    options.max_results = *max_results;
    if (target->id) {
      Result<ShapeRecord> stored = collection.get(*target->id);
      if (!stored) return from_status(stored.status());
      ++options.max_results;  // the stored shape itself is in range and is left out below
      answer = collection.within(stored->shape, options);
      if (answer) {
        std::erase_if(answer->hits, [&](const QueryHit& hit) { return hit.id == *target->id; });
        if (answer->hits.size() > *max_results) answer->hits.resize(*max_results);
      }
    } else {
      answer = collection.within(*target->shape, options);
    }
  } else {
    QueryOptions options;
    Result<std::size_t> k_field = size_field(*body, "k", 10, 1, config_.max_k);
    if (!k_field) return from_status(k_field.status());
    Result<std::size_t> candidates = size_field(*body, "candidates", 0, 0, config_.max_candidates);
    if (!candidates) return from_status(candidates.status());
    Result<std::string> mode = string_field(*body, "mode", "fast");
    if (!mode) return from_status(mode.status());
    if (*mode != "fast" && *mode != "exact") return from_status(invalid_argument("mode must be fast or exact", "mode"));
    options.k = k = *k_field;
    options.metric = *metric;
    options.exact = *mode == "exact";
    options.candidate_budget = *candidates;
    options.metadata_filter = *filter;
    answer = target->id ? collection.nearest_to_stored(*target->id, options) : collection.nearest(*target->shape, options);
  }
  if (!answer) return from_status(answer.status());
  const double milliseconds = milliseconds_since(start);
  metrics_.record_query(counts_of(*answer));
  if (milliseconds > static_cast<double>(config_.slow_query_ms)) {
    spdlog::warn("slow query: collection={} route={} metric={} k={} ms={:.1f} index_ms={:.1f} candidates={} "
                 "exact_evaluations={} certified={}",
                 name, pattern, metric_name(*metric), k, milliseconds, answer->stats.index_milliseconds,
                 answer->stats.candidates_fetched, answer->stats.exact_evaluations, answer->certified);
  }
  return json_response(200, answer_json(*answer, *metric, range, milliseconds));
}

}  // namespace waymark::server
