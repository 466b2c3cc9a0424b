#include "sketch/landmarks/landmark_set.h"

#include <cinttypes>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <sstream>

#include "sketch/durable_file.h"
#include "sketch/geometry/text_cursor.h"

namespace waymark {
namespace {

constexpr const char* kMagic = "waymark-landmarks 1";

std::string format_number(double value) {
  char buffer[32];
  std::snprintf(buffer, sizeof buffer, "%.17g", value);
  return buffer;
}

std::string body_of(const LandmarkSet& set) {
  std::string out = std::string(kMagic) + "\n";
  out += "generation " + std::to_string(set.generation) + "\n";
  out += std::string("layout ") + landmark_layout_name(set.layout) + "\n";
  out += "domain " + format_number(set.domain.min_x) + " " + format_number(set.domain.min_y) + " " +
         format_number(set.domain.max_x) + " " + format_number(set.domain.max_y) + "\n";
  out += "count " + std::to_string(set.size()) + "\n";
  for (std::size_t i = 0; i < set.size(); ++i) {
    out += format_number(set.points[i].x) + " " + format_number(set.points[i].y) + " " + format_number(set.weights[i]) +
           "\n";
  }
  return out;
}

Status check_request(const Box& domain, std::size_t count, const LandmarkLimits& limits) {
  if (count == 0) return invalid_argument("landmark count must be at least 1");
  if (count > limits.max_count) {
    return Status(StatusCode::resource_exhausted,
                  "landmark count " + std::to_string(count) + " is over the limit of " + std::to_string(limits.max_count));
  }
  if (!(domain.width() > 0) || !(domain.height() > 0) || !std::isfinite(domain.width()) ||
      !std::isfinite(domain.height())) {
    return invalid_argument("landmark domain must be a finite box with positive width and height");
  }
  return Status::ok();
}

}  // namespace

std::uint64_t SeededRandom::next() {
  std::uint64_t z = (state_ += 0x9e3779b97f4a7c15ull);
  z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
  z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
  return z ^ (z >> 31);
}

double SeededRandom::uniform() { return static_cast<double>(next() >> 11) * 0x1.0p-53; }

std::size_t SeededRandom::below(std::size_t bound) { return static_cast<std::size_t>(uniform() * bound) % bound; }

const char* landmark_layout_name(LandmarkLayout layout) {
  switch (layout) {
    case LandmarkLayout::grid: return "grid";
    case LandmarkLayout::random: return "random";
    case LandmarkLayout::fitted: return "fitted";
  }
  return "unknown";
}

Result<LandmarkLayout> parse_landmark_layout(const std::string& name) {
  if (name == "grid") return LandmarkLayout::grid;
  if (name == "random") return LandmarkLayout::random;
  if (name == "fitted") return LandmarkLayout::fitted;
  return invalid_argument("unknown landmark layout '" + name + "' (expected grid, random or fitted)");
}

std::uint64_t LandmarkSet::checksum() const { return fnv1a64(body_of(*this)); }

Box unit_frame_domain(double margin) { return {-0.5 - margin, -0.5 - margin, 0.5 + margin, 0.5 + margin}; }

Result<LandmarkSet> grid_landmarks(const Box& domain, std::size_t count, const LandmarkLimits& limits) {
  if (Status s = check_request(domain, count, limits); !s.is_ok()) return s;
  const double aspect = domain.width() / domain.height();
  std::size_t best_rows = 1;
  double best_mismatch = INFINITY;
  for (std::size_t rows = 1; rows <= count; ++rows) {
    if (count % rows != 0) continue;
    const double cols = static_cast<double>(count / rows);
    const double mismatch = std::fabs(std::log((cols / rows) / aspect));
    if (mismatch < best_mismatch) {
      best_mismatch = mismatch;
      best_rows = rows;
    }
  }
  const std::size_t rows = best_rows, cols = count / rows;
  LandmarkSet set;
  set.layout = LandmarkLayout::grid;
  set.domain = domain;
  for (std::size_t r = 0; r < rows; ++r) {
    for (std::size_t c = 0; c < cols; ++c) {
      set.points.push_back({domain.min_x + (c + 0.5) * domain.width() / cols,
                            domain.min_y + (r + 0.5) * domain.height() / rows});
    }
  }
  set.weights.assign(count, 1.0 / count);
  return set;
}

Result<LandmarkSet> random_landmarks(const Box& domain, std::size_t count, std::uint64_t seed,
                                     const LandmarkLimits& limits) {
  if (Status s = check_request(domain, count, limits); !s.is_ok()) return s;
  SeededRandom random(seed);
  LandmarkSet set;
  set.layout = LandmarkLayout::random;
  set.domain = domain;
  for (std::size_t i = 0; i < count; ++i) {
    const double x = domain.min_x + random.uniform() * domain.width();
    const double y = domain.min_y + random.uniform() * domain.height();
    set.points.push_back({x, y});
  }
  set.weights.assign(count, 1.0 / count);
  return set;
}

std::string to_landmark_file(const LandmarkSet& set) {
  char checksum[40];
  std::snprintf(checksum, sizeof checksum, "checksum %016" PRIx64 "\n", set.checksum());
  return body_of(set) + checksum;
}

Result<LandmarkSet> parse_landmark_file(const std::string& text, const LandmarkLimits& limits) {
  std::vector<std::string> lines;
  std::vector<std::size_t> line_starts;
  for (std::size_t start = 0; start < text.size();) {
    std::size_t end = text.find('\n', start);
    if (end == std::string::npos) end = text.size();
    line_starts.push_back(start);
    lines.push_back(text.substr(start, end - start));
    start = end + 1;
  }
  auto fail = [&](std::size_t line, const std::string& message) {
    return Status(StatusCode::data_loss, "landmark file: " + message, "line " + std::to_string(line + 1));
  };
  if (lines.empty() || lines[0] != kMagic) return fail(0, std::string("expected the header '") + kMagic + "'");
  if (lines.size() < 6) return fail(lines.size() - 1, "file ends before the landmark list");

  // The checksum covers every byte before the checksum line; verify before trusting any field.
  const std::string& last = lines.back();
  std::uint64_t stated = 0;
  if (std::sscanf(last.c_str(), "checksum %" SCNx64, &stated) != 1) {
    return fail(lines.size() - 1, "last line must be 'checksum <16 hex digits>' (file truncated?)");
  }
  const std::uint64_t actual = fnv1a64(text.substr(0, line_starts.back()));
  if (stated != actual) {
    char message[128];
    std::snprintf(message, sizeof message, "checksum mismatch: file says %016" PRIx64 ", content hashes to %016" PRIx64,
                  stated, actual);
    return fail(lines.size() - 1, message);
  }

  LandmarkSet set;
  unsigned long long generation = 0;
  char layout_name[16] = {};
  std::size_t count = 0;
  if (std::sscanf(lines[1].c_str(), "generation %llu", &generation) != 1) return fail(1, "expected 'generation N'");
  if (std::sscanf(lines[2].c_str(), "layout %15s", layout_name) != 1) return fail(2, "expected 'layout NAME'");
  Result<LandmarkLayout> layout = parse_landmark_layout(layout_name);
  if (!layout) return fail(2, layout.status().message());
  if (std::sscanf(lines[3].c_str(), "domain %lf %lf %lf %lf", &set.domain.min_x, &set.domain.min_y, &set.domain.max_x,
                  &set.domain.max_y) != 4) {
    return fail(3, "expected 'domain MIN_X MIN_Y MAX_X MAX_Y'");
  }
  if (std::sscanf(lines[4].c_str(), "count %zu", &count) != 1) return fail(4, "expected 'count N'");
  if (count == 0 || count > limits.max_count) {
    return fail(4, "landmark count " + std::to_string(count) + " is outside 1.." + std::to_string(limits.max_count));
  }
  if (lines.size() != count + 6) {
    return fail(lines.size() - 1, "expected " + std::to_string(count) + " landmark lines, found " +
                                      std::to_string(lines.size() - 6));
  }
  set.generation = generation;
  set.layout = *layout;
  set.points.reserve(count);
  set.weights.reserve(count);
  for (std::size_t i = 0; i < count; ++i) {
    detail::TextCursor cursor(lines[5 + i]);
    double x, y, w;
    bool ok = true;
    for (double* value : {&x, &y, &w}) {
      cursor.skip_spaces();
      ok = ok && cursor.read_number(*value) && std::isfinite(*value);
    }
    cursor.skip_spaces();
    if (!ok || !cursor.at_end()) return fail(5 + i, "expected three finite numbers: x y weight");
    if (!(w > 0)) return fail(5 + i, "landmark weight must be positive");
    set.points.push_back({x, y});
    set.weights.push_back(w);
  }
  return set;
}

Status save_landmark_file(const LandmarkSet& set, const std::string& path) {
  return write_file_atomically(path, to_landmark_file(set));
}

Result<LandmarkSet> load_landmark_file(const std::string& path, const LandmarkLimits& limits) {
  std::ifstream in(path, std::ios::binary);
  if (!in) return Status(StatusCode::io_error, "cannot open landmark file '" + path + "'");
  std::ostringstream contents;
  contents << in.rdbuf();
  Result<LandmarkSet> set = parse_landmark_file(contents.str(), limits);
  if (!set) {
    const Status& s = set.status();
    return Status(s.code(), s.message(), path + ", " + s.where());
  }
  return set;
}

}  // namespace waymark
