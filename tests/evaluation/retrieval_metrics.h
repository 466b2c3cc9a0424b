// Retrieval-quality measures for labelled shape sets, as used by the evaluation report.
//
// A ranking is given as the list of "is this result relevant" flags in rank order (relevant =
// same label as the query, the query itself left out), plus the number of relevant shapes in
// the whole collection.
//
//   precision@k = relevant results among the first k / k (a ranking shorter than k counts the
//                 missing places as not relevant).
//   average precision@k = Σ_{i ≤ k, result i relevant} precision@i / min(k, relevant in
//                 collection): the usual truncated form (e.g. TREC's trec_eval "map_cut"; from
//                 memory), so a ranking that puts min(k, R) relevant shapes first scores 1.
//   mean average precision = the mean of average precision@k over queries.
#pragma once

#include <algorithm>
#include <cstddef>
#include <vector>

namespace waymark::evaluation {

inline double precision_at(const std::vector<bool>& relevant, std::size_t k) {
  if (k == 0) return 0;
  std::size_t hits = 0;
  for (std::size_t i = 0; i < std::min(k, relevant.size()); ++i) hits += relevant[i];
  return static_cast<double>(hits) / static_cast<double>(k);
}

inline double average_precision_at(const std::vector<bool>& relevant, std::size_t k, std::size_t relevant_in_collection) {
  const std::size_t ideal = std::min(k, relevant_in_collection);
  if (ideal == 0) return 0;
  double sum = 0;
  std::size_t hits = 0;
  for (std::size_t i = 0; i < std::min(k, relevant.size()); ++i) {
    if (!relevant[i]) continue;
    ++hits;
    sum += static_cast<double>(hits) / static_cast<double>(i + 1);
  }
  return sum / static_cast<double>(ideal);
}

// Running means of the four figures the report's quality table shows.
struct QualitySums {
  double precision_1 = 0, precision_5 = 0, precision_10 = 0, average_precision_10 = 0;
  std::size_t queries = 0;

  void add(const std::vector<bool>& relevant, std::size_t relevant_in_collection) {
    precision_1 += precision_at(relevant, 1);
    precision_5 += precision_at(relevant, 5);
    precision_10 += precision_at(relevant, 10);
    average_precision_10 += average_precision_at(relevant, 10, relevant_in_collection);
    ++queries;
  }
  double mean(double sum) const { return queries == 0 ? 0 : sum / static_cast<double>(queries); }
};

}  // namespace waymark::evaluation
