// SVG path data reader (SVG 1.1, §8.3 "Path data", with the arc conversion of Appendix F.6).
//
// Curves are flattened with a provable bound: for a parametric curve B with second derivative
// at most D in norm, the polyline through n equally spaced parameter values stays within
// D / (8 n²) of the curve (the linear-interpolation error bound h²/8·max|B''|, standard
// numerical analysis). Arcs use the angle step Δ with max(rx, ry)·(1 − cos(Δ/2)) ≤ tolerance.
#include <algorithm>
#include <cmath>
#include <numbers>
#include <string>

#include "sketch/geometry/formats.h"
#include "sketch/geometry/text_cursor.h"

namespace waymark {
namespace {

using detail::TextCursor;

Point operator+(Point a, Point b) { return {a.x + b.x, a.y + b.y}; }
Point operator-(Point a, Point b) { return {a.x - b.x, a.y - b.y}; }
Point operator*(double s, Point a) { return {s * a.x, s * a.y}; }
double norm(Point a) { return std::hypot(a.x, a.y); }

constexpr std::size_t kMaxPiecesPerCurve = 10'000;

std::size_t pieces_for(double second_derivative_bound, double tolerance) {
  if (!(second_derivative_bound > 0)) return 1;
  const double n = std::ceil(std::sqrt(second_derivative_bound / (8 * tolerance)));
  return static_cast<std::size_t>(std::clamp(n, 1.0, static_cast<double>(kMaxPiecesPerCurve)));
}

class SvgPathReader {
 public:
  SvgPathReader(std::string_view text, const ParseOptions& options) : cursor_(text), options_(options) {}

  Result<Shape> read() {
    if (!(options_.curve_tolerance > 0)) return invalid_argument("curve tolerance must be positive");
    cursor_.skip_spaces();
    if (cursor_.at_end()) return invalid_argument("path data is empty", cursor_.where());
    char command = 0;
    while (true) {
      cursor_.skip_spaces();
      if (cursor_.at_end()) break;
      const char c = cursor_.peek();
      const std::size_t command_start = cursor_.position();
      if (std::isalpha(static_cast<unsigned char>(c))) {
        command = c;
        cursor_.advance();
      } else if (command == 0) {
        return fail("path data must start with a moveto command (M or m), found " + cursor_.describe_here());
      } else if (command == 'Z' || command == 'z') {
        return fail("closepath (Z) takes no numbers, found " + cursor_.describe_here());
      } else if (command == 'M') {
        command = 'L';  // extra coordinate pairs after a moveto are implicit linetos
      } else if (command == 'm') {
        command = 'l';
      }
      if (!started_ && command != 'M' && command != 'm') {
        return invalid_argument("path data must start with a moveto command (M or m)", cursor_.where_at(command_start));
      }
      if (Status s = apply(command, command_start); !s.is_ok()) return s;
    }
    finish_subpath();
    return build();
  }

 private:
  Status fail(const std::string& message) const { return invalid_argument(message, cursor_.where()); }

  Status number(double& value, char command) {
    cursor_.skip_separators();
    if (!cursor_.read_number(value)) {
      return fail(std::string("expected a number for the '") + command + "' command, found " + cursor_.describe_here());
    }
    if (!std::isfinite(value)) return fail("number is not finite");
    cursor_.skip_separators();
    return Status::ok();
  }

  Status flag(bool& value, char command) {
    cursor_.skip_separators();
    const char c = cursor_.peek();
    if (c != '0' && c != '1') {
      return fail(std::string("expected an arc flag 0 or 1 for the '") + command + "' command, found " +
                  cursor_.describe_here());
    }
    value = c == '1';
    cursor_.advance();
    cursor_.skip_separators();
    return Status::ok();
  }

  Status point(Point& p, char command, bool relative) {
    if (Status s = number(p.x, command); !s.is_ok()) return s;
    if (Status s = number(p.y, command); !s.is_ok()) return s;
    if (relative) p = p + current_;
    return Status::ok();
  }

  Status add_vertex(Point p) {
    if (++vertices_ > options_.limits.max_vertices) {
      return Status(StatusCode::resource_exhausted,
                    "flattened path has more than " + std::to_string(options_.limits.max_vertices) + " vertices",
                    cursor_.where());
    }
    subpath_.push_back(p);
    current_ = p;
    return Status::ok();
  }

  void finish_subpath() {
    if (subpath_.size() >= 2) {
      subpaths_.push_back(std::move(subpath_));
      closed_.push_back(subpath_closed_);
    }
    subpath_.clear();
    subpath_closed_ = false;
  }

  void ensure_subpath() {
    if (subpath_.empty()) subpath_.push_back(current_);
  }

  Status apply(char command, std::size_t command_start) {
    const bool relative = std::islower(static_cast<unsigned char>(command));
    const char upper = static_cast<char>(std::toupper(static_cast<unsigned char>(command)));
    Point p;
    switch (upper) {
      case 'M':
        if (Status s = point(p, command, relative && started_); !s.is_ok()) return s;
        finish_subpath();
        started_ = true;
        subpath_start_ = p;
        current_ = p;
        last_control_ = p;
        last_command_ = 'M';
        return add_vertex(p);
      case 'Z':
        if (!subpath_.empty()) {
          if (!(subpath_.back() == subpath_start_)) {
            if (Status s = add_vertex(subpath_start_); !s.is_ok()) return s;
          }
          subpath_closed_ = true;
          finish_subpath();
        }
        current_ = subpath_start_;
        last_command_ = 'Z';
        return Status::ok();
      case 'L':
        if (Status s = point(p, command, relative); !s.is_ok()) return s;
        return line_to(p, 'L');
      case 'H':
        if (Status s = number(p.x, command); !s.is_ok()) return s;
        p = {relative ? current_.x + p.x : p.x, current_.y};
        return line_to(p, 'L');
      case 'V':
        if (Status s = number(p.y, command); !s.is_ok()) return s;
        p = {current_.x, relative ? current_.y + p.y : p.y};
        return line_to(p, 'L');
      case 'C': case 'S': {
        Point c1, c2, end;
        if (upper == 'C') {
          if (Status s = point(c1, command, relative); !s.is_ok()) return s;
        } else {
          c1 = (last_command_ == 'C') ? current_ + (current_ - last_control_) : current_;
        }
        if (Status s = point(c2, command, relative); !s.is_ok()) return s;
        if (Status s = point(end, command, relative); !s.is_ok()) return s;
        return cubic_to(c1, c2, end);
      }
      case 'Q': case 'T': {
        Point control, end;
        if (upper == 'Q') {
          if (Status s = point(control, command, relative); !s.is_ok()) return s;
        } else {
          control = (last_command_ == 'Q') ? current_ + (current_ - last_control_) : current_;
        }
        if (Status s = point(end, command, relative); !s.is_ok()) return s;
        return quadratic_to(control, end);
      }
      case 'A': {
        double rx, ry, rotation_degrees;
        bool large_arc, sweep;
        if (Status s = number(rx, command); !s.is_ok()) return s;
        if (Status s = number(ry, command); !s.is_ok()) return s;
        if (Status s = number(rotation_degrees, command); !s.is_ok()) return s;
        if (Status s = flag(large_arc, command); !s.is_ok()) return s;
        if (Status s = flag(sweep, command); !s.is_ok()) return s;
        if (Status s = point(p, command, relative); !s.is_ok()) return s;
        return arc_to(std::fabs(rx), std::fabs(ry), rotation_degrees, large_arc, sweep, p);
      }
      default:
        return invalid_argument(std::string("unknown path command '") + command + "'", cursor_.where_at(command_start));
    }
  }

  Status line_to(Point p, char kind) {
    ensure_subpath();
    last_control_ = p;
    last_command_ = kind;
    return add_vertex(p);
  }

  Status cubic_to(Point c1, Point c2, Point end) {
    ensure_subpath();
    const Point start = current_;
    const double bound = 6 * std::max(norm(start - 2 * c1 + c2), norm(c1 - 2 * c2 + end));
    const std::size_t n = pieces_for(bound, options_.curve_tolerance);
    for (std::size_t i = 1; i <= n; ++i) {
      const double t = static_cast<double>(i) / n, u = 1 - t;
      const Point q = (u * u * u) * start + (3 * u * u * t) * c1 + (3 * u * t * t) * c2 + (t * t * t) * end;
      if (Status s = add_vertex(i == n ? end : q); !s.is_ok()) return s;
    }
    last_control_ = c2;
    last_command_ = 'C';
    return Status::ok();
  }

  Status quadratic_to(Point control, Point end) {
    ensure_subpath();
    const Point start = current_;
    const std::size_t n = pieces_for(2 * norm(start - 2 * control + end), options_.curve_tolerance);
    for (std::size_t i = 1; i <= n; ++i) {
      const double t = static_cast<double>(i) / n, u = 1 - t;
      const Point q = (u * u) * start + (2 * u * t) * control + (t * t) * end;
      if (Status s = add_vertex(i == n ? end : q); !s.is_ok()) return s;
    }
    last_control_ = control;
    last_command_ = 'Q';
    return Status::ok();
  }

  // SVG 1.1 Appendix F.6.5 (endpoint to centre parameterization) and F.6.6 (radii correction).
  // Computed in units of the arc's largest extent: squares of coordinates near 1e160 would
  // overflow, and their differences turn into NaN.
  Status arc_to(double rx, double ry, double rotation_degrees, bool large_arc, bool sweep, Point end) {
    ensure_subpath();
    const Point start = current_;
    last_command_ = 'A';
    last_control_ = end;
    if (start == end) return Status::ok();  // F.6.2: the arc is omitted
    if (rx == 0 || ry == 0) return add_vertex(end);
    const double phi = rotation_degrees * std::numbers::pi / 180;
    const double cos_phi = std::cos(phi), sin_phi = std::sin(phi);
    const double dx = (start.x - end.x) / 2, dy = (start.y - end.y) / 2;
    const double scale = std::max({std::fabs(dx), std::fabs(dy), rx, ry});
    if (!std::isfinite(scale)) return invalid_argument("arc endpoints are too far apart to compute", cursor_.where());
    rx /= scale;
    ry /= scale;
    // A radius below 1e-300 of the other is no ellipse at any scale that prints: the chord.
    if (rx == 0 || ry == 0) return add_vertex(end);
    const double x1 = (cos_phi * dx + sin_phi * dy) / scale;
    const double y1 = (-sin_phi * dx + cos_phi * dy) / scale;
    const double lambda = (x1 * x1) / (rx * rx) + (y1 * y1) / (ry * ry);
    if (lambda > 1) {
      rx *= std::sqrt(lambda);
      ry *= std::sqrt(lambda);
    }
    const double numerator = rx * rx * ry * ry - rx * rx * y1 * y1 - ry * ry * x1 * x1;
    const double denominator = rx * rx * y1 * y1 + ry * ry * x1 * x1;
    double factor = std::sqrt(std::max(0.0, numerator / denominator));
    if (large_arc == sweep) factor = -factor;
    const double cx1 = factor * rx * y1 / ry;
    const double cy1 = -factor * ry * x1 / rx;
    const Point center{scale * (cos_phi * cx1 - sin_phi * cy1) + (start.x + end.x) / 2,
                       scale * (sin_phi * cx1 + cos_phi * cy1) + (start.y + end.y) / 2};
    const double theta1 = std::atan2((y1 - cy1) / ry, (x1 - cx1) / rx);
    double delta = std::atan2((-y1 - cy1) / ry, (-x1 - cx1) / rx) - theta1;
    if (sweep && delta < 0) delta += 2 * std::numbers::pi;
    if (!sweep && delta > 0) delta -= 2 * std::numbers::pi;
    if (!std::isfinite(delta) || !std::isfinite(center.x) || !std::isfinite(center.y)) {
      return invalid_argument("arc cannot be computed (its numbers are out of range)", cursor_.where());
    }

    const double radius = scale * std::max(rx, ry);
    const double ratio = std::min(1.0, options_.curve_tolerance / radius);
    const double max_step = std::max(2 * std::acos(1 - ratio), 1e-6);
    const std::size_t n = static_cast<std::size_t>(
        std::clamp(std::ceil(std::fabs(delta) / max_step), 1.0, static_cast<double>(kMaxPiecesPerCurve)));
    for (std::size_t i = 1; i <= n; ++i) {
      const double angle = theta1 + delta * static_cast<double>(i) / n;
      const double ex = rx * std::cos(angle), ey = ry * std::sin(angle);
      const Point q{scale * (cos_phi * ex - sin_phi * ey) + center.x, scale * (sin_phi * ex + cos_phi * ey) + center.y};
      if (Status s = add_vertex(i == n ? end : q); !s.is_ok()) return s;
    }
    return Status::ok();
  }

  Result<Shape> build() {
    if (subpaths_.empty()) return invalid_argument("path data draws nothing (no segment after a moveto)");
    Shape shape;
    const bool all_closed = std::all_of(closed_.begin(), closed_.end(), [](bool c) { return c; });
    shape.kind = all_closed ? ShapeKind::polygon : ShapeKind::polyline;
    for (std::size_t i = 0; i < subpaths_.size(); ++i) {
      Path path = std::move(subpaths_[i]);
      if (all_closed) {
        path.pop_back();  // the closing vertex, equal to the first
        shape.polygon_of_ring.push_back(static_cast<std::uint32_t>(i));
      }
      shape.parts.push_back(std::move(path));
    }
    if (Status valid = validate(shape, options_.limits); !valid.is_ok()) return valid;
    return shape;
  }

  TextCursor cursor_;
  const ParseOptions& options_;
  std::vector<Path> subpaths_;
  std::vector<bool> closed_;
  Path subpath_;
  bool subpath_closed_ = false;
  bool started_ = false;
  Point current_, subpath_start_, last_control_;
  char last_command_ = 0;
  std::size_t vertices_ = 0;
};

}  // namespace

Result<Shape> parse_svg_path(std::string_view text, const ParseOptions& options) {
  return SvgPathReader(text, options).read();
}

}  // namespace waymark
