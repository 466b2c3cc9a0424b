#include "index/shape_codec.h"

#include <cstdint>
#include <cstring>

namespace waymark {
namespace {

constexpr std::uint8_t kVersion = 1;

template <typename T>
void put(std::string& out, T value) {
  char bytes[sizeof(T)];
  std::memcpy(bytes, &value, sizeof(T));  // little-endian hosts only (x86-64, arm64)
  out.append(bytes, sizeof(T));
}

class Reader {
 public:
  explicit Reader(std::string_view bytes) : bytes_(bytes) {}
  template <typename T>
  bool get(T& value) {
    if (bytes_.size() - offset_ < sizeof(T)) return false;
    std::memcpy(&value, bytes_.data() + offset_, sizeof(T));
    offset_ += sizeof(T);
    return true;
  }
  std::size_t offset() const { return offset_; }
  std::size_t remaining() const { return bytes_.size() - offset_; }

 private:
  std::string_view bytes_;
  std::size_t offset_ = 0;
};

}  // namespace

std::string encode_shape(const Shape& shape) {
  std::string out;
  out.reserve(8 + shape.parts.size() * 8 + shape.vertex_count() * 16);
  put<std::uint8_t>(out, kVersion);
  put<std::uint8_t>(out, static_cast<std::uint8_t>(shape.kind));
  put<std::uint32_t>(out, static_cast<std::uint32_t>(shape.parts.size()));
  for (std::size_t i = 0; i < shape.parts.size(); ++i) {
    put<std::uint32_t>(out, static_cast<std::uint32_t>(shape.parts[i].size()));
    if (shape.kind == ShapeKind::polygon) put<std::uint32_t>(out, shape.polygon_of_ring[i]);
    for (const Point& p : shape.parts[i]) {
      put<double>(out, p.x);
      put<double>(out, p.y);
    }
  }
  return out;
}

Result<Shape> decode_shape(std::string_view bytes, const ShapeLimits& limits) {
  Reader reader(bytes);
  auto damaged = [&](const std::string& what) {
    return Status(StatusCode::data_loss, "stored shape is damaged: " + what, "byte " + std::to_string(reader.offset()));
  };
  std::uint8_t version = 0, kind = 0;
  std::uint32_t part_count = 0;
  if (!reader.get(version) || version != kVersion) return damaged("unknown encoding version");
  if (!reader.get(kind) || kind > static_cast<std::uint8_t>(ShapeKind::polygon)) return damaged("unknown shape kind");
  if (!reader.get(part_count) || part_count == 0 || part_count > limits.max_parts) return damaged("bad part count");
  Shape shape;
  shape.kind = static_cast<ShapeKind>(kind);
  std::size_t vertices = 0;
  for (std::uint32_t i = 0; i < part_count; ++i) {
    std::uint32_t count = 0, polygon = 0;
    if (!reader.get(count)) return damaged("truncated part header");
    if (shape.kind == ShapeKind::polygon && !reader.get(polygon)) return damaged("truncated part header");
    vertices += count;
    if (vertices > limits.max_vertices || reader.remaining() < std::size_t{count} * 16) {
      return damaged("vertex count exceeds the data or the limit");
    }
    Path path(count);
    for (Point& p : path) {
      reader.get(p.x);
      reader.get(p.y);
    }
    shape.parts.push_back(std::move(path));
    if (shape.kind == ShapeKind::polygon) shape.polygon_of_ring.push_back(polygon);
  }
  if (reader.remaining() != 0) return damaged("trailing bytes");
  if (Status valid = validate(shape, limits); !valid.is_ok()) return damaged(valid.to_string());
  return shape;
}

}  // namespace waymark
