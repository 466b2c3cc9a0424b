// Reads single-stroke glyphs from Debian's hershey-fonts-data (/usr/share/hershey-fonts/*.jhf).
//
// Data licence: the Hershey fonts' own terms (/usr/share/doc/hershey-fonts-data/copyright):
// free use, with these acknowledgements — the Hershey Fonts were originally created by
// Dr. A. V. Hershey while working at the U. S. National Bureau of Standards; the format of the
// font data was originally created by James Hurt, Cognition, Inc. Nothing is copied into the
// repository: tests read the installed files.
//
// Format (one glyph per line in these files): columns 0–4 a glyph number, 5–7 the count N of
// coordinate pairs that follow (the bearing pair included), then the pairs; a coordinate is
// its character's code minus 'R'; the pair " R" lifts the pen. y grows downward (flipped here).
// In the 96-line files, line i holds ASCII character 32 + i.
#pragma once

#include <fstream>
#include <string>
#include <vector>

#include "sketch/geometry/shape.h"

namespace waymark::testing {

struct Glyph {
  char character;
  std::string style;
  Shape shape;  // polyline, one part per stroke
};

inline std::vector<Glyph> read_hershey_glyphs(const std::string& style, bool letters_only = true) {
  std::ifstream in("/usr/share/hershey-fonts/" + style + ".jhf");
  std::vector<Glyph> glyphs;
  std::string line;
  for (int index = 0; std::getline(in, line); ++index) {
    const char character = static_cast<char>(32 + index);
    if (letters_only && !std::isalpha(static_cast<unsigned char>(character))) continue;
    if (line.size() < 10) continue;
    const int pairs = std::stoi(line.substr(5, 3));
    Shape shape;
    shape.kind = ShapeKind::polyline;
    Path stroke;
    for (int pair = 1; pair < pairs && 8 + 2 * pair + 1 < static_cast<int>(line.size()); ++pair) {
      const char x = line[8 + 2 * pair], y = line[8 + 2 * pair + 1];
      if (x == ' ' && y == 'R') {
        if (stroke.size() >= 2) shape.parts.push_back(stroke);
        stroke.clear();
        continue;
      }
      const Point p{static_cast<double>(x - 'R'), -static_cast<double>(y - 'R')};
      if (stroke.empty() || !(stroke.back() == p)) stroke.push_back(p);
    }
    if (stroke.size() >= 2) shape.parts.push_back(stroke);
    if (!shape.parts.empty()) glyphs.push_back({character, style, std::move(shape)});
  }
  return glyphs;
}

// The longest stroke of a glyph, as a one-stroke shape (for Fréchet, which needs one curve).
inline Shape longest_stroke(const Shape& glyph) {
  Shape out;
  out.kind = ShapeKind::polyline;
  const Path* best = &glyph.parts.front();
  for (const Path& part : glyph.parts) {
    if (part.size() > best->size()) best = &part;
  }
  out.parts.push_back(*best);
  return out;
}

}  // namespace waymark::testing
