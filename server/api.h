// The HTTP API of waymarkd, independent of any transport: a request in, a reply out. The
// routes, their bodies and replies are described in server/openapi.json (OpenAPI 3.0); a
// test checks that routes() and that document list the same operations.
//
// Every error reply is {"error": {"code", "message", "where"}} with the HTTP status its code
// implies (400 invalid_argument, 401 unauthenticated, 403 forbidden, 404 not_found, 405
// method_not_allowed, 409 already_exists, 413 too_large, 422 not_applicable, 429 overloaded,
// 501 not_implemented, 503 not_ready, 507 storage_full). A rejected request changes no stored data.
//
// Thread safety: handle() may run on many threads at once; it never holds a lock of its own
// while a query computes exact distances.
#pragma once

#include <atomic>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "index/catalog.h"
#include "server/config.h"
#include "server/jobs.h"
#include "server/metrics.h"

namespace waymark::server {

struct HttpRequest {
  std::string method;         // upper case, e.g. "GET"
  std::string target;         // path and query string, percent-encoded as received
  std::string authorization;  // the Authorization header's value, "" when absent
  std::string body;
};

struct HttpResponse {
  int status = 200;
  std::string content_type = "application/json";
  std::string body;
  std::vector<std::pair<std::string, std::string>> headers;  // extra ones (WWW-Authenticate, Retry-After)
};

enum class Access { open, read, write };

struct RouteDescription {
  const char* method;
  const char* pattern;  // OpenAPI path template, e.g. "/v1/collections/{name}"
  Access access;
  bool is_query;  // counts against max_concurrent_queries
  bool is_bulk;   // takes a body up to max_bulk_body_bytes
};

// What the transport needs to know about a request before reading its body.
struct RouteInfo {
  std::string pattern;  // for logs and metrics; "unmatched" when no route matches
  bool is_query = false;
  bool is_bulk = false;
};

class Api {
 public:
  Api(ServerConfig config, Metrics& metrics);
  ~Api();

  // The API answers 503 not_ready on /v1 and /readyz until a catalog is installed.
  void install_catalog(std::unique_ptr<Catalog> catalog);
  bool ready() const { return catalog_.load() != nullptr; }

  static const std::vector<RouteDescription>& routes();
  RouteInfo classify(const std::string& method, const std::string& target) const;
  HttpResponse handle(const HttpRequest& request);

  // A reply the transport builds itself (413 body too large, 429 overloaded, 408 timeouts).
  static HttpResponse error_response(int status, const std::string& code, const std::string& message,
                                     const std::string& where = {});

 private:
  struct Context;
  HttpResponse dispatch(const HttpRequest& request, Context& context);

  ServerConfig config_;
  Metrics& metrics_;
  std::atomic<Catalog*> catalog_{nullptr};
  std::unique_ptr<Catalog> owned_catalog_;
  JobRunner jobs_;  // declared last: destroyed first, so running refits stop before the catalog closes
};

}  // namespace waymark::server
