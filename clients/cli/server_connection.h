// Shared by the server commands (an implementation detail of clients/cli): building the HTTP
// client from flags and environment, and turning error replies into one readable line.
#pragma once

#include <memory>
#include <nlohmann/json.hpp>
#include <set>
#include <string>

#include "clients/cli/arguments.h"
#include "clients/cli/http_client.h"

namespace waymark::cli {

inline constexpr int kExitDone = 0;
inline constexpr int kExitSomeRejected = 1;
inline constexpr int kExitUsage = 2;
inline constexpr int kExitServer = 3;

// The flags every server command takes, to add to its own.
std::set<std::string> with_server_flags(std::set<std::string> flags);

// --server / WAYMARK_SERVER and --token / WAYMARK_TOKEN.
Result<std::unique_ptr<HttpClient>> connect_from(const Arguments& arguments);

// "HTTP 403 forbidden: the token may only read (where: ...)" from a JSON error reply, with a hint
// for 401/403 about the token.
std::string describe_error_reply(const HttpReply& reply);

// Parses a 2xx reply's JSON body; anything else becomes a Status with describe_error_reply().
Result<nlohmann::json> json_reply(const Result<HttpReply>& reply);

}  // namespace waymark::cli
