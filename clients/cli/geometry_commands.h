// The CLI's local geometry commands. Each takes the words after its name and returns the
// process exit status: 0 on success, 2 for bad input or usage, 1 for other failures; errors
// go to standard error as "waymark: message (at where)".
#pragma once

#include <string>
#include <vector>

namespace waymark::cli {

int distance_command(const std::vector<std::string>& words);
int landmarks_command(const std::vector<std::string>& words);
int sketch_command(const std::vector<std::string>& words);

}  // namespace waymark::cli
