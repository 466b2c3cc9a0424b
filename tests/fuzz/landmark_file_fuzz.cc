// Fuzz target: the landmark file reader. A file that parses must write back to text that parses
// to the same set.
#include <cstdint>
#include <cstdlib>
#include <string>

#include "sketch/landmarks/landmark_set.h"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string text(reinterpret_cast<const char*>(data), size);
  waymark::Result<waymark::LandmarkSet> set = waymark::parse_landmark_file(text);
  if (!set) return 0;
  waymark::Result<waymark::LandmarkSet> again = waymark::parse_landmark_file(waymark::to_landmark_file(*set));
  if (!again || again->size() != set->size() || again->checksum() != set->checksum()) std::abort();
  return 0;
}
