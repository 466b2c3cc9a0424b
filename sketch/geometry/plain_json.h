// A read position over JSON text for the common forms that are read without building a JSON
// document (bulk ingest reads most of its bytes this way): JSON whitespace, single
// characters, strings of printable ASCII without escapes, numbers in JSON's grammar, and an
// object or array passed over by its brackets. Each reader returns false when the text is not
// in that plain form, and reports nothing: the caller then hands the whole input to a general
// JSON reader, whose errors are the ones users see.
#pragma once

#include <cstddef>
#include <string_view>

namespace waymark {

class PlainJsonCursor {
 public:
  explicit PlainJsonCursor(std::string_view text) : text_(text) {}

  std::size_t position() const { return position_; }
  bool at_end() const { return position_ >= text_.size(); }
  // Space, tab, line feed, carriage return. Inline, as take(): they run for every character.
  void skip_spaces() {
    while (!at_end() && (text_[position_] == ' ' || text_[position_] == '\t' || text_[position_] == '\n' ||
                         text_[position_] == '\r')) {
      ++position_;
    }
  }
  bool take(char c) {  // the next character, when it is c
    if (at_end() || text_[position_] != c) return false;
    ++position_;
    return true;
  }
  // A string whose characters are printable ASCII other than '"' and '\'; `out` is its text.
  bool read_plain_string(std::string_view& out);
  // An object member's name and its colon, with the spaces around them; the value follows.
  bool read_member_name(std::string_view& name);
  // A number in JSON's grammar (RFC 8259 §6), read as nlohmann_json reads it: correctly
  // rounded, an integer literal as an integer (so "-0" is +0.0); false when it is out of the
  // range of a finite double, over- or underflowing.
  bool read_number(double& value);
  // The object or array that starts here, passed over by its brackets (brackets inside strings
  // skipped); `out` is its text, which the caller still has to read.
  bool skip_container(std::string_view& out);
  // The same for an object only: false, with nothing read, when the value here is not one.
  bool skip_object(std::string_view& out) { return !at_end() && text_[position_] == '{' && skip_container(out); }
  // The object that starts here (after spaces), member by member: read_member(name) is called
  // with the cursor at each member's value, which it must read, returning false to give up.
  // True once the closing brace is read.
  template <typename ReadMember>
  bool read_object(ReadMember read_member) {
    return read_sequence('{', '}', [&] {
      std::string_view name;
      return read_member_name(name) && read_member(name);
    });
  }
  // The array that starts here (after spaces), element by element: read_element() is called
  // with the cursor at each element, which it must read, returning false to give up. True once
  // the closing bracket is read.
  template <typename ReadElement>
  bool read_array(ReadElement read_element) {
    return read_sequence('[', ']', read_element);
  }
  // The literal null.
  bool take_null() {
    if (text_.substr(position_, 4) != "null") return false;
    position_ += 4;
    return true;
  }

 private:
  bool skip_digits();
  // Items between `open` and `close`, separated by commas, each read by read_item() from its
  // first character; the one loop behind read_object and read_array.
  template <typename ReadItem>
  bool read_sequence(char open, char close, ReadItem read_item) {
    skip_spaces();
    if (!take(open)) return false;
    skip_spaces();
    if (take(close)) return true;
    while (true) {
      skip_spaces();
      if (!read_item()) return false;
      skip_spaces();
      if (take(close)) return true;
      if (!take(',')) return false;
    }
  }

  std::string_view text_;
  std::size_t position_ = 0;
};

}  // namespace waymark
