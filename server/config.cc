#include "server/config.h"

#include <algorithm>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

namespace waymark::server {
namespace {

using Json = nlohmann::ordered_json;

// The one table of fields and their defaults (config/waymarkd.json mirrors it).
const Json& defaults() {
  static const Json table = {
      {"data_directory", "waymark-data"},
      {"listen_address", "127.0.0.1"},
      {"port", 7700},
      {"io_threads", 1},
      {"worker_threads", 2},
      {"max_body_bytes", 4 * 1024 * 1024},
      {"max_bulk_body_bytes", 512 * 1024 * 1024},
      {"min_free_disk_bytes", 64 * 1024 * 1024},
      {"block_cache_bytes", 512 * 1024 * 1024},
      {"resident_copy_bytes", 1024 * 1024 * 1024},
      {"bulk_batch_size", 1000},
      {"max_vertices", 100000},
      {"max_k", 1000},
      {"max_candidates", 1000000},
      {"max_range_results", 10000},
      {"max_concurrent_queries", 64},
      {"read_timeout_ms", 30000},
      {"write_timeout_ms", 30000},
      {"idle_timeout_ms", 60000},
      {"shutdown_timeout_ms", 20000},
      {"slow_query_ms", 250},
      {"approximate_index_minimum_size", 2000},
      {"approximate_index_rebuild_percent", 10},
      {"read_tokens", Json::array()},
      {"write_tokens", Json::array()},
      {"reads_require_token", false},
      {"tls_certificate_file", ""},
      {"tls_private_key_file", ""},
      {"log_level", "info"},
  };
  return table;
}

bool is_secret(const std::string& field) { return field.ends_with("_tokens"); }

// Converts one textual value (environment or flag) to the type of the field's default.
Result<Json> from_text(const std::string& field, const std::string& text, const std::string& source) {
  const Json& model = defaults().at(field);
  auto wrong = [&](const std::string& expected) {
    return invalid_argument(source + ": expected " + expected + (is_secret(field) ? "" : ", got '" + text + "'"), source);
  };
  if (model.is_boolean()) {
    if (text == "true" || text == "1") return Json(true);
    if (text == "false" || text == "0") return Json(false);
    return wrong("true or false");
  }
  if (model.is_number_integer()) {
    if (text.empty() || !std::all_of(text.begin(), text.end(), [](char c) { return c >= '0' && c <= '9'; }) ||
        text.size() > 18) {
      return wrong("a non-negative integer");
    }
    return Json(std::stoull(text));
  }
  if (model.is_array()) {
    Json list = Json::array();
    std::stringstream stream(text);
    for (std::string item; std::getline(stream, item, ',');) {
      if (!item.empty()) list.push_back(item);
    }
    return list;
  }
  return Json(text);
}

// Checks a value from the file against the field's type.
Status check_type(const std::string& field, const Json& value, const std::string& source) {
  const Json& model = defaults().at(field);
  const std::string where = source + ": field '" + field + "'";
  if (model.is_boolean() && !value.is_boolean()) return invalid_argument(where + " must be true or false", where);
  if (model.is_number_integer() && !value.is_number_unsigned()) {
    return invalid_argument(where + " must be a non-negative integer", where);
  }
  if (model.is_string() && !value.is_string()) return invalid_argument(where + " must be a string", where);
  if (model.is_array()) {
    if (!value.is_array()) return invalid_argument(where + " must be a list of strings", where);
    for (const Json& item : value) {
      if (!item.is_string()) return invalid_argument(where + " must be a list of strings", where);
    }
  }
  return Status::ok();
}

Status set_field(Json& merged, const std::string& field, Json value, const std::string& source) {
  if (!defaults().contains(field)) return invalid_argument(source + ": unknown field '" + field + "'", source);
  if (Status s = check_type(field, value, source); !s.is_ok()) return s;
  merged[field] = std::move(value);
  return Status::ok();
}

Result<ServerConfig> to_config(const Json& merged) {
  ServerConfig config;
  auto size = [&](const char* field) { return merged.at(field).get<std::size_t>(); };
  config.data_directory = merged.at("data_directory").get<std::string>();
  config.listen_address = merged.at("listen_address").get<std::string>();
  if (size("port") > 65535) return invalid_argument("port must be at most 65535", "port");
  config.port = static_cast<std::uint16_t>(size("port"));
  config.io_threads = size("io_threads");
  config.worker_threads = size("worker_threads");
  config.max_body_bytes = size("max_body_bytes");
  config.max_bulk_body_bytes = size("max_bulk_body_bytes");
  config.min_free_disk_bytes = size("min_free_disk_bytes");
  config.block_cache_bytes = size("block_cache_bytes");
  config.resident_copy_bytes = size("resident_copy_bytes");
  config.bulk_batch_size = size("bulk_batch_size");
  config.max_vertices = size("max_vertices");
  config.max_k = size("max_k");
  config.max_candidates = size("max_candidates");
  config.max_range_results = size("max_range_results");
  config.max_concurrent_queries = size("max_concurrent_queries");
  config.read_timeout_ms = size("read_timeout_ms");
  config.write_timeout_ms = size("write_timeout_ms");
  config.idle_timeout_ms = size("idle_timeout_ms");
  config.shutdown_timeout_ms = size("shutdown_timeout_ms");
  config.slow_query_ms = size("slow_query_ms");
  config.approximate_index_minimum_size = size("approximate_index_minimum_size");
  config.approximate_index_rebuild_percent = size("approximate_index_rebuild_percent");
  if (config.approximate_index_rebuild_percent == 0 || config.approximate_index_rebuild_percent > 1000) {
    return invalid_argument("approximate_index_rebuild_percent must be between 1 and 1000",
                            "approximate_index_rebuild_percent");
  }
  config.read_tokens = merged.at("read_tokens").get<std::vector<std::string>>();
  config.write_tokens = merged.at("write_tokens").get<std::vector<std::string>>();
  config.reads_require_token = merged.at("reads_require_token").get<bool>();
  config.tls_certificate_file = merged.at("tls_certificate_file").get<std::string>();
  config.tls_private_key_file = merged.at("tls_private_key_file").get<std::string>();
  config.log_level = merged.at("log_level").get<std::string>();

  for (const char* field : {"io_threads", "worker_threads", "max_body_bytes", "max_bulk_body_bytes", "bulk_batch_size",
                            "max_vertices", "max_k", "max_candidates", "max_range_results", "max_concurrent_queries",
                            "read_timeout_ms", "write_timeout_ms", "idle_timeout_ms"}) {
    if (size(field) == 0) return invalid_argument(std::string(field) + " must be at least 1", field);
  }
  if (config.data_directory.empty()) return invalid_argument("data_directory must not be empty", "data_directory");
  if (config.tls_certificate_file.empty() != config.tls_private_key_file.empty()) {
    return invalid_argument("TLS needs both tls_certificate_file and tls_private_key_file", "tls_certificate_file");
  }
  for (const auto* tokens : {&config.read_tokens, &config.write_tokens}) {
    for (const std::string& token : *tokens) {
      if (token.size() < 16) {
        return invalid_argument("every token must have at least 16 characters (one does not)",
                                tokens == &config.read_tokens ? "read_tokens" : "write_tokens");
      }
    }
  }
  const std::vector<std::string> levels = {"trace", "debug", "info", "warn", "error"};
  if (std::find(levels.begin(), levels.end(), config.log_level) == levels.end()) {
    return invalid_argument("log_level must be one of trace, debug, info, warn, error", "log_level");
  }
  return config;
}

}  // namespace

std::string default_config_json() { return defaults().dump(2) + "\n"; }

std::string flag_name(const std::string& field) {
  std::string flag = "--" + field;
  std::replace(flag.begin(), flag.end(), '_', '-');
  return flag;
}

std::string environment_name(const std::string& field) {
  std::string name = "WAYMARK_" + field;
  std::transform(name.begin(), name.end(), name.begin(), [](unsigned char c) { return std::toupper(c); });
  return name;
}

Result<ServerConfig> load_config(const std::vector<std::string>& arguments,
                                 const std::map<std::string, std::string>& environment) {
  // Flags first into a list, so that --config is known before the file is read.
  std::vector<std::pair<std::string, std::string>> flags;
  std::string config_file;
  if (auto found = environment.find("WAYMARK_CONFIG"); found != environment.end()) config_file = found->second;
  for (std::size_t i = 0; i < arguments.size(); ++i) {
    const std::string& word = arguments[i];
    if (!word.starts_with("--")) return invalid_argument("unexpected argument '" + word + "'", "argument " + std::to_string(i + 1));
    std::string name = word, value;
    if (const std::size_t equals = word.find('='); equals != std::string::npos) {
      name = word.substr(0, equals);
      value = word.substr(equals + 1);
    } else if (i + 1 < arguments.size()) {
      value = arguments[++i];
    } else {
      return invalid_argument("flag " + name + " needs a value", name);
    }
    if (name == "--config") {
      config_file = value;
    } else {
      flags.emplace_back(name, value);
    }
  }

  Json merged = defaults();
  if (!config_file.empty()) {
    std::ifstream in(config_file);
    if (!in) return Status(StatusCode::not_found, "cannot read the configuration file '" + config_file + "'");
    std::stringstream text;
    text << in.rdbuf();
    Json file;
    try {
      file = Json::parse(text.str());
    } catch (const Json::parse_error& error) {
      return invalid_argument(config_file + ": not valid JSON (byte " + std::to_string(error.byte) + ")",
                              config_file + ", byte " + std::to_string(error.byte));
    } catch (const Json::exception& error) {
      return invalid_argument(config_file + ": not valid JSON: " + error.what(), config_file);
    }
    if (!file.is_object()) return invalid_argument(config_file + ": must hold a JSON object", config_file);
    for (const auto& [field, value] : file.items()) {
      if (Status s = set_field(merged, field, value, config_file); !s.is_ok()) return s;
    }
  }
  for (const auto& [field, unused] : defaults().items()) {
    auto found = environment.find(environment_name(field));
    if (found == environment.end()) continue;
    const std::string source = "environment " + environment_name(field);
    Result<Json> value = from_text(field, found->second, source);
    if (!value) return value.status();
    if (Status s = set_field(merged, field, *value, source); !s.is_ok()) return s;
  }
  for (const auto& [flag, text] : flags) {
    std::string field = flag.substr(2);
    std::replace(field.begin(), field.end(), '-', '_');
    if (!defaults().contains(field)) return invalid_argument("unknown flag " + flag, flag);
    Result<Json> value = from_text(field, text, "flag " + flag);
    if (!value) return value.status();
    if (Status s = set_field(merged, field, *value, "flag " + flag); !s.is_ok()) return s;
  }
  return to_config(merged);
}

}  // namespace waymark::server
