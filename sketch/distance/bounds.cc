#include "sketch/distance/bounds.h"

#include <algorithm>
#include <cmath>

namespace waymark {

double bounding_box_lower_bound(const Box& a, const Box& b) {
  return std::max({std::fabs(a.min_x - b.min_x), std::fabs(a.max_x - b.max_x), std::fabs(a.min_y - b.min_y),
                   std::fabs(a.max_y - b.max_y)});
}

double frechet_endpoint_lower_bound(Point p_first, Point p_last, Point q_first, Point q_last) {
  return std::max(std::hypot(p_first.x - q_first.x, p_first.y - q_first.y),
                  std::hypot(p_last.x - q_last.x, p_last.y - q_last.y));
}

}  // namespace waymark
