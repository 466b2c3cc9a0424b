// `waymark nearest`, `stats` and `export`: reading from a running waymarkd over HTTP.
#include "clients/cli/server_commands.h"

#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>

#include "clients/cli/server_connection.h"
#include "clients/cli/shape_sources.h"
#include "sketch/geometry/plain_json.h"

namespace waymark::cli {
namespace {

using Json = nlohmann::json;

int usage(const char* text, const Result<Arguments>& arguments) {
  if (!arguments) std::cerr << "waymark: " << arguments.status().to_string() << "\n";
  std::cerr << text;
  return kExitUsage;
}

int server_failure(const char* command, const Status& status) {
  std::cerr << "waymark " << command << ": " << status.message() << "\n";
  return kExitServer;
}

std::string collection_path(const std::string& name) { return "/v1/collections/" + url_encode(name); }

std::string clipped(std::string text, std::size_t width) {
  if (text.size() > width) text = text.substr(0, width - 3) + "...";
  return text;
}

std::string number_text(const Json& value, const char* format = "%.6g") {
  if (!value.is_number()) return value.dump();
  char text[40];
  std::snprintf(text, sizeof text, format, value.get<double>());
  return text;
}

// A shape operand becomes the request's "shape". A file the bulk loader reads (GeoJSON, WKT
// lines, SVG, NDJSON) must hold exactly one shape; other text is sent as it is: JSON (GeoJSON or
// point arrays) as JSON, anything else (WKT, SVG path data) as a string for the server to parse.
Result<Json> shape_operand(const std::string& operand) {
  std::error_code error;
  if (operand.size() < 4096 && std::filesystem::is_regular_file(operand, error) && format_of(operand)) {
    std::vector<SourceShape> shapes;
    std::vector<SourceProblem> problems;
    read_shape_file(operand, {}, [&](SourceShape&& shape) { shapes.push_back(std::move(shape)); }, problems);
    if (!problems.empty()) {
      return Status(StatusCode::invalid_argument, problems.front().reason, problems.front().where);
    }
    if (shapes.size() != 1) {
      return Status(StatusCode::invalid_argument,
                    operand + " holds " + std::to_string(shapes.size()) + " shapes; a query takes exactly one", "shape");
    }
    return std::move(shapes.front().geometry);
  }
  Result<std::string> text = read_shape_argument(operand);
  if (!text) return text.status();
  const std::size_t first = text->find_first_not_of(" \t\r\n");
  if (first != std::string::npos && ((*text)[first] == '{' || (*text)[first] == '[')) {
    Json parsed = Json::parse(*text, nullptr, false);
    if (parsed.is_discarded()) return Status(StatusCode::invalid_argument, "the shape looks like JSON but does not parse", "shape");
    if (parsed.is_object() && parsed.value("type", "") == "Feature" && parsed.contains("geometry")) return parsed["geometry"];
    return parsed;
  }
  return Json(*text);
}

// A page of a listing in the plain form the server writes it, {"next_after": null or a plain
// string, "shapes": [{"geometry": {...}, "id": a plain string, "metadata": {...}}, ...]}, as
// the features of an export, each written from the page's text (geometry and metadata copied,
// not parsed and printed again) exactly as a JSON document of it would print. nullopt for any
// other page, which is then read as a document.
struct ExportPage {
  std::vector<std::string> features;
  std::optional<std::string> next_after;
};
std::optional<ExportPage> plain_export_page(std::string_view text) {
  PlainJsonCursor cursor(text);
  ExportPage page;
  bool has_next = false, has_shapes = false;
  // One shape: its members in the order the server writes them.
  auto read_shape = [&]() {
    std::string_view geometry, id, metadata;
    int member = 0;
    const bool plain = cursor.read_object([&](std::string_view name) {
      switch (member++) {
        case 0: return name == "geometry" && cursor.skip_object(geometry);
        case 1: return name == "id" && cursor.read_plain_string(id);
        case 2: return name == "metadata" && cursor.skip_object(metadata);
        default: return false;
      }
    });
    if (!plain || member != 3) return false;
    std::string feature = "{\"geometry\":";
    feature.append(geometry).append(",\"id\":\"").append(id).append("\",\"properties\":");
    feature.append(metadata).append(",\"type\":\"Feature\"}");
    page.features.push_back(std::move(feature));
    return true;
  };
  const bool plain = cursor.read_object([&](std::string_view key) {
    std::string_view value;
    if (key == "next_after" && !has_next) {
      has_next = true;
      if (cursor.take_null()) return true;
      if (!cursor.read_plain_string(value)) return false;
      page.next_after = std::string(value);
      return true;
    }
    if (key == "shapes" && !has_shapes) {
      has_shapes = true;
      return cursor.read_array(read_shape);
    }
    return false;
  });
  cursor.skip_spaces();
  if (!plain || !cursor.at_end() || !has_next || !has_shapes) return std::nullopt;
  return page;
}

// The features of a page read as a JSON document (any page plain_export_page leaves).
ExportPage export_page_of(Json& page) {
  ExportPage out;
  for (Json& shape : page["shapes"]) {
    const Json feature = {{"type", "Feature"},
                          {"id", shape["id"]},
                          {"geometry", std::move(shape["geometry"])},
                          {"properties", std::move(shape["metadata"])}};
    out.features.push_back(feature.dump());
  }
  if (!page["next_after"].is_null()) out.next_after = page["next_after"].get<std::string>();
  return out;
}

}  // namespace

int nearest_command(const std::vector<std::string>& words) {
  constexpr const char* kUsage =
      "usage: waymark nearest COLLECTION (SHAPE | --id ID) [--k N] [--metric hausdorff|frechet|discrete-frechet|sketch]\n"
      "                       [--exact] [--candidates N] [--filter JSON] [--json] [--server URL] [--token TOKEN]\n"
      "  SHAPE is a file with one shape (.geojson, .json, .wkt, .svg, ...) or inline WKT, GeoJSON,\n"
      "  SVG path data or point arrays.\n";
  Result<Arguments> arguments =
      Arguments::parse(words, with_server_flags({"id", "k", "metric", "candidates", "filter"}), {"exact", "json"});
  if (!arguments) return usage(kUsage, arguments);
  const auto& operands = arguments->operands();
  const bool by_id = arguments->has("id");
  if (operands.size() != (by_id ? 1u : 2u)) return usage(kUsage, arguments);
  Json request = {{"mode", arguments->has("exact") ? "exact" : "fast"}};
  if (by_id) {
    request["id"] = *arguments->value("id");
  } else {
    Result<Json> shape = shape_operand(operands[1]);
    if (!shape) {
      std::cerr << "waymark nearest: " << shape.status().to_string() << "\n";
      return kExitUsage;
    }
    request["shape"] = std::move(*shape);
  }
  for (const char* flag : {"k", "candidates"}) {
    if (!arguments->has(flag)) continue;
    Result<std::uint64_t> value = arguments->count(flag, 0);
    if (!value) return usage(kUsage, Result<Arguments>(value.status()));
    request[flag] = *value;
  }
  if (auto metric = arguments->value("metric")) request["metric"] = *metric;
  if (auto filter = arguments->value("filter")) {
    request["filter"] = Json::parse(*filter, nullptr, false);
    if (!request["filter"].is_object()) {
      std::cerr << "waymark nearest: --filter must be a JSON object, like {\"material\": \"steel\"}\n";
      return kExitUsage;
    }
  }
  Result<std::unique_ptr<HttpClient>> client = connect_from(*arguments);
  if (!client) return server_failure("nearest", client.status());
  Result<Json> answer = json_reply((*client)->send("POST", collection_path(operands[0]) + "/nearest", request.dump()));
  if (!answer) return server_failure("nearest", answer.status());
  if (arguments->has("json")) {
    std::cout << answer->dump(2) << "\n";
    return kExitDone;
  }
  std::printf("%3s  %-24s %12s %12s  %s\n", "#", "id", "distance", "sketch", "metadata");
  std::size_t rank = 0;
  for (const Json& hit : (*answer)["results"]) {
    std::printf("%3zu  %-24s %12s %12s  %s\n", ++rank, clipped(hit["id"].get<std::string>(), 24).c_str(),
                number_text(hit["distance"]).c_str(), number_text(hit["sketch_distance"]).c_str(),
                clipped(hit["metadata"].dump(), 60).c_str());
  }
  const Json& stats = (*answer)["stats"];
  std::printf("%s; %s; %.2f ms (%.2f in the vector index), %s candidates, %s exact evaluations\n",
              (*answer)["certified"].get<bool>() ? "certified" : "not certified",
              (*answer)["guarantee"].get<std::string>().c_str(), stats["milliseconds"].get<double>(),
              stats.value("index_milliseconds", 0.0), stats["candidates_fetched"].dump().c_str(),
              stats["exact_evaluations"].dump().c_str());
  return kExitDone;
}

int stats_command(const std::vector<std::string>& words) {
  constexpr const char* kUsage = "usage: waymark stats [COLLECTION] [--json] [--server URL] [--token TOKEN]\n";
  Result<Arguments> arguments = Arguments::parse(words, with_server_flags({}), {"json"});
  if (!arguments || arguments->operands().size() > 1) return usage(kUsage, arguments);
  Result<std::unique_ptr<HttpClient>> client = connect_from(*arguments);
  if (!client) return server_failure("stats", client.status());
  const bool one = arguments->operands().size() == 1;
  Result<Json> reply = json_reply((*client)->send("GET", one ? collection_path(arguments->operands()[0]) : "/v1/collections"));
  if (!reply) return server_failure("stats", reply.status());
  if (arguments->has("json")) {
    std::cout << reply->dump(2) << "\n";
    return kExitDone;
  }
  if (!one) {
    std::printf("%-24s %10s %-9s %-11s %-16s %9s\n", "collection", "shapes", "frame", "index", "metric", "landmarks");
    for (const Json& c : (*reply)["collections"]) {
      std::printf("%-24s %10s %-9s %-11s %-16s %9s\n", clipped(c["name"], 24).c_str(), c["stats"]["shapes"].dump().c_str(),
                  c["frame"].get<std::string>().c_str(), c["index"].get<std::string>().c_str(),
                  c["default_metric"].get<std::string>().c_str(), c["landmarks"]["count"].dump().c_str());
    }
    return kExitDone;
  }
  const Json& c = *reply;
  const Json& landmarks = c["landmarks"];
  const Json& stats = c["stats"];
  std::printf("collection       %s\n", c["name"].get<std::string>().c_str());
  std::printf("shapes           %s\n", stats["shapes"].dump().c_str());
  std::printf("frame            %s\n", c["frame"].get<std::string>().c_str());
  std::printf("index            %s\n", c["index"].get<std::string>().c_str());
  std::printf("default metric   %s\n", c["default_metric"].get<std::string>().c_str());
  std::printf("landmarks        %s, %s, generation %s, domain %s\n", landmarks["count"].dump().c_str(),
              landmarks["layout"].get<std::string>().c_str(), landmarks["generation"].dump().c_str(),
              landmarks["domain"].dump().c_str());
  std::printf("store bytes      %s\n", stats["store_bytes"].dump().c_str());
  std::printf("index bytes      %s\n", stats["index_bytes"].dump().c_str());
  std::printf("last write       %s\n", stats["last_write"].is_null() ? "never" : stats["last_write"].get<std::string>().c_str());
  if (stats.contains("approximate_index") && !stats["approximate_index"].is_null()) {
    std::printf("approximate index %s\n", stats["approximate_index"].dump().c_str());
  }
  return kExitDone;
}

int export_command(const std::vector<std::string>& words) {
  constexpr const char* kUsage =
      "usage: waymark export COLLECTION [--output FILE] [--server URL] [--token TOKEN]\n"
      "  Writes every stored shape as a GeoJSON FeatureCollection (id, geometry, metadata as properties),\n"
      "  in id order, to FILE (replaced only once complete) or to standard output.\n";
  Result<Arguments> arguments = Arguments::parse(words, with_server_flags({"output"}), {});
  if (!arguments || arguments->operands().size() != 1) return usage(kUsage, arguments);
  Result<std::unique_ptr<HttpClient>> client = connect_from(*arguments);
  if (!client) return server_failure("export", client.status());
  const std::string collection = arguments->operands()[0];
  const std::optional<std::string> output = arguments->value("output");
  const std::string partial = output ? *output + ".partial" : "";
  std::ofstream file;
  if (output) {
    file.open(partial, std::ios::binary | std::ios::trunc);
    if (!file) return server_failure("export", Status(StatusCode::io_error, "cannot write " + partial));
  }
  std::ostream& out = output ? static_cast<std::ostream&>(file) : std::cout;
  out << "{\"type\":\"FeatureCollection\",\"features\":[";
  std::size_t count = 0;
  std::string after;
  while (true) {
    std::string target = collection_path(collection) + "/shapes?limit=1000";
    if (!after.empty()) target += "&after=" + url_encode(after);
    Result<HttpReply> reply = (*client)->send("GET", target);
    std::optional<ExportPage> page;
    if (reply && reply->status == 200) page = plain_export_page(reply->body);
    if (!page) {
      Result<Json> document = json_reply(reply);
      if (!document) {
        if (output) std::filesystem::remove(partial);
        return server_failure("export", document.status());
      }
      page = export_page_of(*document);
    }
    for (const std::string& feature : page->features) out << (count++ == 0 ? "\n" : ",\n") << feature;
    if (!page->next_after) break;
    after = *page->next_after;
  }
  out << "\n]}\n";
  out.flush();
  if (output) {
    file.close();
    std::error_code error;
    if (!file || (std::filesystem::rename(partial, *output, error), error)) {
      std::filesystem::remove(partial);
      return server_failure("export", Status(StatusCode::io_error, "cannot write " + *output));
    }
  }
  std::cerr << "waymark export: " << count << " shapes from " << collection << "\n";
  return kExitDone;
}

}  // namespace waymark::cli
