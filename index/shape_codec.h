// Compact binary encoding of a Shape for the store (format: index/STORE_FORMAT.md).
//
// encode_shape() never fails for a valid Shape. decode_shape() checks every length against the
// bytes that remain and against ShapeLimits before allocating, and reports data_loss with the
// byte offset of the problem; it never crashes on damaged input.
#pragma once

#include <string>
#include <string_view>

#include "sketch/geometry/shape.h"

namespace waymark {

std::string encode_shape(const Shape& shape);
Result<Shape> decode_shape(std::string_view bytes, const ShapeLimits& limits = {});

}  // namespace waymark
