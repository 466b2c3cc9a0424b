#include "clients/cli/demo_catalogue.h"

#include <cmath>
#include <cstdio>
#include <iostream>
#include <nlohmann/json.hpp>
#include <numbers>

#include "clients/cli/arguments.h"
#include "sketch/geometry/formats.h"
#include "sketch/landmarks/landmark_set.h"

namespace waymark::cli {
namespace {

using Json = nlohmann::json;

// Millimetres to 0.01 mm, so the WKT stays short and reads like a drawing.
// (+ 0.0 turns a rounded -0 into 0.)
Point at(double x, double y) { return {std::round(x * 100) / 100 + 0.0, std::round(y * 100) / 100 + 0.0}; }

Path circle(double cx, double cy, double radius, int sides, double turn = 0) {
  Path ring;
  for (int i = 0; i < sides; ++i) {
    const double angle = turn + 2 * std::numbers::pi * i / sides;
    ring.push_back(at(cx + radius * std::cos(angle), cy + radius * std::sin(angle)));
  }
  return ring;  // rings are stored open: the closing vertex is implied
}

Shape polygon(std::vector<Path> rings) {
  Shape shape;
  shape.kind = ShapeKind::polygon;
  for (Path& ring : rings) {
    shape.parts.push_back(std::move(ring));
    shape.polygon_of_ring.push_back(0);
  }
  return shape;
}

// Dimensions of one part; a revision perturbs them slightly.
struct Design {
  int family;  // 0 bracket, 1 gasket, 2 clip, 3 flange
  double a, b, c;  // family-specific sizes in mm
  int detail;      // family-specific count (clip bends, flange bolt holes)
};

Shape outline(const Design& d) {
  switch (d.family) {
    case 0: {  // L bracket: legs a × b, thickness c
      return polygon({{at(0, 0), at(d.a, 0), at(d.a, d.c), at(d.c, d.c), at(d.c, d.b), at(0, d.b)}});
    }
    case 1: {  // octagonal gasket of width a with a round bore of radius b
      Path outer = circle(0, 0, d.a / 2 / std::cos(std::numbers::pi / 8), 8, std::numbers::pi / 8);
      return polygon({std::move(outer), circle(0, 0, d.b, 24)});
    }
    case 2: {  // spring clip: a zigzag of `detail` bends, pitch a, height b
      Shape clip;
      clip.kind = ShapeKind::polyline;
      Path stroke{at(0, 0), at(0, d.b)};
      for (int bend = 0; bend < d.detail; ++bend) {
        const double x = (bend + 1) * d.a;
        stroke.push_back(at(x - d.a / 2, bend % 2 == 0 ? d.b + d.c : -d.c));
        stroke.push_back(at(x, bend % 2 == 0 ? d.b : 0));
      }
      clip.parts.push_back(std::move(stroke));
      return clip;
    }
    default: {  // round flange: radius a, bore b, `detail` bolt holes of radius c on a circle
      std::vector<Path> rings{circle(0, 0, d.a, 32), circle(0, 0, d.b, 24)};
      const double pitch = (d.a + d.b) / 2;
      for (int hole = 0; hole < d.detail; ++hole) {
        const double angle = 2 * std::numbers::pi * hole / d.detail;
        rings.push_back(circle(pitch * std::cos(angle), pitch * std::sin(angle), d.c, 12));
      }
      return polygon(std::move(rings));
    }
  }
}

Design random_design(SeededRandom& random) {
  Design d{};
  d.family = static_cast<int>(random.below(4));
  auto between = [&](double low, double high) { return low + (high - low) * random.uniform(); };
  switch (d.family) {
    case 0: d = {0, between(20, 80), between(15, 60), between(3, 10), 0}; break;
    case 1: d = {1, between(20, 90), 0, 0, 0}; d.b = d.a * between(0.2, 0.4); break;
    case 2: d = {2, between(3, 8), between(6, 20), between(1, 4), static_cast<int>(2 + random.below(5))}; break;
    default:
      d = {3, between(25, 70), 0, 0, static_cast<int>(4 + 2 * random.below(3))};
      d.b = d.a * between(0.25, 0.45);
      d.c = (d.a - d.b) * between(0.1, 0.18);
  }
  return d;
}

Design revised(Design d, SeededRandom& random) {
  auto nudge = [&](double& value) { value *= 1 + 0.04 * (random.uniform() - 0.5); };
  nudge(d.a);
  nudge(d.b);
  nudge(d.c);
  return d;
}

constexpr const char* kCodes[] = {"BRK", "GSK", "CLP", "FLG"};
constexpr const char* kFamilies[] = {"bracket", "gasket", "clip", "flange"};
const std::vector<std::vector<const char*>> kMaterials = {
    {"steel", "stainless steel", "aluminium"},
    {"nitrile", "EPDM", "PTFE", "silicone"},
    {"spring steel", "phosphor bronze"},
    {"cast iron", "steel", "stainless steel"}};

}  // namespace

std::vector<std::string> demo_catalogue(std::size_t count, std::uint64_t seed) {
  SeededRandom random(seed);
  std::vector<std::string> lines;
  std::size_t number = 10000;
  while (lines.size() < count) {
    const Design base = random_design(random);
    const char* material = kMaterials[base.family][random.below(kMaterials[base.family].size())];
    // One part in five has later revisions (B, C) that differ by a couple of percent.
    const std::size_t revisions = random.below(5) == 0 ? 2 + random.below(2) : 1;
    number += 1 + random.below(6);  // part numbers only grow: ids never repeat
    Design design = base;
    for (std::size_t revision = 0; revision < revisions && lines.size() < count; ++revision) {
      if (revision > 0) design = revised(design, random);
      char part_number[32];
      std::snprintf(part_number, sizeof part_number, "%s-%05zu", kCodes[design.family], number);
      const std::string revision_letter(1, static_cast<char>('A' + revision));
      const Json line = {{"id", std::string(part_number) + "-" + revision_letter},
                         {"geometry", to_wkt(outline(design))},
                         {"metadata",
                          {{"family", kFamilies[design.family]},
                           {"material", material},
                           {"revision", revision_letter},
                           {"part_number", part_number}}}};
      lines.push_back(line.dump());
    }
  }
  return lines;
}

int demo_catalogue_command(const std::vector<std::string>& words) {
  Result<Arguments> arguments = Arguments::parse(words, {"count", "seed"}, {});
  if (!arguments) {
    std::cerr << "waymark: " << arguments.status().to_string() << "\n";
    return 2;
  }
  Result<std::uint64_t> count = arguments->count("count", 3000);
  Result<std::uint64_t> seed = arguments->count("seed", 1);
  for (const Status& s : {count.status(), seed.status()}) {
    if (!s.is_ok()) {
      std::cerr << "waymark: " << s.to_string() << "\n";
      return 2;
    }
  }
  if (!arguments->operands().empty()) {
    std::cerr << "waymark: demo-catalogue takes no operands\n";
    return 2;
  }
  for (const std::string& line : demo_catalogue(*count, *seed)) std::cout << line << "\n";
  return 0;
}

}  // namespace waymark::cli
