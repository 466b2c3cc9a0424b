// Discrete Fréchet distance (Eiter & Mannila 1994), one row of the coupling table at a time.
// Works on squared distances (monotone, so min/max commute with the square root) and carries,
// for every cell, the vertex pair that sets its value: the witness of the bottleneck.
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <vector>

#include "sketch/distance/frechet.h"

namespace waymark {

DistanceResult discrete_frechet(const Path& p, const Path& q) {
  const std::size_t n = p.size(), m = q.size();
  struct Cell {
    double value;         // squared coupling distance of the prefix pair
    std::uint32_t i, j;   // the pair that attains it
  };
  thread_local std::vector<Cell> row;  // row[j] holds cell (i − 1, j) until overwritten by (i, j)
  row.resize(m);
  auto d2 = [&](std::size_t i, std::size_t j) {
    const double dx = p[i].x - q[j].x, dy = p[i].y - q[j].y;
    return dx * dx + dy * dy;
  };
  auto combine = [](const Cell& reached, double here, std::size_t i, std::size_t j) {
    return here >= reached.value ? Cell{here, static_cast<std::uint32_t>(i), static_cast<std::uint32_t>(j)} : reached;
  };
  row[0] = {d2(0, 0), 0, 0};
  for (std::size_t j = 1; j < m; ++j) row[j] = combine(row[j - 1], d2(0, j), 0, j);
  for (std::size_t i = 1; i < n; ++i) {
    Cell diagonal = row[0];
    row[0] = combine(row[0], d2(i, 0), i, 0);
    const Point pi = p[i];
    for (std::size_t j = 1; j < m; ++j) {
      const Cell up = row[j];
      const Cell& left = row[j - 1];
      const Cell* best = &diagonal;
      if (up.value < best->value) best = &up;
      if (left.value < best->value) best = &left;
      const double dx = pi.x - q[j].x, dy = pi.y - q[j].y;
      const double here = dx * dx + dy * dy;
      const Cell next = combine(*best, here, i, j);
      diagonal = up;
      row[j] = next;
    }
  }
  const Cell& end = row[m - 1];
  DistanceResult result;
  result.value = std::sqrt(end.value);
  result.upper_bound = result.value;
  result.from = p[end.i];
  result.to = q[end.j];
  return result;
}

}  // namespace waymark
