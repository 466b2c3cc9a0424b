#include "clients/cli/server_connection.h"

#include <cstdlib>

namespace waymark::cli {

std::set<std::string> with_server_flags(std::set<std::string> flags) {
  flags.insert("server");
  flags.insert("token");
  return flags;
}

Result<std::unique_ptr<HttpClient>> connect_from(const Arguments& arguments) {
  std::string server = "http://127.0.0.1:7700";
  if (const char* environment = std::getenv("WAYMARK_SERVER"); environment && *environment) server = environment;
  server = arguments.value_or("server", server);
  std::string token;
  if (const char* environment = std::getenv("WAYMARK_TOKEN"); environment) token = environment;
  token = arguments.value_or("token", token);
  Result<ServerAddress> address = ServerAddress::parse(server);
  if (!address) return address.status();
  return std::make_unique<HttpClient>(std::move(*address), std::move(token));
}

std::string describe_error_reply(const HttpReply& reply) {
  std::string text = "HTTP " + std::to_string(reply.status);
  const nlohmann::json body = nlohmann::json::parse(reply.body, nullptr, false);
  if (body.is_object() && body.contains("error") && body["error"].is_object()) {
    const nlohmann::json& error = body["error"];
    if (error.contains("code") && error["code"].is_string()) text += " " + error["code"].get<std::string>();
    if (error.contains("message") && error["message"].is_string()) text += ": " + error["message"].get<std::string>();
    if (error.contains("where") && error["where"].is_string() && !error["where"].get<std::string>().empty()) {
      text += " (at " + error["where"].get<std::string>() + ")";
    }
  } else if (!reply.body.empty()) {
    text += ": " + reply.body.substr(0, 200);
  }
  if (reply.status == 401) text += " — give a token with --token or WAYMARK_TOKEN";
  if (reply.status == 403) text += " — this token may not do that; writes need a write token";
  return text;
}

Result<nlohmann::json> json_reply(const Result<HttpReply>& reply) {
  if (!reply) return reply.status();
  if (reply->status < 200 || reply->status >= 300) {
    return Status(reply->status == 404 ? StatusCode::not_found : StatusCode::failed_precondition,
                  describe_error_reply(*reply));
  }
  nlohmann::json body = nlohmann::json::parse(reply->body, nullptr, false);
  if (body.is_discarded()) return Status(StatusCode::internal, "the server's reply is not JSON");
  return body;
}

}  // namespace waymark::cli
