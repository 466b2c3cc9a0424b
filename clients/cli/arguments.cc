#include "clients/cli/arguments.h"

#include <charconv>
#include <filesystem>
#include <fstream>
#include <sstream>

namespace waymark::cli {

Result<Arguments> Arguments::parse(const std::vector<std::string>& words, const std::set<std::string>& value_flags,
                                   const std::set<std::string>& switches) {
  Arguments arguments;
  for (std::size_t i = 0; i < words.size(); ++i) {
    const std::string& word = words[i];
    if (word.rfind("--", 0) != 0 || word == "--") {
      arguments.operands_.push_back(word);
      continue;
    }
    std::string name = word.substr(2), value;
    bool has_inline_value = false;
    if (auto equals = name.find('='); equals != std::string::npos) {
      value = name.substr(equals + 1);
      name = name.substr(0, equals);
      has_inline_value = true;
    }
    if (switches.count(name)) {
      if (has_inline_value) return invalid_argument("--" + name + " takes no value");
      arguments.values_[name] = "";
    } else if (value_flags.count(name)) {
      if (!has_inline_value) {
        if (i + 1 >= words.size()) return invalid_argument("--" + name + " needs a value");
        value = words[++i];
      }
      arguments.values_[name] = value;
    } else {
      return invalid_argument("unknown option --" + name);
    }
  }
  return arguments;
}

std::optional<std::string> Arguments::value(const std::string& flag) const {
  auto found = values_.find(flag);
  if (found == values_.end()) return std::nullopt;
  return found->second;
}

std::string Arguments::value_or(const std::string& flag, const std::string& fallback) const {
  return value(flag).value_or(fallback);
}

Result<double> Arguments::number(const std::string& flag, double fallback) const {
  auto text = value(flag);
  if (!text) return fallback;
  double parsed = 0;
  auto [end, error] = std::from_chars(text->data(), text->data() + text->size(), parsed);
  if (error != std::errc() || end != text->data() + text->size()) {
    return invalid_argument("--" + flag + " expects a number, got '" + *text + "'");
  }
  return parsed;
}

Result<std::uint64_t> Arguments::count(const std::string& flag, std::uint64_t fallback) const {
  auto text = value(flag);
  if (!text) return fallback;
  std::uint64_t parsed = 0;
  auto [end, error] = std::from_chars(text->data(), text->data() + text->size(), parsed);
  if (error != std::errc() || end != text->data() + text->size()) {
    return invalid_argument("--" + flag + " expects a whole number, got '" + *text + "'");
  }
  return parsed;
}

Result<std::string> read_shape_argument(const std::string& argument) {
  std::error_code error;
  if (argument.size() < 4096 && std::filesystem::is_regular_file(argument, error)) {
    std::ifstream in(argument, std::ios::binary);
    if (!in) return Status(StatusCode::io_error, "cannot read '" + argument + "'");
    std::ostringstream contents;
    contents << in.rdbuf();
    return contents.str();
  }
  return argument;
}

}  // namespace waymark::cli
