#include "server/request_json.h"

#include <cmath>
#include <cstdio>
#include <ctime>

#include "sketch/geometry/formats.h"

namespace waymark::server {
namespace {

std::string path_of(const std::string& prefix, const char* field) { return prefix + field; }

Status wrong_type(const std::string& where, const char* expected) {
  return invalid_argument(where + " must be " + expected, where);
}

// One past the end of the object or array that starts at `begin`, found by its brackets and
// strings alone; whoever reads the value checks it.
std::optional<std::size_t> end_of_container(std::string_view text, std::size_t begin) {
  int depth = 0;
  bool in_string = false;
  for (std::size_t i = begin; i < text.size(); ++i) {
    const char c = text[i];
    if (in_string) {
      if (c == '\\') {
        ++i;
      } else if (c == '"') {
        in_string = false;
      }
    } else if (c == '"') {
      in_string = true;
    } else if (c == '{' || c == '[') {
      ++depth;
    } else if ((c == '}' || c == ']') && --depth == 0) {
      return i + 1;
    }
  }
  return std::nullopt;
}

}  // namespace

std::optional<PlainBulkLine> read_plain_bulk_line(std::string_view line, const ShapeLimits& limits) {
  std::size_t at = 0;
  auto skip_spaces = [&] {
    while (at < line.size() && (line[at] == ' ' || line[at] == '\t' || line[at] == '\n' || line[at] == '\r')) ++at;
  };
  auto take = [&](char c) {
    if (at >= line.size() || line[at] != c) return false;
    ++at;
    return true;
  };
  auto read_plain_string = [&](std::optional<std::string_view>& out) {
    if (!take('"')) return false;
    const std::size_t begin = at;
    while (at < line.size() && line[at] != '"') {
      const unsigned char c = static_cast<unsigned char>(line[at]);
      if (c < 0x20 || c > 0x7e || c == '\\') return false;
      ++at;
    }
    if (at == line.size()) return false;
    out = line.substr(begin, at - begin);
    ++at;
    return true;
  };
  auto read_object = [&](std::optional<std::string_view>& out) {
    if (at >= line.size() || line[at] != '{') return false;
    const std::optional<std::size_t> end = end_of_container(line, at);
    if (!end) return false;
    out = line.substr(at, *end - at);
    at = *end;
    return true;
  };
  std::optional<std::string_view> id, geometry, metadata;
  skip_spaces();
  if (!take('{')) return std::nullopt;
  while (true) {
    std::optional<std::string_view> key;
    skip_spaces();
    if (!read_plain_string(key)) return std::nullopt;
    skip_spaces();
    if (!take(':')) return std::nullopt;
    skip_spaces();
    // A member given twice is left to the general reading.
    if (!((*key == "id" && !id && read_plain_string(id)) || (*key == "geometry" && !geometry && read_object(geometry)) ||
          (*key == "metadata" && !metadata && read_object(metadata)))) {
      return std::nullopt;
    }
    skip_spaces();
    if (take('}')) break;
    if (!take(',')) return std::nullopt;
  }
  skip_spaces();
  if (at != line.size() || !id || id->empty() || !geometry) return std::nullopt;
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
