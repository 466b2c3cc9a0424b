// waymarkd's HTTP transport (Boost.Beast over Asio, optionally TLS through OpenSSL): accepts
// connections on the I/O threads, reads each request within the configured size and time
// limits, hands it to Api::handle on the worker pool (never on an I/O thread), and writes the
// reply back. Keep-alive is supported; one request per connection is in flight at a time.
//
// Limits enforced here: header size (16 KiB), body size (max_body_bytes, or
// max_bulk_body_bytes for bulk ingest) → 413; the whole request within read_timeout_ms and
// the reply within write_timeout_ms, an idle kept-alive connection for idle_timeout_ms → the
// connection is closed; more than max_concurrent_queries queries queued or running → 429.
//
// One log line per request: method, route pattern, status, milliseconds, bytes in and out.
#pragma once

#include <cstdint>
#include <functional>
#include <memory>

#include "server/api.h"

namespace waymark::server {

class HttpServer {
 public:
  HttpServer(const ServerConfig& config, Api& api, Metrics& metrics);
  ~HttpServer();

  // Binds and listens (port 0 picks a free port). Errors: the address does not parse, the
  // port is taken, the TLS files do not load.
  Status listen();
  std::uint16_t port() const;
  bool uses_tls() const;

  // Serves until SIGTERM or SIGINT: then stops accepting, lets in-flight requests finish (at
  // most shutdown_timeout_ms), and returns. `on_started` runs once the I/O threads are up.
  void run(const std::function<void()>& on_started);

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace waymark::server
