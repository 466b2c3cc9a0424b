// Fuzz target: the shape text parsers (WKT, GeoJSON, SVG path data, point arrays, and the
// automatic choice). The first byte picks the parser; the rest is the text. Beyond "no crash,
// no sanitizer report": a shape that parses must validate, and its WKT must parse back to the
// same shape (the writer prints shortest round-trip doubles). GeoJSON that nlohmann_json parses
// must give parse_geojson's answer (its plain-form reader first) from the general reader too:
// the same shape bit for bit, or the same error.
#include <cstdint>
#include <cstdlib>
#include <cstring>
#include <nlohmann/json.hpp>
#include <string_view>

#include "sketch/geometry/formats.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  if (size == 0) return 0;
  using waymark::ShapeFormat;
  static constexpr ShapeFormat kFormats[] = {ShapeFormat::automatic, ShapeFormat::wkt, ShapeFormat::geojson,
                                             ShapeFormat::svg_path, ShapeFormat::point_arrays};
  const ShapeFormat format = kFormats[data[0] % 5];
  const std::string_view text(reinterpret_cast<const char*>(data) + 1, size - 1);
  waymark::ParseOptions options;
  options.limits.max_vertices = 20'000;  // keeps each run fast; limits are checked by the parsers
  waymark::Result<waymark::Shape> shape = waymark::parse_shape(text, format, options);
  if (format == ShapeFormat::geojson || format == ShapeFormat::automatic) {
    // The automatic choice reads an object as GeoJSON (and an array as point arrays).
    const nlohmann::json document = nlohmann::json::parse(text, nullptr, false);
    if (!document.is_discarded() && (format == ShapeFormat::geojson || document.is_object())) {
      const waymark::Result<waymark::Shape> general = waymark::geojson_from_json(document, options);
      if (shape.is_ok() != general.is_ok()) std::abort();
      if (shape.is_ok()) {
        if (!(*shape == *general)) std::abort();
        for (std::size_t i = 0; i < shape->parts.size(); ++i) {  // -0.0 against 0.0 too
          if (std::memcmp(shape->parts[i].data(), general->parts[i].data(), shape->parts[i].size() * sizeof(waymark::Point))) {
            std::abort();
          }
        }
      } else if (shape.status().message() != general.status().message() || shape.status().where() != general.status().where()) {
        std::abort();
      }
    }
  }
  if (!shape) {
    if (shape.status().message().empty()) std::abort();  // every error says what went wrong
    return 0;
  }
  if (!waymark::validate(*shape, options.limits).is_ok()) std::abort();
  waymark::Result<waymark::Shape> again = waymark::parse_wkt(waymark::to_wkt(*shape), options);
  if (!again || !(*again == *shape)) std::abort();
  return 0;
}
