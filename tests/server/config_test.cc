// waymarkd's configuration: the documented default file and page stay equal to the built-in
// defaults, and the file < environment < flag precedence with errors that name the source.
#include <catch2/catch.hpp>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "server/config.h"

using namespace waymark;
using namespace waymark::server;

namespace {

std::string read_text(const std::string& path) {
  std::ifstream in(path);
  std::stringstream text;
  text << in.rdbuf();
  return text.str();
}

struct TemporaryFile {
  explicit TemporaryFile(const std::string& text) {
    path = std::string("/tmp/waymark-config-test-") + std::to_string(::getpid()) + ".json";
    std::ofstream(path) << text;
  }
  ~TemporaryFile() { std::remove(path.c_str()); }
  std::string path;
};

}  // namespace

TEST_CASE("DefaultFileAndPageMatchTheBuiltInDefaults") {
  const nlohmann::json defaults = nlohmann::json::parse(default_config_json());
  const nlohmann::json file = nlohmann::json::parse(read_text(WAYMARK_SOURCE_DIR "/config/waymarkd.json"));
  CHECK(file == defaults);
  const std::string page = read_text(WAYMARK_SOURCE_DIR "/config/README.md");
  for (const auto& [field, value] : defaults.items()) {
    INFO("field " << field);
    // Each field has a table row "| `field` | `default` | ...".
    const std::string shown = value.is_string() ? value.get<std::string>().empty() ? "\"\"" : value.get<std::string>()
                                                : value.dump();
    CHECK(page.find("| `" + field + "` | `" + shown + "` |") != std::string::npos);
  }
  // The defaults load and validate as they are.
  Result<ServerConfig> config = load_config({"--config", WAYMARK_SOURCE_DIR "/config/waymarkd.json"}, {});
  REQUIRE(config.is_ok());
  CHECK(config->listen_address == "127.0.0.1");
}

TEST_CASE("FileThenEnvironmentThenFlags") {
  TemporaryFile file(R"({"port": 8100, "worker_threads": 3, "log_level": "warn"})");
  Result<ServerConfig> from_file = load_config({"--config", file.path}, {});
  REQUIRE(from_file.is_ok());
  CHECK(from_file->port == 8100);
  CHECK(from_file->worker_threads == 3);

  Result<ServerConfig> environment = load_config({"--config", file.path}, {{"WAYMARK_PORT", "8200"}});
  REQUIRE(environment.is_ok());
  CHECK(environment->port == 8200);
  CHECK(environment->worker_threads == 3);

  Result<ServerConfig> flags =
      load_config({"--config", file.path, "--port=8300", "--write-tokens", "aaaaaaaaaaaaaaaa,bbbbbbbbbbbbbbbb"},
                  {{"WAYMARK_PORT", "8200"}, {"WAYMARK_REAUSE", "ignored: not a field name, so never read"}});
  REQUIRE(flags.is_ok());
  CHECK(flags->port == 8300);
  CHECK(flags->write_tokens == std::vector<std::string>{"aaaaaaaaaaaaaaaa", "bbbbbbbbbbbbbbbb"});

  Result<ServerConfig> via_environment_file = load_config({}, {{"WAYMARK_CONFIG", file.path}});
  REQUIRE(via_environment_file.is_ok());
  CHECK(via_environment_file->log_level == "warn");
}

TEST_CASE("ConfigurationErrorsNameSourceAndField") {
  TemporaryFile typo(R"({"prot": 1})");
  Result<ServerConfig> unknown = load_config({"--config", typo.path}, {});
  REQUIRE_FALSE(unknown.is_ok());
  CHECK(unknown.status().message().find("unknown field 'prot'") != std::string::npos);

  TemporaryFile wrong_type(R"({"port": "eighty"})");
  Result<ServerConfig> typed = load_config({"--config", wrong_type.path}, {});
  REQUIRE_FALSE(typed.is_ok());
  CHECK(typed.status().message().find("field 'port' must be a non-negative integer") != std::string::npos);

  TemporaryFile broken("{\n  \"port\": 1,\n  oops\n}");
  Result<ServerConfig> syntax = load_config({"--config", broken.path}, {});
  REQUIRE_FALSE(syntax.is_ok());
  CHECK(syntax.status().message().find("not valid JSON") != std::string::npos);

  Result<ServerConfig> environment = load_config({}, {{"WAYMARK_IO_THREADS", "two"}});
  REQUIRE_FALSE(environment.is_ok());
  CHECK(environment.status().message().find("WAYMARK_IO_THREADS") != std::string::npos);

  CHECK(load_config({"--no-such-flag", "1"}, {}).status().message().find("unknown flag --no-such-flag") !=
        std::string::npos);
  CHECK(load_config({"--port", "70000"}, {}).status().where() == "port");
  CHECK(load_config({"--worker-threads", "0"}, {}).status().where() == "worker_threads");
  CHECK(load_config({"--tls-certificate-file", "/x.pem"}, {}).status().where() == "tls_certificate_file");
  CHECK(load_config({"--log-level", "loud"}, {}).status().where() == "log_level");
  CHECK(load_config({"--port"}, {}).status().message().find("needs a value") != std::string::npos);
  CHECK(load_config({}, {{"WAYMARK_CONFIG", "/no/such/file.json"}}).status().code() == StatusCode::not_found);

  // A short token is refused, and no error ever repeats a token's text.
  Result<ServerConfig> short_token = load_config({"--write-tokens", "short-secret"}, {});
  REQUIRE_FALSE(short_token.is_ok());
  CHECK(short_token.status().to_string().find("short-secret") == std::string::npos);
  Result<ServerConfig> bad_list = load_config({}, {{"WAYMARK_READ_TOKENS", "aaaaaaaaaaaaaaaaaa,tiny"}});
  REQUIRE_FALSE(bad_list.is_ok());
  CHECK(bad_list.status().to_string().find("tiny") == std::string::npos);
}
