#include "sketch/geometry/plain_json.h"

#include <array>
#include <charconv>
#include <cmath>

namespace waymark {

bool PlainJsonCursor::read_plain_string(std::string_view& out) {
  if (!take('"')) return false;
  const std::size_t begin = position_;
  while (!at_end() && text_[position_] != '"') {
    const unsigned char c = static_cast<unsigned char>(text_[position_]);
    if (c < 0x20 || c > 0x7e || c == '\\') return false;
    ++position_;
  }
  if (at_end()) return false;
  out = text_.substr(begin, position_ - begin);
  ++position_;
  return true;
}

bool PlainJsonCursor::read_member_name(std::string_view& name) {
  skip_spaces();
  if (!read_plain_string(name)) return false;
  skip_spaces();
  if (!take(':')) return false;
  skip_spaces();
  return true;
}

bool PlainJsonCursor::skip_digits() {
  const std::size_t begin = position_;
  while (!at_end() && text_[position_] >= '0' && text_[position_] <= '9') ++position_;
  return position_ > begin;
}

bool PlainJsonCursor::read_number(double& value) {
  const std::size_t begin = position_;
  take('-');
  if (!take('0') && !(!at_end() && text_[position_] >= '1' && text_[position_] <= '9' && skip_digits())) {
    return false;
  }
  bool integer = true;
  if (take('.')) {
    integer = false;
    if (!skip_digits()) return false;
  }
  if (take('e') || take('E')) {
    integer = false;
    if (!take('+')) take('-');
    if (!skip_digits()) return false;
  }
  const char* first = text_.data() + begin;
  const char* last = text_.data() + position_;
  const auto [end, error] = std::from_chars(first, last, value, std::chars_format::general);
  if (error != std::errc() || end != last || !std::isfinite(value)) return false;
  // nlohmann reads an integer literal as an integer: "-0" is 0, whose double is +0.0. Any other
  // integer converts to the nearest double, which is where from_chars rounds its digits too.
  if (integer && value == 0) value = 0.0;
  return true;
}

namespace {

// The bytes a container scan must look at: quotes, backslashes, brackets and braces. Every
// other byte (digits, signs, commas, spaces: nearly all of a coordinate array) is passed over
// by one table lookup each. perf of an HTTP bulk ingest of 64-vertex LineStrings had the
// scan, with a chain of comparisons per byte, as the server's largest item (18 % of its time).
constexpr std::array<bool, 256> kContainerBytes = [] {
  std::array<bool, 256> table{};
  for (const unsigned char c : std::string_view("\"\\[]{}")) table[c] = true;
  return table;
}();

}  // namespace

bool PlainJsonCursor::skip_container(std::string_view& out) {
  if (at_end() || (text_[position_] != '{' && text_[position_] != '[')) return false;
  int depth = 0;
  bool in_string = false;
  const std::size_t size = text_.size();
  for (std::size_t i = position_; i < size; ++i) {
    while (i < size && !kContainerBytes[static_cast<unsigned char>(text_[i])]) ++i;
    if (i == size) break;
    const char c = text_[i];
    if (in_string) {
      if (c == '\\') {
        ++i;
      } else if (c == '"') {
        in_string = false;
      }
    } else if (c == '"') {
      in_string = true;
    } else if (c == '{' || c == '[') {
      ++depth;
    } else if ((c == '}' || c == ']') && --depth == 0) {
      out = text_.substr(position_, i + 1 - position_);
      position_ = i + 1;
      return true;
    }
  }
  return false;
}

}  // namespace waymark
