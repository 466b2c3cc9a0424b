// Fuzz target: the store's binary shape decoder, which reads bytes that a damaged disk may have
// changed. A record that decodes must encode back to the same bytes' meaning.
#include <cstdint>
#include <cstdlib>
#include <string_view>

#include "index/shape_codec.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view bytes(reinterpret_cast<const char*>(data), size);
  waymark::ShapeLimits limits;
  limits.max_vertices = 20'000;
  waymark::Result<waymark::Shape> shape = waymark::decode_shape(bytes, limits);
  if (!shape) return 0;
  waymark::Result<waymark::Shape> again = waymark::decode_shape(waymark::encode_shape(*shape), limits);
  if (!again || !(*again == *shape)) std::abort();
  return 0;
}
