// Landmark sets: the fixed points a collection's sketches measure distances from.
//
// A set has points q_i with weights w_i > 0, the domain box they were placed in, the layout
// that placed them, and a generation number (a collection re-fitting its landmarks gets a new
// generation; sketches of different generations are never compared). Uniform layouts weight
// every landmark 1/n, so the weighted L2 distance between two sketches is the root mean square
// of the per-landmark distance differences.
//
// Saved as a small text file (sketch/landmarks/LANDMARK_FILE.md) whose last line is a
// checksum of the rest; load_landmark_file() verifies it and reports the line of any problem.
// Thread safety: a value; concurrent reads are safe.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "sketch/geometry/shape.h"
#include "sketch/status.h"

namespace waymark {

enum class LandmarkLayout { grid, random, fitted };

const char* landmark_layout_name(LandmarkLayout layout);
Result<LandmarkLayout> parse_landmark_layout(const std::string& name);

struct LandmarkSet {
  std::uint64_t generation = 1;
  LandmarkLayout layout = LandmarkLayout::grid;
  Box domain;
  std::vector<Point> points;
  std::vector<double> weights;  // same length as points, each > 0

  std::size_t size() const { return points.size(); }
  // FNV-1a (64-bit) of the file form without its checksum line: equal sets, equal checksums.
  std::uint64_t checksum() const;
  friend bool operator==(const LandmarkSet&, const LandmarkSet&) = default;
};

// Limits on what a landmark set may hold; checked by the layouts and by the file reader
// before anything is allocated.
struct LandmarkLimits {
  std::size_t max_count = 4096;
};

// The unit frame's shapes lie in [-0.5, 0.5]²; landmarks go a margin beyond, so that shapes'
// outer sides are seen from outside too.
Box unit_frame_domain(double margin = 0.1);

// rows × cols = count with the factorisation closest to the domain's aspect ratio (a prime
// count gives one row), points at the cell centres. Errors: count 0 or over the limit, a
// domain without area.
Result<LandmarkSet> grid_landmarks(const Box& domain, std::size_t count, const LandmarkLimits& limits = {});

// Independent uniform points in the domain from a seeded generator; the same seed gives the
// same set on every platform.
Result<LandmarkSet> random_landmarks(const Box& domain, std::size_t count, std::uint64_t seed,
                                     const LandmarkLimits& limits = {});

std::string to_landmark_file(const LandmarkSet& set);
Result<LandmarkSet> parse_landmark_file(const std::string& text, const LandmarkLimits& limits = {});

Status save_landmark_file(const LandmarkSet& set, const std::string& path);
Result<LandmarkSet> load_landmark_file(const std::string& path, const LandmarkLimits& limits = {});

// Deterministic 64-bit generator (splitmix64) and a double in [0, 1) from it; shared by the
// layouts and the fitting so results do not depend on the standard library's distributions.
class SeededRandom {
 public:
  explicit SeededRandom(std::uint64_t seed) : state_(seed) {}
  std::uint64_t next();
  double uniform();  // [0, 1)
  std::size_t below(std::size_t bound);  // [0, bound), bound > 0

 private:
  std::uint64_t state_;
};

}  // namespace waymark
