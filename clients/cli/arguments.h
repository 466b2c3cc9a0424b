// Command-line arguments for the `waymark` executable: "--name value" and "--name=value"
// flags, bare "--switch" flags, and positional operands, in any order.
#pragma once

#include <map>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include "sketch/status.h"

namespace waymark::cli {

class Arguments {
 public:
  // `switches` names the flags that take no value. Unknown flags are an error, as is a flag
  // that needs a value and has none.
  static Result<Arguments> parse(const std::vector<std::string>& words, const std::set<std::string>& value_flags,
                                 const std::set<std::string>& switches);

  bool has(const std::string& flag) const { return values_.count(flag) > 0; }
  std::optional<std::string> value(const std::string& flag) const;
  std::string value_or(const std::string& flag, const std::string& fallback) const;
  Result<double> number(const std::string& flag, double fallback) const;
  Result<std::uint64_t> count(const std::string& flag, std::uint64_t fallback) const;
  const std::vector<std::string>& operands() const { return operands_; }

 private:
  std::map<std::string, std::string> values_;
  std::vector<std::string> operands_;
};

// A shape argument is a file's path when such a file exists, else the shape text itself.
Result<std::string> read_shape_argument(const std::string& argument);

}  // namespace waymark::cli
