// Internal to index/: in-memory float copies of stored shapes, so that a query can refuse a
// candidate by the decision procedure without reading its record from the store.
//
// Why it is sound: every vertex of the copy lies within displacement() of the stored shape's
// vertex (computed exactly when the copy is made), and moving each vertex of a polyline,
// polygon boundary or point set by at most δ moves the shape by at most δ under Hausdorff,
// Fréchet and discrete Fréchet (pair each point with the one at the same parameter). So
// d(Q, stored) ≥ d(Q, copy) − δ, and a copy proven farther than threshold + δ proves the
// stored shape farther than threshold. It never proves a shape near: exact values are always
// computed on the stored doubles.
//
// Memory: 4 bytes per coordinate (8 per vertex), plus 7 words and one word per part (two per
// polygon ring). Every collection of the process draws from one capacity
// (set_resident_copy_capacity in collection.h); a shape that would pass it gets no copy and
// its candidates are read from the store as before.
#pragma once

#include <cstddef>
#include <cstdint>
#include <memory>

#include "sketch/geometry/shape.h"

namespace waymark {

class ResidentCopy {
 public:
  ResidentCopy() = default;
  // A copy of `shape` placed in `frame` (each vertex exactly as apply_frame places it, so
  // without building the placed shape); empty when the capacity would be passed or a placed
  // coordinate, relative to the placed box centre, has no finite float. O(vertices).
  static ResidentCopy of(const Shape& shape, Frame frame);
  ResidentCopy(ResidentCopy&& other) noexcept;
  ResidentCopy& operator=(ResidentCopy&& other) noexcept;
  ~ResidentCopy();  // returns its bytes to the capacity

  bool empty() const { return words_ == nullptr; }
  std::size_t bytes() const { return word_count_ * sizeof(std::uint32_t); }

  struct Decoded {
    Shape shape;
    double displacement = 0;  // no vertex of `shape` is farther than this from the stored one
  };
  // Fills `into` (reusing its vectors' memory: a query decodes hundreds of copies). Precondition:
  // !empty(). O(vertices).
  void decode(Decoded& into) const;

 private:
  std::unique_ptr<std::uint32_t[]> words_;
  std::size_t word_count_ = 0;
};

}  // namespace waymark
