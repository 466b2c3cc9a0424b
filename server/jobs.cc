#include "server/jobs.h"

#include <spdlog/spdlog.h>

#include <cstdio>

#include "server/request_json.h"

namespace waymark::server {

using Json = nlohmann::json;
using SystemClock = std::chrono::system_clock;

struct JobRunner::Job {
  std::string id;
  std::string collection_name;
  std::shared_ptr<Collection> collection;
  RefitOptions options;
  RefitProgress progress;
  SystemClock::time_point started = SystemClock::now();
  // Guarded by the runner's mutex:
  bool finished = false;
  SystemClock::time_point finished_at;
  Status outcome;
  std::uint64_t generation = 0;
  std::thread thread;
};

namespace {

std::string utc_text(SystemClock::time_point when) {
  return iso_time(std::chrono::duration_cast<std::chrono::milliseconds>(when.time_since_epoch()).count());
}

double seconds_between(SystemClock::time_point from, SystemClock::time_point to) {
  return std::chrono::duration<double>(to - from).count();
}

}  // namespace

JobRunner::~JobRunner() {
  std::list<std::shared_ptr<Job>> jobs;
  {
    std::lock_guard lock(mutex_);
    jobs = jobs_;
    for (const auto& job : jobs) job->progress.cancel = true;
  }
  for (const auto& job : jobs) {
    if (job->thread.joinable()) job->thread.join();
  }
}

Result<Json> JobRunner::start_refit(const std::string& name, std::shared_ptr<Collection> collection,
                                    const RefitOptions& options) {
  std::lock_guard lock(mutex_);
  for (const auto& job : jobs_) {
    if (!job->finished && job->collection_name == name) {
      return Status(StatusCode::failed_precondition,
                    "collection '" + name + "' already has a landmark refit running (job " + job->id + ")");
    }
  }
  auto job = std::make_shared<Job>();
  char id[32];
  std::snprintf(id, sizeof id, "refit-%06llu", static_cast<unsigned long long>(++started_));
  job->id = id;
  job->collection_name = name;
  job->collection = std::move(collection);
  job->options = options;
  job->progress.shapes_total = job->collection->size();
  jobs_.push_front(job);
  spdlog::info("job started: id={} kind=landmark_refit collection={} landmarks={} sample={}", job->id, name,
               options.landmark_count, options.sample_size);
  // The thread holds the job (and so the collection) until it ends.
  job->thread = std::thread([this, job] {
    Result<std::uint64_t> generation = job->collection->refit(job->options, job->progress);
    std::lock_guard lock(mutex_);
    job->finished = true;
    job->finished_at = SystemClock::now();
    job->outcome = generation.status();
    if (generation) job->generation = *generation;
    const double seconds = seconds_between(job->started, job->finished_at);
    if (generation) {
      spdlog::info("job finished: id={} collection={} generation={} shapes={} seconds={:.2f}", job->id,
                   job->collection_name, *generation, job->progress.shapes_done.load(), seconds);
    } else {
      spdlog::warn("job ended without switching: id={} collection={} reason={} seconds={:.2f}", job->id,
                   job->collection_name, generation.status().message(), seconds);
    }
    job->collection.reset();  // a dropped collection need not wait for the job's record to go
  });
  forget_old_finished_locked();
  return describe_locked(*job);
}

Json JobRunner::describe_locked(const Job& job) const {
  const std::size_t done = job.progress.shapes_done, total = job.progress.shapes_total;
  const SystemClock::time_point end = job.finished ? job.finished_at : SystemClock::now();
  const double elapsed = seconds_between(job.started, end);
  std::string state = "running";
  if (job.finished) {
    state = job.outcome.is_ok()     ? "succeeded"
            : job.progress.cancel ? "cancelled"
                                    : "failed";
  }
  Json eta = nullptr;
  if (!job.finished && done > 0 && total >= done) eta = elapsed * static_cast<double>(total - done) / done;
  Json described = {{"id", job.id},
                    {"kind", "landmark_refit"},
                    {"collection", job.collection_name},
                    {"state", state},
                    {"shapes_done", done},
                    {"shapes_total", total},
                    {"fraction", job.finished && job.outcome.is_ok() ? 1.0
                                 : total == 0                       ? 0.0
                                                                    : std::min(1.0, static_cast<double>(done) / total)},
                    {"eta_seconds", eta},
                    {"elapsed_seconds", elapsed},
                    {"started_at", utc_text(job.started)},
                    {"finished_at", job.finished ? Json(utc_text(job.finished_at)) : Json(nullptr)}};
  if (job.finished && job.outcome.is_ok()) described["generation"] = job.generation;
  if (job.finished && !job.outcome.is_ok()) {
    described["error"] = {{"code", status_code_name(job.outcome.code())}, {"message", job.outcome.message()}};
  }
  return described;
}

void JobRunner::forget_old_finished_locked() {
  std::size_t finished = 0;
  for (auto it = jobs_.begin(); it != jobs_.end();) {
    if ((*it)->finished && ++finished > max_finished_kept_) {
      if ((*it)->thread.joinable()) (*it)->thread.join();  // it has ended: returns at once
      it = jobs_.erase(it);
    } else {
      ++it;
    }
  }
}

Result<Json> JobRunner::describe(const std::string& id) const {
  std::lock_guard lock(mutex_);
  for (const auto& job : jobs_) {
    if (job->id == id) return describe_locked(*job);
  }
  return Status(StatusCode::not_found, "no job with id '" + id + "'");
}

Json JobRunner::list() const {
  std::lock_guard lock(mutex_);
  Json out = Json::array();
  for (const auto& job : jobs_) out.push_back(describe_locked(*job));
  return out;
}

Result<Json> JobRunner::cancel(const std::string& id) {
  std::lock_guard lock(mutex_);
  for (const auto& job : jobs_) {
    if (job->id != id) continue;
    if (!job->finished) {
      job->progress.cancel = true;
      spdlog::info("job cancel requested: id={}", id);
    }
    return describe_locked(*job);
  }
  return Status(StatusCode::not_found, "no job with id '" + id + "'");
}

}  // namespace waymark::server
