// Country outlines from the npm package world-atlas 2.0.2 (Natural Earth data, public domain;
// the package itself is under the ISC licence), in TopoJSON, decoded here without a library.
// The package is a test dependency (tests/package.json); nothing is copied into the repository.
//
// TopoJSON (the format's specification, github.com/topojson/topojson-specification, §2.1.3 and
// §2.2): a quantized arc is delta-encoded integers — each position is the running sum of the
// pairs, then × transform.scale + transform.translate. A ring lists arc indices; index ~i
// (bitwise not) is arc i reversed; the first position of every arc after the first repeats the
// previous arc's last one and is dropped.
#pragma once

#include <algorithm>
#include <cmath>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <vector>

#include "sketch/geometry/shape.h"

namespace waymark::testing {

// Where tests/package.json's packages are installed (set by tests/CMakeLists.txt).
#ifndef WAYMARK_TEST_NODE_MODULES
#define WAYMARK_TEST_NODE_MODULES "tests/node_modules"
#endif

inline std::string world_atlas_file(const std::string& name) {
  return std::string(WAYMARK_TEST_NODE_MODULES) + "/world-atlas/" + name;
}

struct Country {
  std::string name;
  Shape outline;  // polygon kind: every ring of every polygon, longitude/latitude degrees
};

// Reads "countries-110m.json" and the like. Rings that do not survive decoding as valid rings
// (fewer than three distinct positions, zero area) are left out; countries left with no ring are
// left out. Returns an empty list when the file is missing or not TopoJSON.
inline std::vector<Country> read_world_atlas(const std::string& path) {
  std::ifstream in(path);
  if (!in) return {};
  std::stringstream text;
  text << in.rdbuf();
  const nlohmann::json topology = nlohmann::json::parse(text.str(), nullptr, false);
  if (topology.is_discarded() || topology.value("type", "") != "Topology") return {};
  const auto& scale = topology["transform"]["scale"];
  const auto& translate = topology["transform"]["translate"];
  std::vector<Path> arcs;
  for (const auto& arc : topology["arcs"]) {
    Path path;
    double x = 0, y = 0;
    for (const auto& delta : arc) {
      x += delta[0].get<double>();
      y += delta[1].get<double>();
      path.push_back({x * scale[0].get<double>() + translate[0].get<double>(),
                      y * scale[1].get<double>() + translate[1].get<double>()});
    }
    arcs.push_back(std::move(path));
  }
  auto ring_of = [&](const nlohmann::json& indices) {
    Path ring;
    for (const auto& index_json : indices) {
      const long long index = index_json.get<long long>();
      Path arc = arcs[static_cast<std::size_t>(index >= 0 ? index : ~index)];
      if (index < 0) std::reverse(arc.begin(), arc.end());
      ring.insert(ring.end(), arc.begin() + (ring.empty() ? 0 : 1), arc.end());
    }
    if (ring.size() > 1 && ring.front() == ring.back()) ring.pop_back();
    return ring;
  };
  std::vector<Country> countries;
  for (const auto& geometry : topology["objects"]["countries"]["geometries"]) {
    const std::string type = geometry.value("type", "");
    if (type != "Polygon" && type != "MultiPolygon") continue;
    std::vector<nlohmann::json> polygons;
    if (type == "Polygon") {
      polygons.push_back(geometry["arcs"]);
    } else {
      for (const auto& polygon : geometry["arcs"]) polygons.push_back(polygon);
    }
    Country country;
    country.name = geometry["properties"].value("name", "");
    country.outline.kind = ShapeKind::polygon;
    std::uint32_t polygon_number = 0;
    for (const auto& polygon : polygons) {
      bool exterior_kept = false;
      for (std::size_t r = 0; r < polygon.size(); ++r) {
        Shape ring_only;
        ring_only.kind = ShapeKind::polygon;
        ring_only.parts.push_back(ring_of(polygon[r]));
        ring_only.polygon_of_ring.push_back(0);
        if (!validate(ring_only).is_ok()) continue;
        if (r == 0) exterior_kept = true;
        if (!exterior_kept) break;  // a hole without its exterior is not a polygon
        country.outline.parts.push_back(std::move(ring_only.parts.front()));
        country.outline.polygon_of_ring.push_back(polygon_number);
      }
      if (exterior_kept) ++polygon_number;
    }
    if (!country.outline.parts.empty() && !country.name.empty()) countries.push_back(std::move(country));
  }
  return countries;
}

}  // namespace waymark::testing
