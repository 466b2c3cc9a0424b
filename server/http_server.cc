#include "server/http_server.h"

#include <spdlog/spdlog.h>

#include <algorithm>
#include <atomic>
#include <boost/asio/signal_set.hpp>
#include <boost/asio/ssl.hpp>
#include <boost/asio/steady_timer.hpp>
#include <boost/asio/strand.hpp>
#include <boost/asio/thread_pool.hpp>
#include <boost/beast/core.hpp>
#include <boost/beast/http.hpp>
#include <boost/beast/ssl.hpp>
#include <chrono>
#include <optional>
#include <string_view>
#include <thread>

namespace waymark::server {
namespace {

namespace asio = boost::asio;
namespace beast = boost::beast;
namespace http = beast::http;
using tcp = asio::ip::tcp;
using Clock = std::chrono::steady_clock;

constexpr std::size_t kHeaderLimit = 16 * 1024;
// The most a body read asks the socket for at once. Beast sizes each read by the read buffer's
// free capacity, and the parser empties that buffer into the body after every read, so a buffer
// left at its first size (512 bytes) read a 2.7 MB bulk body in 5,441 reads (strace) and spent
// about as long on it as on storing its thousand shapes.
constexpr std::size_t kBodyReadChunk = 64 * 1024;

// What every session shares.
struct Shared {
  const ServerConfig& config;
  Api& api;
  Metrics& metrics;
  asio::thread_pool& workers;
  std::atomic<std::size_t> queries_waiting{0};
  std::atomic<std::size_t> requests_in_flight{0};  // read completely, reply not yet written
  std::atomic<bool> stopping{false};
};

template <typename Stream>
class Session : public std::enable_shared_from_this<Session<Stream>> {
 public:
  Session(Stream stream, Shared& shared) : stream_(std::move(stream)), shared_(shared) {}

  void start() {
    if constexpr (std::is_same_v<Stream, beast::ssl_stream<beast::tcp_stream>>) {
      beast::get_lowest_layer(stream_).expires_after(std::chrono::milliseconds(shared_.config.read_timeout_ms));
      stream_.async_handshake(asio::ssl::stream_base::server,
                              [self = this->shared_from_this()](beast::error_code error) {
                                if (error) return;  // a client that does not speak TLS: nothing to answer
                                self->read_header(false);
                              });
    } else {
      read_header(false);
    }
  }

 private:
  void read_header(bool kept_alive) {
    parser_.emplace();
    parser_->header_limit(kHeaderLimit);
    // Beast checks a Content-Length against the body limit while parsing the header, before the
    // route is known: allow the larger (bulk) limit here and apply the route's in on_header.
    parser_->body_limit(std::max(shared_.config.max_body_bytes, shared_.config.max_bulk_body_bytes));
    const std::size_t timeout = kept_alive ? shared_.config.idle_timeout_ms : shared_.config.read_timeout_ms;
    beast::get_lowest_layer(stream_).expires_after(std::chrono::milliseconds(timeout));
    http::async_read_header(stream_, buffer_, *parser_,
                            [self = this->shared_from_this()](beast::error_code error, std::size_t) {
                              self->on_header(error);
                            });
  }

  void on_header(beast::error_code error) {
    if (error) return fail_read(error);
    started_ = Clock::now();
    const auto& header = parser_->get();
    route_ = shared_.api.classify(std::string(header.method_string()), std::string(header.target()));
    const std::size_t limit = route_.is_bulk ? shared_.config.max_bulk_body_bytes : shared_.config.max_body_bytes;
    if (const auto length = parser_->content_length(); length && *length > limit) {
      return fail_read(http::error::body_limit);  // declared too large: refused before reading it
    }
    parser_->body_limit(limit);  // chunked bodies are checked as they arrive
    // A known length that fits is read in as few reads as it takes; an unknown one (chunked) in
    // chunks of the largest size.
    buffer_.reserve(std::min<std::uint64_t>(parser_->content_length().value_or(kBodyReadChunk), kBodyReadChunk));
    beast::get_lowest_layer(stream_).expires_after(std::chrono::milliseconds(shared_.config.read_timeout_ms));
    // A client that asked to be told before it sends the body (curl does for large uploads)
    // would otherwise wait a second for this interim reply before sending anything.
    if (beast::iequals(header[http::field::expect], "100-continue")) {
      static constexpr std::string_view kContinue = "HTTP/1.1 100 Continue\r\n\r\n";
      asio::async_write(stream_, asio::buffer(kContinue.data(), kContinue.size()),
                        [self = this->shared_from_this()](beast::error_code e, std::size_t) {
                          if (e) return self->close();
                          self->read_body();
                        });
      return;
    }
    read_body();
  }

  void read_body() {
    http::async_read(stream_, buffer_, *parser_, [self = this->shared_from_this()](beast::error_code e, std::size_t) {
      self->on_body(e);
    });
  }

  // A request that could not be read: answer what can be answered, then close.
  void fail_read(beast::error_code error) {
    if (error == http::error::body_limit) {
      const std::size_t limit = route_.is_bulk ? shared_.config.max_bulk_body_bytes : shared_.config.max_body_bytes;
      return reply(Api::error_response(413, "too_large", "the body is over " + std::to_string(limit) + " bytes",
                                       route_.is_bulk ? "max_bulk_body_bytes" : "max_body_bytes"),
                   false);
    }
    if (error == http::error::header_limit) {
      return reply(Api::error_response(431, "too_large", "the request header is over 16 KiB", "header"), false);
    }
    if (error == beast::error::timeout && parser_ && parser_->got_some()) {
      return reply(Api::error_response(408, "timeout", "the request was not received within read_timeout_ms",
                                       "read_timeout_ms"),
                   false);
    }
    if (error != http::error::end_of_stream && error != beast::error::timeout && error != asio::error::eof &&
        error != asio::error::connection_reset && error != asio::error::operation_aborted && parser_ &&
        parser_->got_some()) {
      return reply(Api::error_response(400, "invalid_argument", "malformed HTTP request: " + error.message(), "request"),
                   false);
    }
    close();
  }

  void on_body(beast::error_code error) {
    if (error) return fail_read(error);
    http::request<http::string_body> message = parser_->release();
    bytes_in_ = message.body().size();
    keep_alive_ = message.keep_alive();
    method_ = std::string(message.method_string());
    HttpRequest request{method_, std::string(message.target()),
                        std::string(message[http::field::authorization]), std::move(message.body())};
    ++shared_.requests_in_flight;
    if (route_.is_query) {
      const std::size_t waiting = ++shared_.queries_waiting;
      if (waiting > shared_.config.max_concurrent_queries) {
        --shared_.queries_waiting;
        HttpResponse busy = Api::error_response(429, "overloaded",
                                                "more than " + std::to_string(shared_.config.max_concurrent_queries) +
                                                    " queries are waiting; retry later",
                                                "max_concurrent_queries");
        busy.headers.emplace_back("Retry-After", "1");
        return reply(std::move(busy), keep_alive_, true);
      }
      shared_.metrics.set_queries_waiting(waiting);
    }
    asio::post(shared_.workers, [self = this->shared_from_this(), request = std::move(request)]() mutable {
      HttpResponse response;
      try {
        response = self->shared_.api.handle(request);
      } catch (const std::exception& error) {
        // A bug let an exception out of the API: answer this request, keep serving the rest.
        spdlog::error("request failed with an exception: method={} target={} what={}", request.method, request.target,
                      error.what());
        response = Api::error_response(500, "internal", "the server failed on this request; it is logged", "");
      }
      if (self->route_.is_query) self->shared_.metrics.set_queries_waiting(--self->shared_.queries_waiting);
      // Back to this connection's strand for the write.
      asio::post(self->stream_.get_executor(), [self, response = std::move(response)]() mutable {
        self->reply(std::move(response), self->keep_alive_, true);
      });
    });
  }

  void reply(HttpResponse response, bool keep_alive, bool counted = false) {
    counted_ = counted;
    if (!counted_) started_ = started_ == Clock::time_point{} ? Clock::now() : started_;
    response_ = {};
    response_.result(static_cast<unsigned>(response.status));
    response_.version(11);
    response_.set(http::field::server, "waymarkd");
    response_.set(http::field::content_type, response.content_type);
    for (const auto& [name, value] : response.headers) response_.set(name, value);
    response_.body() = std::move(response.body);
    response_.keep_alive(keep_alive && !shared_.stopping);
    response_.prepare_payload();
    status_ = response.status;
    beast::get_lowest_layer(stream_).expires_after(std::chrono::milliseconds(shared_.config.write_timeout_ms));
    http::async_write(stream_, response_, [self = this->shared_from_this()](beast::error_code error, std::size_t bytes) {
      self->on_write(error, bytes);
    });
  }

  void on_write(beast::error_code error, std::size_t bytes) {
    const double milliseconds = std::chrono::duration<double, std::milli>(Clock::now() - started_).count();
    shared_.metrics.record_request(method_.empty() ? "-" : method_, route_.pattern, status_, milliseconds / 1000);
    spdlog::info("request method={} route={} status={} ms={:.2f} bytes_in={} bytes_out={}", method_.empty() ? "-" : method_,
                 route_.pattern, status_, milliseconds, bytes_in_, bytes);
    if (counted_) --shared_.requests_in_flight;
    const bool again = !error && response_.keep_alive() && !shared_.stopping;
    if (!again) return close();
    route_ = {};
    method_.clear();
    bytes_in_ = 0;
    started_ = {};
    read_header(true);
  }

  void close() {
    beast::error_code ignored;
    if constexpr (std::is_same_v<Stream, beast::ssl_stream<beast::tcp_stream>>) {
      beast::get_lowest_layer(stream_).expires_after(std::chrono::seconds(2));
      stream_.async_shutdown([self = this->shared_from_this()](beast::error_code) {
        beast::error_code ignored_too;
        beast::get_lowest_layer(self->stream_).socket().close(ignored_too);
      });
    } else {
      stream_.socket().shutdown(tcp::socket::shutdown_send, ignored);
      stream_.socket().close(ignored);
    }
  }

  Stream stream_;
  Shared& shared_;
  beast::flat_buffer buffer_;
  std::optional<http::request_parser<http::string_body>> parser_;
  http::response<http::string_body> response_;
  RouteInfo route_;
  std::string method_;
  std::size_t bytes_in_ = 0;
  bool keep_alive_ = false;
  bool counted_ = false;
  int status_ = 0;
  Clock::time_point started_{};
};

}  // namespace

struct HttpServer::Impl {
  Impl(const ServerConfig& config, Api& api, Metrics& metrics)
      : config(config),
        workers(config.worker_threads),
        shared{config, api, metrics, workers},
        acceptor(io),
        tls(asio::ssl::context::tls_server) {}

  void accept() {
    acceptor.async_accept(asio::make_strand(io), [this](beast::error_code error, tcp::socket socket) {
      if (error) {
        if (error != asio::error::operation_aborted) spdlog::warn("accept failed: {}", error.message());
        if (!acceptor.is_open()) return;
      } else {
        socket.set_option(tcp::no_delay(true), error);
        if (tls_enabled) {
          std::make_shared<Session<beast::ssl_stream<beast::tcp_stream>>>(
              beast::ssl_stream<beast::tcp_stream>(beast::tcp_stream(std::move(socket)), tls), shared)
              ->start();
        } else {
          std::make_shared<Session<beast::tcp_stream>>(beast::tcp_stream(std::move(socket)), shared)->start();
        }
      }
      accept();
    });
  }

  // Waits for in-flight requests, then stops the I/O threads.
  void drain(Clock::time_point deadline) {
    if (shared.requests_in_flight == 0 || Clock::now() >= deadline) {
      if (shared.requests_in_flight != 0) {
        spdlog::warn("shutdown: {} requests still running after shutdown_timeout_ms; stopping anyway",
                     shared.requests_in_flight.load());
      }
      io.stop();
      return;
    }
    drain_timer.expires_after(std::chrono::milliseconds(20));
    drain_timer.async_wait([this, deadline](beast::error_code) { drain(deadline); });
  }

  const ServerConfig& config;
  asio::io_context io;
  asio::thread_pool workers;
  Shared shared;
  tcp::acceptor acceptor;
  asio::ssl::context tls;
  bool tls_enabled = false;
  asio::steady_timer drain_timer{io};
};

HttpServer::HttpServer(const ServerConfig& config, Api& api, Metrics& metrics)
    : impl_(std::make_unique<Impl>(config, api, metrics)) {}

HttpServer::~HttpServer() {
  impl_->workers.join();
}

Status HttpServer::listen() {
  Impl& impl = *impl_;
  beast::error_code error;
  const asio::ip::address address = asio::ip::make_address(impl.config.listen_address, error);
  if (error) return invalid_argument("listen_address '" + impl.config.listen_address + "' is not an IP address", "listen_address");
  if (!impl.config.tls_certificate_file.empty()) {
    impl.tls.use_certificate_chain_file(impl.config.tls_certificate_file, error);
    if (error) return Status(StatusCode::io_error, "cannot load tls_certificate_file: " + error.message(), "tls_certificate_file");
    impl.tls.use_private_key_file(impl.config.tls_private_key_file, asio::ssl::context::pem, error);
    if (error) return Status(StatusCode::io_error, "cannot load tls_private_key_file: " + error.message(), "tls_private_key_file");
    impl.tls.set_options(asio::ssl::context::default_workarounds | asio::ssl::context::no_sslv2 |
                         asio::ssl::context::no_sslv3 | asio::ssl::context::no_tlsv1 | asio::ssl::context::no_tlsv1_1);
    impl.tls_enabled = true;
  }
  const tcp::endpoint endpoint(address, impl.config.port);
  impl.acceptor.open(endpoint.protocol(), error);
  if (!error) impl.acceptor.set_option(asio::socket_base::reuse_address(true), error);
  if (!error) impl.acceptor.bind(endpoint, error);
  if (!error) impl.acceptor.listen(asio::socket_base::max_listen_connections, error);
  if (error) {
    return Status(StatusCode::io_error, "cannot listen on " + impl.config.listen_address + ":" +
                                            std::to_string(impl.config.port) + ": " + error.message(), "port");
  }
  return Status::ok();
}

std::uint16_t HttpServer::port() const { return impl_->acceptor.local_endpoint().port(); }
bool HttpServer::uses_tls() const { return impl_->tls_enabled; }

void HttpServer::run(const std::function<void()>& on_started) {
  Impl& impl = *impl_;
  asio::signal_set signals(impl.io, SIGINT, SIGTERM);
  signals.async_wait([&impl](beast::error_code error, int signal) {
    if (error) return;
    spdlog::info("signal {}: no new connections; finishing {} in-flight requests", signal,
                 impl.shared.requests_in_flight.load());
    impl.shared.stopping = true;
    beast::error_code ignored;
    impl.acceptor.close(ignored);
    impl.drain(Clock::now() + std::chrono::milliseconds(impl.config.shutdown_timeout_ms));
  });
  impl.accept();
  std::vector<std::thread> threads;
  for (std::size_t i = 1; i < impl.config.io_threads; ++i) threads.emplace_back([&impl] { impl.io.run(); });
  on_started();
  impl.io.run();
  for (std::thread& thread : threads) thread.join();
  impl.workers.join();  // work already handed to the pool finishes; its replies are dropped
}

}  // namespace waymark::server
