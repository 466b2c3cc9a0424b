#include "clients/cli/shape_sources.h"

#include <algorithm>
#include <cctype>
#include <fstream>
#include <pugixml.hpp>
#include <sstream>

#include "sketch/geometry/plain_json.h"

namespace waymark::cli {

namespace fs = std::filesystem;
using Json = nlohmann::json;

namespace {

std::string lower(std::string text) {
  for (char& c : text) c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return text;
}

// In 1 MB reads straight into the string, reserved at the file's size where it has one (a pipe
// has none). A string stream read an 83 MB file in 20,419 reads of 4 KB and copied it twice.
bool read_file(const fs::path& path, std::string& contents) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return false;
  contents.clear();
  std::error_code error;
  constexpr std::size_t kChunk = 1 << 20;
  if (const std::uintmax_t size = fs::file_size(path, error); !error) contents.reserve(size + kChunk);
  while (true) {
    const std::size_t before = contents.size();
    contents.resize(before + kChunk);
    in.read(contents.data() + before, kChunk);
    contents.resize(before + static_cast<std::size_t>(in.gcount()));
    if (!in) return in.eof() && !in.bad();
  }
}

std::size_t line_at(const std::string& text, std::ptrdiff_t offset) {
  if (offset < 0) return 0;
  const auto end = text.begin() + std::min<std::ptrdiff_t>(offset, static_cast<std::ptrdiff_t>(text.size()));
  return 1 + static_cast<std::size_t>(std::count(text.begin(), end, '\n'));
}

std::string json_error_place(const Json::parse_error& error, const std::string& text) {
  const std::size_t byte = error.byte > 0 ? error.byte - 1 : 0;
  return "line " + std::to_string(line_at(text, static_cast<std::ptrdiff_t>(byte))) + ", byte offset " +
         std::to_string(byte);
}

// A JSON id may be a string or a number (RFC 7946 §3.2 allows both for a feature's id).
std::optional<std::string> id_text(const Json& value) {
  if (value.is_string()) return value.get<std::string>();
  if (value.is_number_integer() || value.is_number_unsigned()) return value.dump();
  if (value.is_number_float()) return value.dump();
  return std::nullopt;
}

// One feature of a plain FeatureCollection, as text (see read_plain_feature_collection).
struct PlainFeature {
  std::string_view id;  // a plain string's text, or a number's token; empty: no "id"
  bool id_is_number = false;
  std::string_view geometry, properties;  // objects; properties empty when absent
};

// The value of a member this reader does not use: a plain string, a number or a container.
bool skip_plain_value(PlainJsonCursor& cursor) {
  std::string_view ignored;
  double number;
  return cursor.read_plain_string(ignored) || cursor.skip_container(ignored) || cursor.read_number(number);
}

// A FeatureCollection read without a JSON document, when the whole text is in the plain form:
// every feature an object of "type": "Feature", an optional "id" (a plain string or a number),
// a "geometry" object, an optional "properties" object and other members of plain values. The
// features in order; nullopt for anything else (a null geometry included), which the document
// reading then handles with its messages. Objects are only passed over by their brackets.
std::optional<std::vector<PlainFeature>> read_plain_feature_collection(std::string_view text) {
  PlainJsonCursor cursor(text);
  std::vector<PlainFeature> features;
  bool is_collection = false, has_features = false;
  // Reads a "type" member's value; whether it is `expected`.
  auto type_is = [&cursor](std::string_view expected) {
    std::string_view value;
    return cursor.read_plain_string(value) && value == expected;
  };
  // One feature; a repeated member gives up (the document reading keeps the last one).
  auto read_feature = [&]() {
    PlainFeature feature;
    bool is_feature = false, has_id = false;
    const bool plain = cursor.read_object([&](std::string_view name) {
      if (name == "type") return is_feature = type_is("Feature");
      if (name == "id") {
        if (has_id) return false;
        has_id = true;
        const std::size_t start = cursor.position();
        double number;
        if (cursor.read_plain_string(feature.id)) return !feature.id.empty();
        if (!cursor.read_number(number)) return false;
        feature.id = text.substr(start, cursor.position() - start);
        feature.id_is_number = true;
        return true;
      }
      if (name == "geometry" || name == "properties") {
        std::string_view& slot = name == "geometry" ? feature.geometry : feature.properties;
        std::string_view value;
        if (!slot.empty() || !cursor.skip_object(value)) return false;
        slot = value;
        return true;
      }
      return skip_plain_value(cursor);
    });
    if (!plain || !is_feature || feature.geometry.empty()) return false;
    features.push_back(feature);
    return true;
  };
  const bool plain = cursor.read_object([&](std::string_view key) {
    if (key == "type") return is_collection = type_is("FeatureCollection");
    if (key == "features") {
      if (has_features) return false;
      has_features = true;
      return cursor.read_array(read_feature);
    }
    return skip_plain_value(cursor);
  });
  cursor.skip_spaces();
  if (!plain || !cursor.at_end() || !is_collection || !has_features) return std::nullopt;
  return features;
}

// JSON text on one line: line breaks between tokens become spaces (JSON strings hold none).
void append_on_one_line(std::string& out, std::string_view json) {
  for (char c : json) out += (c == '\n' || c == '\r') ? ' ' : c;
}

void read_geojson(const fs::path& path, const std::string& text, const SourceOptions& options,
                  const std::function<void(SourceShape&&)>& emit, std::vector<SourceProblem>& problems) {
  const std::string name = path.string();
  const std::string stem = path.stem().string();
  if (options.pass_plain_text) {
    if (const std::optional<std::vector<PlainFeature>> plain = read_plain_feature_collection(text)) {
      for (std::size_t i = 0; i < plain->size(); ++i) {
        const PlainFeature& feature = (*plain)[i];
        std::string where = name + ": feature " + std::to_string(i + 1);
        std::optional<std::string> id;
        if (!options.id_property.empty()) {
          const Json properties = feature.properties.empty() ? Json::object() : Json::parse(feature.properties, nullptr, false);
          if (!properties.is_object() || !properties.contains(options.id_property) ||
              !(id = id_text(properties[options.id_property]))) {
            problems.push_back({where, "has no string or number property \"" + options.id_property + "\" for its id"});
            continue;
          }
        } else if (feature.id_is_number) {
          id = id_text(Json::parse(feature.id));  // written as the document reading writes it
        } else if (!feature.id.empty()) {
          id = std::string(feature.id);
        } else {
          id = stem + "-" + std::to_string(i + 1);
        }
        SourceShape shape{*id, Json(), Json(), where + " (id " + *id + ")", "{\"id\":" + Json(*id).dump() + ",\"geometry\":"};
        append_on_one_line(shape.line, feature.geometry);
        if (!feature.properties.empty()) {
          shape.line += ",\"metadata\":";
          append_on_one_line(shape.line, feature.properties);
        }
        shape.line += '}';
        emit(std::move(shape));
      }
      return;
    }
  }
  Json root;
  try {
    root = Json::parse(text);
  } catch (const Json::parse_error& error) {
    problems.push_back({name + ": " + json_error_place(error, text), "not valid JSON"});
    return;
  } catch (const Json::exception& error) {  // e.g. a number beyond the range of a double
    problems.push_back({name, std::string("not valid JSON: ") + error.what()});
    return;
  }
  if (!root.is_object() || !root.contains("type") || !root["type"].is_string()) {
    problems.push_back({name, "not GeoJSON: the top level must be an object with a \"type\""});
    return;
  }
  const std::string type = root["type"];
  std::vector<const Json*> features;
  if (type == "FeatureCollection") {
    if (!root.contains("features") || !root["features"].is_array()) {
      problems.push_back({name, "a FeatureCollection needs a \"features\" array"});
      return;
    }
    for (const Json& feature : root["features"]) features.push_back(&feature);
  } else if (type == "Feature") {
    features.push_back(&root);
  } else {
    emit({stem, root, Json::object(), name + ": the geometry"});
    return;
  }
  for (std::size_t i = 0; i < features.size(); ++i) {
    const Json& feature = *features[i];
    std::string where = name + ": feature " + std::to_string(i + 1);
    if (!feature.is_object() || feature.value("type", Json()) != "Feature") {
      problems.push_back({where, "not a GeoJSON Feature object"});
      continue;
    }
    Json properties = feature.contains("properties") && feature["properties"].is_object() ? feature["properties"]
                                                                                          : Json::object();
    std::optional<std::string> id;
    if (!options.id_property.empty()) {
      if (!properties.contains(options.id_property) || !(id = id_text(properties[options.id_property]))) {
        problems.push_back({where, "has no string or number property \"" + options.id_property + "\" for its id"});
        continue;
      }
    } else if (feature.contains("id")) {
      id = id_text(feature["id"]);
      if (!id) {
        problems.push_back({where, "its id is neither a string nor a number"});
        continue;
      }
    } else {
      id = stem + "-" + std::to_string(i + 1);
    }
    where += " (id " + *id + ")";
    if (!feature.contains("geometry") || feature["geometry"].is_null()) {
      problems.push_back({where, "has no geometry"});
      continue;
    }
    emit({*id, feature["geometry"], std::move(properties), std::move(where)});
  }
}

bool starts_with_wkt_keyword(std::string_view text) {
  static constexpr std::string_view kKeywords[] = {"POINT", "LINESTRING", "POLYGON", "MULTIPOINT", "MULTILINESTRING",
                                                   "MULTIPOLYGON", "GEOMETRYCOLLECTION"};
  std::string word;
  for (char c : text) {
    if (!std::isalpha(static_cast<unsigned char>(c))) break;
    word += static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  }
  return std::find(std::begin(kKeywords), std::end(kKeywords), word) != std::end(kKeywords);
}

std::string_view trim(std::string_view text) {
  while (!text.empty() && std::isspace(static_cast<unsigned char>(text.front()))) text.remove_prefix(1);
  while (!text.empty() && std::isspace(static_cast<unsigned char>(text.back()))) text.remove_suffix(1);
  return text;
}

// Calls `visit` with each line's number (from 1) and text without surrounding white space.
void for_each_trimmed_line(const std::string& text, const std::function<void(std::size_t, std::string_view)>& visit) {
  std::size_t line_number = 0;
  for (std::size_t begin = 0; begin < text.size();) {
    std::size_t end = text.find('\n', begin);
    if (end == std::string::npos) end = text.size();
    visit(++line_number, trim(std::string_view(text).substr(begin, end - begin)));
    begin = end + 1;
  }
}

void read_wkt_lines(const fs::path& path, const std::string& text, const std::function<void(SourceShape&&)>& emit,
                    std::vector<SourceProblem>& problems) {
  const std::string name = path.string(), stem = path.stem().string();
  for_each_trimmed_line(text, [&](std::size_t line_number, std::string_view line) {
    if (line.empty() || line.front() == '#') return;
    const std::string where = name + ": line " + std::to_string(line_number);
    SourceShape shape;
    shape.where = where;
    if (line.find('\t') != std::string_view::npos) {
      std::vector<std::string_view> fields;
      for (std::size_t start = 0;;) {
        const std::size_t tab = line.find('\t', start);
        fields.push_back(trim(line.substr(start, tab == std::string_view::npos ? std::string_view::npos : tab - start)));
        if (tab == std::string_view::npos) break;
        start = tab + 1;
      }
      if (fields.size() > 3 || fields[0].empty() || fields[1].empty()) {
        problems.push_back({where, "expected ID<TAB>WKT or ID<TAB>WKT<TAB>METADATA-JSON"});
        return;
      }
      shape.id = std::string(fields[0]);
      shape.geometry = std::string(fields[1]);
      if (fields.size() == 3 && !fields[2].empty()) {
        try {
          shape.metadata = Json::parse(fields[2]);
        } catch (const Json::parse_error& error) {
          problems.push_back({where, "the metadata column is not valid JSON (column byte " + std::to_string(error.byte) + ")"});
          return;
        } catch (const Json::exception& error) {
          problems.push_back({where, std::string("the metadata column is not valid JSON: ") + error.what()});
          return;
        }
        if (!shape.metadata.is_object()) {
          problems.push_back({where, "the metadata column must be a JSON object"});
          return;
        }
      }
    } else if (starts_with_wkt_keyword(line)) {
      shape.id = stem + "-" + std::to_string(line_number);
      shape.geometry = std::string(line);
    } else {
      const std::size_t space = line.find_first_of(" ,;");
      if (space == std::string_view::npos) {
        problems.push_back({where, "expected ID and WKT on the line"});
        return;
      }
      shape.id = std::string(line.substr(0, space));
      shape.geometry = std::string(trim(line.substr(space + 1)));
    }
    emit(std::move(shape));
  });
}

// SVG <polyline>/<polygon> points: numbers separated by whitespace and/or commas (SVG 1.1 §9.7).
std::optional<std::string> path_data_of_points(std::string_view points, bool closed) {
  std::vector<double> numbers;
  const std::string text(points);
  const char* cursor = text.c_str();
  while (true) {
    while (*cursor == ',' || std::isspace(static_cast<unsigned char>(*cursor))) ++cursor;
    if (*cursor == '\0') break;
    char* end = nullptr;
    const double value = std::strtod(cursor, &end);
    if (end == cursor) return std::nullopt;
    numbers.push_back(value);
    cursor = end;
  }
  if (numbers.size() < 2 || numbers.size() % 2 != 0) return std::nullopt;
  std::ostringstream data;
  data.precision(17);
  for (std::size_t i = 0; i < numbers.size(); i += 2) data << (i == 0 ? "M " : " L ") << numbers[i] << ' ' << numbers[i + 1];
  if (closed) data << " Z";
  return data.str();
}

void read_svg(const fs::path& path, const std::string& text, const std::function<void(SourceShape&&)>& emit,
              std::vector<SourceProblem>& problems) {
  const std::string name = path.string(), stem = path.stem().string();
  pugi::xml_document document;
  const pugi::xml_parse_result parsed = document.load_buffer(text.data(), text.size());
  if (!parsed) {
    problems.push_back({name + ": line " + std::to_string(line_at(text, parsed.offset)) + ", byte offset " +
                            std::to_string(parsed.offset),
                        std::string("not well-formed XML: ") + parsed.description()});
    return;
  }
  const pugi::xml_node root = document.document_element();
  if (lower(root.name()) != "svg" && std::string_view(root.name()).find(":svg") == std::string_view::npos) {
    problems.push_back({name, "not an SVG document: the root element is <" + std::string(root.name()) + ">"});
    return;
  }
  std::size_t element_number = 0;
  auto local_name = [](const pugi::xml_node& node) {
    std::string_view tag = node.name();
    if (const std::size_t colon = tag.find(':'); colon != std::string_view::npos) tag.remove_prefix(colon + 1);
    return std::string(tag);
  };
  // Depth-first, in document order; `transformed` is true under an element with a transform.
  std::function<void(const pugi::xml_node&, bool)> visit = [&](const pugi::xml_node& node, bool transformed) {
    for (const pugi::xml_node& child : node.children()) {
      if (child.type() != pugi::node_element) continue;
      const std::string tag = local_name(child);
      if (tag == "defs" || tag == "clipPath" || tag == "mask" || tag == "pattern" || tag == "marker" || tag == "symbol") {
        continue;  // not drawn where they stand
      }
      const bool here_transformed = transformed || !child.attribute("transform").empty();
      if (tag == "path" || tag == "polyline" || tag == "polygon") {
        ++element_number;
        const std::string id_attribute = child.attribute("id").value();
        const std::string id = id_attribute.empty() ? stem + "-" + std::to_string(element_number) : id_attribute;
        const std::string where = name + ": line " + std::to_string(line_at(text, child.offset_debug())) + ", <" + tag +
                                  "> " + std::to_string(element_number) + " (id " + id + ")";
        if (here_transformed) {
          problems.push_back({where, "a transform applies to it, and transforms are not applied on load; "
                                     "flatten transforms in the drawing program before exporting"});
          continue;
        }
        std::optional<std::string> data;
        if (tag == "path") {
          data = child.attribute("d").value();
          if (trim(*data).empty()) {
            problems.push_back({where, "the path has no d attribute"});
            continue;
          }
        } else {
          data = path_data_of_points(child.attribute("points").value(), tag == "polygon");
          if (!data) {
            problems.push_back({where, "the points attribute is not a list of coordinate pairs"});
            continue;
          }
        }
        emit({id, *data, Json::object(), where});
        continue;
      }
      visit(child, here_transformed);
    }
  };
  visit(root, !root.attribute("transform").empty());
}

// A line in the plain form SourceOptions::pass_plain_text describes: its id, or nullopt.
std::optional<std::string_view> plain_line_id(std::string_view line) {
  PlainJsonCursor cursor(line);
  std::optional<std::string_view> id, geometry, metadata;
  const bool plain = cursor.read_object([&](std::string_view key) {
    std::string_view value;
    if (key == "id" && !id && cursor.read_plain_string(value)) {
      id = value;
    } else if (key == "geometry" && !geometry && (cursor.read_plain_string(value) || cursor.skip_object(value))) {
      geometry = value;
    } else if (key == "metadata" && !metadata && cursor.skip_object(value)) {
      metadata = value;
    } else {
      return false;
    }
    return true;
  });
  cursor.skip_spaces();
  if (!plain || !cursor.at_end() || !id || id->empty() || !geometry) return std::nullopt;
  return id;
}

void read_ndjson(const fs::path& path, const std::string& text, const SourceOptions& options,
                 const std::function<void(SourceShape&&)>& emit, std::vector<SourceProblem>& problems) {
  const std::string name = path.string();
  for_each_trimmed_line(text, [&](std::size_t line_number, std::string_view line) {
    if (line.empty()) return;
    const std::string where = name + ": line " + std::to_string(line_number);
    if (options.pass_plain_text) {
      if (const std::optional<std::string_view> id = plain_line_id(line)) {
        SourceShape shape{std::string(*id), Json(), Json(), where + " (id " + std::string(*id) + ")", std::string(line)};
        emit(std::move(shape));
        return;
      }
    }
    Json object;
    try {
      object = Json::parse(line);
    } catch (const Json::parse_error& error) {
      problems.push_back({where + ", column " + std::to_string(error.byte), "not valid JSON"});
      return;
    } catch (const Json::exception& error) {
      problems.push_back({where, std::string("not valid JSON: ") + error.what()});
      return;
    }
    if (!object.is_object() || !object.contains("id") || !object["id"].is_string() || !object.contains("geometry")) {
      problems.push_back({where, "each line must be an object with a string \"id\" and a \"geometry\""});
      return;
    }
    SourceShape shape{object["id"], object["geometry"], Json::object(), where + " (id " + object["id"].get<std::string>() + ")"};
    if (object.contains("metadata") && !object["metadata"].is_null()) shape.metadata = object["metadata"];
    if (object.size() == (object.contains("metadata") ? 3u : 2u)) shape.line = line;
    emit(std::move(shape));
  });
}

}  // namespace

std::optional<SourceFormat> format_of(const fs::path& path) {
  const std::string extension = lower(path.extension().string());
  if (extension == ".geojson" || extension == ".json") return SourceFormat::geojson;
  if (extension == ".wkt" || extension == ".txt" || extension == ".tsv") return SourceFormat::wkt_lines;
  if (extension == ".svg") return SourceFormat::svg;
  if (extension == ".ndjson" || extension == ".jsonl") return SourceFormat::ndjson;
  return std::nullopt;
}

std::vector<fs::path> collect_input_files(const std::vector<std::string>& operands, std::vector<SourceProblem>& problems,
                                          std::size_t& skipped) {
  std::vector<fs::path> files;
  for (const std::string& operand : operands) {
    std::error_code error;
    const fs::path path(operand);
    if (fs::is_directory(path, error)) {
      std::vector<fs::path> found;
      for (auto it = fs::recursive_directory_iterator(path, fs::directory_options::skip_permission_denied, error);
           !error && it != fs::recursive_directory_iterator(); it.increment(error)) {
        if (!it->is_regular_file(error)) continue;
        if (format_of(it->path())) {
          found.push_back(it->path());
        } else {
          ++skipped;
        }
      }
      if (error) problems.push_back({operand, "cannot list the folder: " + error.message()});
      std::sort(found.begin(), found.end());
      files.insert(files.end(), found.begin(), found.end());
    } else if (fs::is_regular_file(path, error)) {
      if (format_of(path)) {
        files.push_back(path);
      } else {
        problems.push_back({operand, "unknown file type; expected .geojson, .json, .wkt, .txt, .tsv, .svg or .ndjson"});
      }
    } else {
      problems.push_back({operand, "no such file or folder"});
    }
  }
  return files;
}

void read_shape_file(const fs::path& path, const SourceOptions& options, const std::function<void(SourceShape&&)>& emit,
                     std::vector<SourceProblem>& problems) {
  std::string text;
  if (!read_file(path, text)) {
    problems.push_back({path.string(), "cannot read the file"});
    return;
  }
  switch (*format_of(path)) {
    case SourceFormat::geojson:
      return read_geojson(path, text, options, emit, problems);
    case SourceFormat::wkt_lines:
      return read_wkt_lines(path, text, emit, problems);
    case SourceFormat::svg:
      return read_svg(path, text, emit, problems);
    case SourceFormat::ndjson:
      return read_ndjson(path, text, options, emit, problems);
  }
}

std::size_t count_shapes(const fs::path& path, const SourceOptions& options) {
  if (format_of(path) != SourceFormat::ndjson) {
    std::size_t count = 0;
    std::vector<SourceProblem> ignored;
    read_shape_file(path, options, [&](SourceShape&&) { ++count; }, ignored);
    return count;
  }
  std::string text;
  if (!read_file(path, text)) return 0;
  std::size_t count = 0;
  for_each_trimmed_line(text, [&](std::size_t, std::string_view line) { count += line.empty() ? 0 : 1; });
  return count;
}

}  // namespace waymark::cli
