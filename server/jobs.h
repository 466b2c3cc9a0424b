// Background jobs of waymarkd: landmark refits (Collection::refit), one thread each.
//
// A job is visible from the moment it starts until the runner is destroyed (the newest
// `max_finished_kept` finished jobs are kept; older finished ones are forgotten). Jobs live in
// memory only: after a restart a refit that had switched is simply the collection's current
// generation, and one that had not left the old generation serving (index/collection.h).
//
// Thread safety: every member may be called from any thread. The destructor cancels running
// jobs and waits for their threads.
#pragma once

#include <chrono>
#include <cstdint>
#include <list>
#include <memory>
#include <mutex>
#include <nlohmann/json.hpp>
#include <string>
#include <thread>

#include "index/collection.h"

namespace waymark::server {

class JobRunner {
 public:
  explicit JobRunner(std::size_t max_finished_kept = 100) : max_finished_kept_(max_finished_kept) {}
  ~JobRunner();
  JobRunner(const JobRunner&) = delete;
  JobRunner& operator=(const JobRunner&) = delete;

  // Starts refitting `collection` (named `name`) on a new thread and returns the job's
  // description. failed_precondition when a refit of that collection is still running.
  Result<nlohmann::json> start_refit(const std::string& name, std::shared_ptr<Collection> collection,
                                     const RefitOptions& options);
  // {"id", "kind", "collection", "state" (running | succeeded | failed | cancelled),
  //  "shapes_done", "shapes_total", "fraction", "eta_seconds" (null until measurable),
  //  "started_at", "finished_at" (null while running), "generation" (the new one, on success),
  //  "error" (on failure)}; not_found for an unknown id.
  Result<nlohmann::json> describe(const std::string& id) const;
  nlohmann::json list() const;  // newest first
  // Asks a running job to stop; a finished one is left as it is. not_found for an unknown id.
  Result<nlohmann::json> cancel(const std::string& id);

 private:
  struct Job;
  nlohmann::json describe_locked(const Job& job) const;
  void forget_old_finished_locked();

  std::size_t max_finished_kept_;
  mutable std::mutex mutex_;
  std::list<std::shared_ptr<Job>> jobs_;  // newest first
  std::uint64_t started_ = 0;
};

}  // namespace waymark::server
