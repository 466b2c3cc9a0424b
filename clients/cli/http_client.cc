#include "clients/cli/http_client.h"

#include <boost/asio/connect.hpp>
#include <boost/asio/io_context.hpp>
#include <boost/asio/ip/tcp.hpp>
#include <boost/beast/core.hpp>
#include <boost/beast/http.hpp>
#include <cctype>
#include <optional>

namespace waymark::cli {

namespace asio = boost::asio;
namespace beast = boost::beast;
namespace http = beast::http;

Result<ServerAddress> ServerAddress::parse(const std::string& text) {
  std::string rest = text;
  if (rest.starts_with("https://")) {
    return Status(StatusCode::invalid_argument,
                  "'" + text + "': the CLI speaks plain HTTP; reach a TLS endpoint through a local proxy or tunnel",
                  "server");
  }
  if (rest.starts_with("http://")) rest = rest.substr(7);
  while (!rest.empty() && rest.back() == '/') rest.pop_back();
  if (rest.empty() || rest.find('/') != std::string::npos) {
    return Status(StatusCode::invalid_argument, "'" + text + "' is not a server address like http://127.0.0.1:7700",
                  "server");
  }
  ServerAddress address;
  address.text = "http://" + rest;
  const std::size_t colon = rest.rfind(':');
  if (colon == std::string::npos || rest.back() == ']') {
    address.host = rest;
    address.port = "80";
  } else {
    address.host = rest.substr(0, colon);
    address.port = rest.substr(colon + 1);
    if (address.port.empty() || address.port.find_first_not_of("0123456789") != std::string::npos) {
      return Status(StatusCode::invalid_argument, "'" + text + "' has a bad port", "server");
    }
  }
  if (address.host.size() > 2 && address.host.front() == '[' && address.host.back() == ']') {
    address.host = address.host.substr(1, address.host.size() - 2);
  }
  return address;
}

struct HttpClient::Connection {
  asio::io_context io;
  beast::tcp_stream stream{io};
  beast::flat_buffer buffer;
  bool open = false;
};

HttpClient::HttpClient(ServerAddress address, std::string token, std::chrono::seconds timeout)
    : address_(std::move(address)), token_(std::move(token)), timeout_(timeout), connection_(std::make_unique<Connection>()) {}

HttpClient::~HttpClient() {
  if (connection_ && connection_->open) {
    beast::error_code ignored;
    connection_->stream.socket().shutdown(asio::ip::tcp::socket::shutdown_both, ignored);
  }
}

Result<HttpReply> HttpClient::send(const std::string& method, const std::string& target, const std::string& body,
                                   const std::string& content_type) {
  const http::verb verb = http::string_to_verb(method);
  if (verb == http::verb::unknown) return Status(StatusCode::invalid_argument, "unknown HTTP method " + method);
  for (int attempt = 0; attempt < 2; ++attempt) {
    Connection& c = *connection_;
    const bool reused = c.open;
    beast::error_code error;
    if (!c.open) {
      asio::ip::tcp::resolver resolver(c.io);
      auto endpoints = resolver.resolve(address_.host, address_.port, error);
      if (error) return Status(StatusCode::io_error, "cannot resolve " + address_.text + ": " + error.message());
      c.stream.expires_after(timeout_);
      c.stream.connect(endpoints, error);
      if (error) {
        c.stream.close();
        return Status(StatusCode::io_error, "cannot reach the server at " + address_.text + ": " + error.message() +
                                                   " (is waymarkd running? give --server or WAYMARK_SERVER)");
      }
      c.buffer.clear();
      // Beast sizes each read by the buffer's free capacity, and the parser empties the buffer
      // into the body after every read: left at its first 512 bytes, a large reply (a page of
      // ids for --resume) takes a read call per 512 bytes.
      c.buffer.reserve(64 * 1024);
      c.open = true;
    }
    http::request<http::string_body> request{verb, target, 11};
    request.set(http::field::host, address_.host);
    request.set(http::field::user_agent, "waymark-cli");
    request.keep_alive(true);
    if (!token_.empty()) request.set(http::field::authorization, "Bearer " + token_);
    if (!body.empty() || verb == http::verb::post || verb == http::verb::put) {
      request.set(http::field::content_type, content_type);
      request.body() = body;
      request.prepare_payload();
    }
    c.stream.expires_after(timeout_);
    http::write(c.stream, request, error);
    std::optional<http::response_parser<http::string_body>> parser;
    if (!error) {
      parser.emplace();
      parser->body_limit(std::uint64_t{1} << 30);
      http::read(c.stream, c.buffer, *parser, error);
    }
    if (error) {
      const bool nothing_read = !parser || !parser->got_some();
      c.stream.close();
      c.open = false;
      c.buffer.clear();
      if (reused && nothing_read && error != beast::error::timeout) continue;  // the server closed an idle connection
      if (error == beast::error::timeout) {
        return Status(StatusCode::io_error,
                      "the server at " + address_.text + " did not answer within " + std::to_string(timeout_.count()) + " s");
      }
      return Status(StatusCode::io_error, "lost the connection to " + address_.text + ": " + error.message());
    }
    http::response<http::string_body> response = parser->release();
    HttpReply reply;
    reply.status = static_cast<int>(response.result_int());
    reply.body = std::move(response.body());
    if (auto found = response.find(http::field::retry_after); found != response.end()) {
      reply.retry_after = std::string(found->value());
    }
    if (!response.keep_alive()) {
      beast::error_code ignored;
      c.stream.socket().shutdown(asio::ip::tcp::socket::shutdown_both, ignored);
      c.stream.close();
      c.open = false;
      c.buffer.clear();
    }
    return reply;
  }
  return Status(StatusCode::io_error, "lost the connection to " + address_.text);
}

std::string url_encode(const std::string& text) {
  static constexpr char kHex[] = "0123456789ABCDEF";
  std::string out;
  for (unsigned char c : text) {
    if (std::isalnum(c) || c == '-' || c == '.' || c == '_' || c == '~') {
      out += static_cast<char>(c);
    } else {
      out += '%';
      out += kHex[c >> 4];
      out += kHex[c & 15];
    }
  }
  return out;
}

}  // namespace waymark::cli
