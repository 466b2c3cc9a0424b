#include "server/request_json.h"

#include <cmath>
#include <cstdio>
#include <ctime>

#include "sketch/geometry/formats.h"
#include "sketch/geometry/plain_json.h"

namespace waymark::server {
namespace {

std::string path_of(const std::string& prefix, const char* field) { return prefix + field; }

Status wrong_type(const std::string& where, const char* expected) {
  return invalid_argument(where + " must be " + expected, where);
}

}  // namespace

std::optional<PlainBulkLine> read_plain_bulk_line(std::string_view line, const ShapeLimits& limits) {
  PlainJsonCursor cursor(line);
  std::optional<std::string_view> id, geometry, metadata;
  // Reads the member's value into `slot` unless the member came before (left to the general
  // reading) or its value is not in the plain form.
  auto read_into = [&](std::optional<std::string_view>& slot, bool is_string) {
    std::string_view value;
    if (slot || !(is_string ? cursor.read_plain_string(value) : cursor.skip_object(value))) return false;
    slot = value;
    return true;
  };
  const bool plain = cursor.read_object([&](std::string_view key) {
    return (key == "id" && read_into(id, true)) || (key == "geometry" && read_into(geometry, false)) ||
           (key == "metadata" && read_into(metadata, false));
  });
  if (!plain) return std::nullopt;
  cursor.skip_spaces();
  if (!cursor.at_end() || !id || id->empty() || !geometry) return std::nullopt;
  ParseOptions options;
  options.limits = limits;
  Result<Shape> shape = parse_geojson(*geometry, options);
  if (!shape) return std::nullopt;
  std::string metadata_text = "{}";
  if (metadata) {
    const Json parsed = Json::parse(*metadata, nullptr, false);
    if (parsed.is_discarded() || !parsed.is_object()) return std::nullopt;
    metadata_text = parsed.dump();
  }
  return PlainBulkLine{std::string(*id), std::move(*shape), std::move(metadata_text)};
}

std::string text_position(std::string_view text, std::size_t byte) {
  byte = std::min(byte, text.size());
  std::size_t line = 1, column = 1;
  for (std::size_t i = 0; i < byte; ++i) {
    if (text[i] == '\n') {
      ++line;
      column = 1;
    } else {
      ++column;
    }
  }
  return "line " + std::to_string(line) + ", column " + std::to_string(column) + " (byte " + std::to_string(byte) + ")";
}

Result<Json> parse_object(std::string_view text, bool allow_empty) {
  if (allow_empty && text.find_first_not_of(" \t\r\n") == std::string_view::npos) return Json::object();
  Json value;
  try {
    value = Json::parse(text);
  } catch (const Json::parse_error& error) {
    // nlohmann counts the byte after the offending one; point at the offending one.
    const std::size_t byte = error.byte > 0 ? error.byte - 1 : 0;
    return invalid_argument("the body is not valid JSON", text_position(text, byte));
  } catch (const Json::exception& error) {
    // Well formed, but not representable: a number beyond the range of a double.
    return invalid_argument(std::string("the body is not valid JSON: ") + error.what(), "body");
  }
  if (!value.is_object()) return invalid_argument("the body must be a JSON object", "body");
  return value;
}

Status check_known_fields(const Json& object, std::initializer_list<const char*> known, const std::string& prefix) {
  for (const auto& [key, unused] : object.items()) {
    bool found = false;
    for (const char* name : known) found = found || key == name;
    if (!found) {
      std::string list;
      for (const char* name : known) list += (list.empty() ? "" : ", ") + std::string(name);
      return invalid_argument("unknown field '" + prefix + key + "' (known: " + list + ")", prefix + key);
    }
  }
  return Status::ok();
}

Result<std::size_t> size_field(const Json& object, const char* field, std::size_t fallback, std::size_t minimum,
                               std::size_t maximum, const std::string& prefix) {
  const std::string where = path_of(prefix, field);
  auto found = object.find(field);
  if (found == object.end()) return fallback;
  if (!found->is_number_unsigned()) {  // nlohmann stores every integer ≥ 0 as unsigned
    return wrong_type(where, "a non-negative integer");
  }
  const std::uint64_t value = found->get<std::uint64_t>();
  if (value < minimum || value > maximum) {
    return invalid_argument(where + " must be from " + std::to_string(minimum) + " to " + std::to_string(maximum), where);
  }
  return static_cast<std::size_t>(value);
}

Result<double> number_field(const Json& object, const char* field, double fallback, const std::string& prefix) {
  auto found = object.find(field);
  if (found == object.end()) return fallback;
  if (!found->is_number()) return wrong_type(path_of(prefix, field), "a number");
  return found->get<double>();
}

Result<std::string> string_field(const Json& object, const char* field, const std::string& fallback,
                                 const std::string& prefix) {
  auto found = object.find(field);
  if (found == object.end()) return fallback;
  if (!found->is_string()) return wrong_type(path_of(prefix, field), "a string");
  return found->get<std::string>();
}

Result<bool> bool_field(const Json& object, const char* field, bool fallback, const std::string& prefix) {
  auto found = object.find(field);
  if (found == object.end()) return fallback;
  if (!found->is_boolean()) return wrong_type(path_of(prefix, field), "true or false");
  return found->get<bool>();
}

Result<Shape> shape_field(const Json& object, const char* field, const ShapeLimits& limits) {
  auto found = object.find(field);
  if (found == object.end() || found->is_null()) {
    return invalid_argument(std::string(field) + " is required", field);
  }
  ParseOptions options;
  options.limits = limits;
  Result<Shape> shape = Status(StatusCode::invalid_argument, "unset");
  if (found->is_string()) {
    shape = parse_shape(found->get_ref<const std::string&>(), ShapeFormat::automatic, options);
  } else if (found->is_object()) {
    shape = geojson_from_json(*found, options);
  } else if (found->is_array()) {
    shape = point_arrays_from_json(*found, options);
  } else {
    return wrong_type(field, "a GeoJSON geometry object, a WKT or SVG path string, or point arrays");
  }
  if (!shape) {
    const Status& error = shape.status();
    return Status(error.code(), std::string(field) + ": " + error.message(),
                  error.where().empty() ? std::string(field) : std::string(field) + ": " + error.where());
  }
  return shape;
}

Result<std::string> metadata_field(const Json& object, const char* field) {
  auto found = object.find(field);
  if (found == object.end() || found->is_null()) return std::string("{}");
  if (!found->is_object()) return wrong_type(field, "a JSON object");
  return found->dump();
}

std::string iso_time(std::int64_t unix_ms) {
  const std::time_t seconds = static_cast<std::time_t>(unix_ms / 1000);
  std::tm utc{};
  gmtime_r(&seconds, &utc);
  char text[96];  // room for any int in every field, so the compiler can prove no truncation
  std::snprintf(text, sizeof text, "%04d-%02d-%02dT%02d:%02d:%02d.%03dZ", utc.tm_year + 1900, utc.tm_mon + 1,
                utc.tm_mday, utc.tm_hour, utc.tm_min, utc.tm_sec, static_cast<int>(unix_ms % 1000));
  return text;
}

}  // namespace waymark::server
