// Internal to sketch/geometry: a read position over text that can say where it is as
// "line L, column C (byte B)", shared by the WKT and SVG path parsers.
#pragma once

#include <cctype>
#include <charconv>
#include <cmath>
#include <cstddef>
#include <string>
#include <string_view>

namespace waymark::detail {

class TextCursor {
 public:
  explicit TextCursor(std::string_view text) : text_(text) {}

  bool at_end() const { return position_ >= text_.size(); }
  char peek() const { return at_end() ? '\0' : text_[position_]; }
  std::size_t position() const { return position_; }
  void advance(std::size_t count = 1) { position_ += count; }
  std::string_view rest() const { return text_.substr(position_); }

  void skip_spaces() {
    while (!at_end() && std::isspace(static_cast<unsigned char>(text_[position_]))) ++position_;
  }

  // Skips spaces and at most one comma (SVG path data separators).
  void skip_separators() {
    skip_spaces();
    if (peek() == ',') {
      ++position_;
      skip_spaces();
    }
  }

  // Reads a decimal floating-point number (sign, digits, fraction, exponent). Returns false
  // and leaves the position unchanged when none starts here. Rejects "nan"/"inf" spellings.
  bool read_number(double& value) {
    const char* begin = text_.data() + position_;
    const char* end = text_.data() + text_.size();
    if (begin < end && *begin == '+') ++begin;  // from_chars does not take a leading '+'
    // Only digit-led spellings: from_chars would also take "inf" and "nan".
    const char* first_digit = (begin < end && *begin == '-') ? begin + 1 : begin;
    if (first_digit >= end || !(std::isdigit(static_cast<unsigned char>(*first_digit)) || *first_digit == '.')) {
      return false;
    }
    auto [next, error] = std::from_chars(begin, end, value, std::chars_format::general);
    if (error == std::errc::result_out_of_range) value = (*begin == '-') ? -HUGE_VAL : HUGE_VAL;
    else if (error != std::errc()) return false;
    position_ = static_cast<std::size_t>(next - text_.data());
    return true;
  }

  // Reads letters (a keyword); empty when none.
  std::string read_word() {
    std::string word;
    while (!at_end() && std::isalpha(static_cast<unsigned char>(text_[position_]))) {
      word += static_cast<char>(std::toupper(static_cast<unsigned char>(text_[position_])));
      ++position_;
    }
    return word;
  }

  std::string where() const { return where_at(position_); }

  std::string where_at(std::size_t byte) const {
    std::size_t line = 1, column = 1;
    for (std::size_t i = 0; i < byte && i < text_.size(); ++i) {
      if (text_[i] == '\n') {
        ++line;
        column = 1;
      } else {
        ++column;
      }
    }
    return "line " + std::to_string(line) + ", column " + std::to_string(column) + " (byte " +
           std::to_string(byte) + ")";
  }

  // What is at the current position, for messages: "'x'" or "end of input".
  std::string describe_here() const {
    if (at_end()) return "end of input";
    return std::string("'") + text_[position_] + "'";
  }

 private:
  std::string_view text_;
  std::size_t position_ = 0;
};

}  // namespace waymark::detail
