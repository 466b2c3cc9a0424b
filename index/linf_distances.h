// The L∞ distance kernel shared by the exhaustive index (index/vector_index.cc, where it is
// defined) and the graph's storage and search (index/approximate_index.cc). Internal to index/.
#pragma once

#include <cstddef>

namespace waymark {

// L∞ distance over the first `dimension` coordinates from `query` to each of `count` rows that
// lie `stride` floats apart, into out[row]. Vectorised (GCC vector extensions, one clone per
// instruction set). Values must be finite. O(count · dimension).
void linf_distances(const float* rows, std::size_t count, std::size_t stride, std::size_t dimension,
                    const float* query, float* out);

}  // namespace waymark
