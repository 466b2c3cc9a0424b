// A small blocking HTTP/1.1 client for the `waymark` server commands. It speaks plain HTTP to
// one server (no TLS: put a TLS-terminating proxy in front of waymarkd and point the CLI at a
// local address, or use an SSH tunnel), keeps one connection alive between requests, and
// reconnects when the server closed it.
//
// Errors are values: a refused or dropped connection, a timeout or an unreadable reply comes back
// as a Status naming the server's address, never as an exception. Any HTTP status, including
// 4xx and 5xx, is a successful exchange: the caller decides what it means.
#pragma once

#include <chrono>
#include <memory>
#include <string>

#include "sketch/status.h"

namespace waymark::cli {

struct HttpReply {
  int status = 0;
  std::string body;
  std::string retry_after;  // the Retry-After header, empty when absent
};

struct ServerAddress {
  std::string host;
  std::string port;
  std::string text;  // as given, for messages

  // Accepts "http://host:port", "host:port" and "http://host" (port 80). Rejects https:// with a
  // message that says why.
  static Result<ServerAddress> parse(const std::string& text);
};

class HttpClient {
 public:
  // `token`, when not empty, is sent as "Authorization: Bearer <token>" on every request.
  HttpClient(ServerAddress address, std::string token, std::chrono::seconds timeout = std::chrono::seconds(120));
  ~HttpClient();
  HttpClient(const HttpClient&) = delete;
  HttpClient& operator=(const HttpClient&) = delete;

  // Sends one request and reads the whole reply (at most 1 GiB). A request that fails on a
  // reused connection before any reply byte arrived is retried once on a fresh connection,
  // because servers close idle keep-alive connections at will.
  Result<HttpReply> send(const std::string& method, const std::string& target, const std::string& body = "",
                         const std::string& content_type = "application/json");

  const ServerAddress& address() const { return address_; }

 private:
  struct Connection;
  ServerAddress address_;
  std::string token_;
  std::chrono::seconds timeout_;
  std::unique_ptr<Connection> connection_;
};

// Percent-encodes one path segment or query value (RFC 3986 unreserved characters pass).
std::string url_encode(const std::string& text);

}  // namespace waymark::cli
