// Reads glyph outlines from TrueType fonts through FreeType 2 (Debian's libfreetype-dev),
// flattened to polygons: each quadratic or cubic Bézier piece becomes 8 line segments (common
// practice, no source), in font units, y up.
//
// Fonts used by the tests: Debian's fonts-dejavu-core (DejaVu fonts, Bitstream Vera licence:
// free use and redistribution, /usr/share/doc/fonts-dejavu-core/copyright). Nothing is copied
// into the repository: tests read the installed files.
#pragma once

#include <ft2build.h>
#include FT_FREETYPE_H
#include FT_OUTLINE_H

#include <string>
#include <vector>

#include "sketch/geometry/shape.h"
#include "support/hershey.h"

namespace waymark::testing {

namespace truetype_detail {

struct Builder {
  Shape shape;
  Point current{0, 0};
  void close_ring() {
    if (!shape.parts.empty() && shape.parts.back().size() > 1 && shape.parts.back().back() == shape.parts.back().front()) {
      shape.parts.back().pop_back();  // rings are stored open
    }
    if (!shape.parts.empty() && shape.parts.back().size() < 3) {
      shape.parts.pop_back();
      shape.polygon_of_ring.pop_back();
    }
  }
  void add(Point p) {
    if (shape.parts.back().empty() || !(shape.parts.back().back() == p)) shape.parts.back().push_back(p);
    current = p;
  }
};

inline Point point_of(const FT_Vector* v) { return {static_cast<double>(v->x), static_cast<double>(v->y)}; }

inline int move_to(const FT_Vector* to, void* user) {
  auto* b = static_cast<Builder*>(user);
  b->close_ring();
  b->shape.parts.emplace_back();
  b->shape.polygon_of_ring.push_back(0);  // boundary semantics: one polygon of all rings
  b->add(point_of(to));
  return 0;
}

inline int line_to(const FT_Vector* to, void* user) {
  static_cast<Builder*>(user)->add(point_of(to));
  return 0;
}

constexpr int kPiecesPerCurve = 8;

inline int conic_to(const FT_Vector* control, const FT_Vector* to, void* user) {
  auto* b = static_cast<Builder*>(user);
  const Point p0 = b->current, p1 = point_of(control), p2 = point_of(to);
  for (int i = 1; i <= kPiecesPerCurve; ++i) {
    const double t = static_cast<double>(i) / kPiecesPerCurve, u = 1 - t;
    b->add({u * u * p0.x + 2 * u * t * p1.x + t * t * p2.x, u * u * p0.y + 2 * u * t * p1.y + t * t * p2.y});
  }
  return 0;
}

inline int cubic_to(const FT_Vector* c1, const FT_Vector* c2, const FT_Vector* to, void* user) {
  auto* b = static_cast<Builder*>(user);
  const Point p0 = b->current, p1 = point_of(c1), p2 = point_of(c2), p3 = point_of(to);
  for (int i = 1; i <= kPiecesPerCurve; ++i) {
    const double t = static_cast<double>(i) / kPiecesPerCurve, u = 1 - t;
    const double a = u * u * u, bb = 3 * u * u * t, c = 3 * u * t * t, d = t * t * t;
    b->add({a * p0.x + bb * p1.x + c * p2.x + d * p3.x, a * p0.y + bb * p1.y + c * p2.y + d * p3.y});
  }
  return 0;
}

}  // namespace truetype_detail

// The outlines of 'A'–'Z' and 'a'–'z' in the font at `path`; empty if FreeType cannot open it.
inline std::vector<Glyph> read_truetype_glyphs(const std::string& path, const std::string& style) {
  std::vector<Glyph> glyphs;
  FT_Library library = nullptr;
  if (FT_Init_FreeType(&library) != 0) return glyphs;
  FT_Face face = nullptr;
  if (FT_New_Face(library, path.c_str(), 0, &face) == 0) {
    FT_Outline_Funcs functions{};
    functions.move_to = truetype_detail::move_to;
    functions.line_to = truetype_detail::line_to;
    functions.conic_to = truetype_detail::conic_to;
    functions.cubic_to = truetype_detail::cubic_to;
    for (char c : std::string("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz")) {
      if (FT_Load_Char(face, static_cast<FT_ULong>(c), FT_LOAD_NO_SCALE) != 0) continue;
      truetype_detail::Builder builder;
      builder.shape.kind = ShapeKind::polygon;
      if (FT_Outline_Decompose(&face->glyph->outline, &functions, &builder) != 0) continue;
      builder.close_ring();
      if (!builder.shape.parts.empty()) glyphs.push_back({c, style, std::move(builder.shape)});
    }
    FT_Done_Face(face);
  }
  FT_Done_FreeType(library);
  return glyphs;
}

// The longest ring of an outline, as one closed ring: Fréchet needs a single curve.
inline Shape longest_ring(const Shape& outline) {
  Shape out;
  out.kind = ShapeKind::polygon;
  out.parts.push_back(longest_stroke(outline).parts.front());
  out.polygon_of_ring.push_back(0);
  return out;
}

}  // namespace waymark::testing
