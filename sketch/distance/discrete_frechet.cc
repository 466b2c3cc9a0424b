// Discrete Fréchet distance (Eiter & Mannila 1994), one row of the coupling table at a time.
//
// Works on squared distances (monotone, so min/max commute with the square root). The cell
// recurrence c(i,j) = max(d(i,j), min(c(i−1,j−1), c(i−1,j), c(i,j−1))) is a serial chain along
// a row; min(c(i−1,j−1), c(i−1,j)) is taken off that chain so each step waits for one min and
// one max only. The witness is found afterwards: the value is the squared distance of some
// vertex pair, and the first pair at exactly that distance is reported.
#include <algorithm>
#include <cmath>
#include <vector>

#include "sketch/distance/frechet.h"

namespace waymark {

DistanceResult discrete_frechet(const Path& p, const Path& q) {
  const std::size_t n = p.size(), m = q.size();
  thread_local std::vector<double> row;  // row[j] holds c(i − 1, j) until overwritten by c(i, j)
  thread_local std::vector<double> q_x, q_y;
  row.resize(m);
  q_x.resize(m);
  q_y.resize(m);
  for (std::size_t j = 0; j < m; ++j) {
    q_x[j] = q[j].x;
    q_y[j] = q[j].y;
  }
  auto d2 = [&](Point a, std::size_t j) {
    const double dx = a.x - q_x[j], dy = a.y - q_y[j];
    return dx * dx + dy * dy;
  };
  double left = d2(p[0], 0);
  row[0] = left;
  for (std::size_t j = 1; j < m; ++j) row[j] = left = std::max(left, d2(p[0], j));
  for (std::size_t i = 1; i < n; ++i) {
    const Point pi = p[i];
    double diagonal = row[0];
    left = row[0] = std::max(row[0], d2(pi, 0));
    for (std::size_t j = 1; j < m; ++j) {
      const double up = row[j];
      const double reached = std::min(diagonal, up);  // independent of `left`
      diagonal = up;
      left = std::max(std::min(reached, left), d2(pi, j));
      row[j] = left;
    }
  }
  const double value_squared = row[m - 1];

  DistanceResult result;
  result.value = std::sqrt(value_squared);
  result.upper_bound = result.value;
  for (std::size_t i = 0; i < n; ++i) {
    for (std::size_t j = 0; j < m; ++j) {
      if (d2(p[i], j) == value_squared) {
        result.from = p[i];
        result.to = q[j];
        return result;
      }
    }
  }
  return result;  // unreachable: the value is one of the pair distances
}

}  // namespace waymark
