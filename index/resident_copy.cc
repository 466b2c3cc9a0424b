#include "index/resident_copy.h"

#include <algorithm>
#include <atomic>
#include <bit>
#include <cmath>
#include <cstring>
#include <limits>
#include <utility>

#include "index/collection.h"

namespace waymark {
namespace {

std::atomic<std::size_t> bytes_in_use{0};
std::atomic<std::size_t> capacity{std::size_t{1} << 30};

// Layout, in 32-bit words: kind, part count P, P part lengths, P ring-to-polygon indices
// (polygon kind only), the box centre as two doubles (4 words), the displacement as a float,
// then x and y of every vertex as floats, relative to the centre.
constexpr std::size_t kCentreWords = 4;
constexpr double kLargestFloat = std::numeric_limits<float>::max();

std::uint32_t float_word(float value) { return std::bit_cast<std::uint32_t>(value); }
float word_float(std::uint32_t word) { return std::bit_cast<float>(word); }

}  // namespace

std::size_t resident_copy_bytes() { return bytes_in_use.load(); }
std::size_t resident_copy_capacity() { return capacity.load(); }
void set_resident_copy_capacity(std::size_t bytes) { capacity.store(bytes); }

ResidentCopy ResidentCopy::of(const Shape& shape, Frame frame) {
  const std::size_t parts = shape.parts.size();
  const bool polygon = shape.kind == ShapeKind::polygon;
  const std::size_t header = 2 + parts * (polygon ? 2 : 1) + kCentreWords + 1;
  const std::size_t words = header + 2 * shape.vertex_count();
  const std::size_t bytes = words * sizeof(std::uint32_t);
  if (bytes_in_use.fetch_add(bytes) + bytes > capacity.load()) {
    bytes_in_use.fetch_sub(bytes);
    return {};
  }
  ResidentCopy copy;
  copy.words_ = std::make_unique_for_overwrite<std::uint32_t[]>(words);
  copy.word_count_ = words;  // from here on the destructor returns the bytes
  std::uint32_t* out = copy.words_.get();
  *out++ = static_cast<std::uint32_t>(shape.kind);
  *out++ = static_cast<std::uint32_t>(parts);
  for (const Path& part : shape.parts) *out++ = static_cast<std::uint32_t>(part.size());
  if (polygon) {
    for (std::size_t i = 0; i < parts; ++i) *out++ = shape.polygon_of_ring[i];
  }
  // Relative to (about) the placed box's centre, the floats' rounding is relative to the
  // shape's extent, not to its distance from the frame's origin. A placement other than the
  // absolute frame's already puts that centre at the origin.
  const FramePlacement placement = frame_placement(shape, frame);
  Point centre{0, 0};
  if (frame == Frame::absolute) {
    const Box box = bounding_box(shape);
    centre = {box.min_x / 2 + box.max_x / 2, box.min_y / 2 + box.max_y / 2};
  }
  std::memcpy(out, &centre.x, sizeof(double));
  std::memcpy(out + 2, &centre.y, sizeof(double));
  out += kCentreWords;
  std::uint32_t* displacement_word = out++;
  double largest_squared = 0;
  bool finite = true;  // checked once after the loop, which then has no exit
  for (const Path& part : shape.parts) {
    for (const Point& given : part) {
      const Point p = placement.place(given);
      // Clamped before the conversion, which is undefined beyond the float range.
      const double relative_x = p.x - centre.x, relative_y = p.y - centre.y;
      finite = finite && std::fabs(relative_x) <= kLargestFloat && std::fabs(relative_y) <= kLargestFloat;
      const float x = static_cast<float>(std::clamp(relative_x, -kLargestFloat, kLargestFloat));
      const float y = static_cast<float>(std::clamp(relative_y, -kLargestFloat, kLargestFloat));
      // The same arithmetic as decode(), so the distance is to the vertex it will return.
      const double dx = p.x - (centre.x + x), dy = p.y - (centre.y + y);
      largest_squared = std::max(largest_squared, dx * dx + dy * dy);
      *out++ = float_word(x);
      *out++ = float_word(y);
    }
  }
  if (!finite) return {};
  // Rounded up for the squares, their sum and the root (a few ulps), then for the float.
  const float bound =
      std::nextafter(static_cast<float>(std::min(std::sqrt(largest_squared) * (1 + 1e-9), kLargestFloat)),
                     std::numeric_limits<float>::infinity());
  if (!std::isfinite(bound)) return {};
  *displacement_word = float_word(bound);
  return copy;
}

ResidentCopy::ResidentCopy(ResidentCopy&& other) noexcept
    : words_(std::move(other.words_)), word_count_(std::exchange(other.word_count_, 0)) {}

ResidentCopy& ResidentCopy::operator=(ResidentCopy&& other) noexcept {
  if (this != &other) {
    bytes_in_use.fetch_sub(bytes());
    words_ = std::move(other.words_);
    word_count_ = std::exchange(other.word_count_, 0);
  }
  return *this;
}

ResidentCopy::~ResidentCopy() { bytes_in_use.fetch_sub(bytes()); }

void ResidentCopy::decode(Decoded& decoded) const {
  const std::uint32_t* in = words_.get();
  decoded.shape.kind = static_cast<ShapeKind>(*in++);
  const std::size_t parts = *in++;
  decoded.shape.parts.resize(parts);
  for (Path& part : decoded.shape.parts) part.resize(*in++);
  if (decoded.shape.kind == ShapeKind::polygon) {
    decoded.shape.polygon_of_ring.assign(in, in + parts);
    in += parts;
  } else {
    decoded.shape.polygon_of_ring.clear();
  }
  Point centre;
  std::memcpy(&centre.x, in, sizeof(double));
  std::memcpy(&centre.y, in + 2, sizeof(double));
  in += kCentreWords;
  decoded.displacement = word_float(*in++);
  for (Path& part : decoded.shape.parts) {
    for (Point& p : part) {
      p.x = centre.x + word_float(in[0]);
      p.y = centre.y + word_float(in[1]);
      in += 2;
    }
  }
}

}  // namespace waymark
