// Recall of an answer against the full scan's answer for the same query, summed over queries.
#pragma once

#include "index/collection.h"

namespace waymark::testing {

class RecallCount {
 public:
  // Counts how many of the full scan's hits the answer also returned.
  void add(const QueryAnswer& full_scan, const QueryAnswer& answer) {
    for (const QueryHit& truth : full_scan.hits) {
      ++wanted_;
      for (const QueryHit& hit : answer.hits) found_ += hit.id == truth.id;
    }
  }
  double recall() const { return wanted_ == 0 ? 1.0 : static_cast<double>(found_) / wanted_; }

 private:
  std::size_t found_ = 0, wanted_ = 0;
};

}  // namespace waymark::testing
