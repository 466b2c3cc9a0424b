// `waymark ingest`: bulk loading files and folders into a collection over HTTP, in NDJSON
// batches, with retries on overload, resume, progress and a report of every rejected input.
#include <unistd.h>

#include <chrono>
#include <deque>
#include <future>
#include <memory>
#include <cmath>
#include <cstdio>
#include <iostream>
#include <random>
#include <thread>
#include <unordered_set>

#include "clients/cli/server_commands.h"
#include "clients/cli/server_connection.h"
#include "clients/cli/shape_sources.h"

namespace waymark::cli {
namespace {

using Json = nlohmann::json;
using Clock = std::chrono::steady_clock;

constexpr const char* kUsage =
    "usage: waymark ingest COLLECTION PATH... [--id-property NAME] [--batch N] [--connections N] [--resume]\n"
    "                      [--retries N] [--progress auto|bar|lines|none] [--server URL] [--token TOKEN]\n";

std::string duration_text(double seconds) {
  if (!std::isfinite(seconds) || seconds < 0) return "?";
  const long whole = std::lround(seconds);
  char text[32];
  if (whole >= 3600) {
    std::snprintf(text, sizeof text, "%ldh%02ldm", whole / 3600, whole / 60 % 60);
  } else if (whole >= 60) {
    std::snprintf(text, sizeof text, "%ldm%02lds", whole / 60, whole % 60);
  } else {
    std::snprintf(text, sizeof text, "%lds", whole);
  }
  return text;
}

// Progress on standard error: a bar redrawn in place on a terminal, or a plain line every few
// seconds when the output is a file or a pipe.
class ProgressReport {
 public:
  enum class Style { bar, lines, none };

  ProgressReport(Style style, std::size_t total) : style_(style), total_(total), start_(Clock::now()) {}

  void update(std::size_t done, std::size_t rejected, bool final = false) {
    const Clock::time_point now = Clock::now();
    const auto interval = style_ == Style::bar ? std::chrono::milliseconds(100) : std::chrono::milliseconds(2000);
    if (style_ == Style::none || (!final && now - last_ < interval)) return;
    last_ = now;
    const double seconds = std::chrono::duration<double>(now - start_).count();
    const double rate = seconds > 0 ? static_cast<double>(done) / seconds : 0;
    const double eta = rate > 0 && total_ >= done ? static_cast<double>(total_ - done) / rate : NAN;
    char figures[160];
    std::snprintf(figures, sizeof figures, "%zu/%zu shapes  %.0f shapes/s  ETA %s  rejected %zu", done, total_, rate,
                  duration_text(eta).c_str(), rejected);
    if (style_ == Style::bar) {
      constexpr int kWidth = 30;
      const int filled = total_ == 0 ? kWidth : static_cast<int>(kWidth * std::min(1.0, double(done) / double(total_)));
      std::cerr << "\r[" << std::string(filled, '#') << std::string(kWidth - filled, '-') << "] " << figures << "\033[K";
      if (final) std::cerr << "\n";
    } else {
      std::cerr << "progress: " << figures << "\n";
    }
    std::cerr.flush();
  }

 private:
  Style style_;
  std::size_t total_;
  Clock::time_point start_, last_{};
};

// Every id already in the collection, page by page.
Result<std::unordered_set<std::string>> stored_ids(HttpClient& client, const std::string& collection) {
  std::unordered_set<std::string> ids;
  std::string after;
  while (true) {
    std::string target = "/v1/collections/" + url_encode(collection) + "/shapes?ids_only=true&limit=10000";
    if (!after.empty()) target += "&after=" + url_encode(after);
    Result<Json> page = json_reply(client.send("GET", target));
    if (!page) return page.status();
    for (const Json& shape : (*page)["shapes"]) ids.insert(shape["id"].get<std::string>());
    if ((*page)["next_after"].is_null()) return ids;
    after = (*page)["next_after"].get<std::string>();
  }
}

struct Batch {
  std::string body;
  std::vector<std::string> where;  // per NDJSON line
  std::unordered_set<std::string> ids;
};

// What the server said to one batch.
struct Outcome {
  Status status;  // not ok: a failure that stops the load
  std::size_t accepted = 0, rejected = 0, retries = 0;
  std::vector<SourceProblem> problems;  // the rejected lines
};

// Sends one batch, retrying on 429/503 and on dropped connections (an upsert batch is safe to
// repeat).
Outcome send_batch(HttpClient& client, const std::string& target, std::size_t retries, const Batch& batch) {
  Outcome outcome;
  std::mt19937 jitter(std::random_device{}());
  for (std::size_t attempt = 0;; ++attempt) {
    Result<HttpReply> reply = client.send("POST", target, batch.body, "application/x-ndjson");
    const bool retryable = !reply || reply->status == 429 || reply->status == 503;
    if (retryable && attempt < retries) {
      double wait = std::min(10.0, 0.25 * std::pow(2.0, static_cast<double>(attempt)));
      if (reply && !reply->retry_after.empty()) wait = std::clamp(std::atof(reply->retry_after.c_str()), 0.0, 60.0);
      wait *= std::uniform_real_distribution<double>(0.8, 1.2)(jitter);
      ++outcome.retries;
      std::this_thread::sleep_for(std::chrono::duration<double>(wait));
      continue;
    }
    if (!reply) {
      outcome.status = Status(reply.status().code(), reply.status().message() + " (gave up after " +
                                                         std::to_string(attempt + 1) + " attempts)");
      return outcome;
    }
    const Json body = Json::parse(reply->body, nullptr, false);
    if (body.is_object() && body.contains("accepted") && body["accepted"].is_number_unsigned() &&
        body.contains("rejections") && body["rejections"].is_array()) {
      outcome.accepted = body["accepted"].get<std::size_t>();
      for (const Json& rejection : body["rejections"]) {
        const std::size_t line = rejection.is_object() ? rejection.value("line", std::size_t{0}) : 0;
        Json error = rejection.is_object() ? rejection.value("error", Json::object()) : Json::object();
        if (!error.is_object()) error = Json::object();
        std::string reason = error.value("message", std::string("rejected"));
        if (const std::string at = error.value("where", std::string()); !at.empty()) reason += " (at " + at + ")";
        ++outcome.rejected;
        outcome.problems.push_back(
            {line >= 1 && line <= batch.where.size() ? batch.where[line - 1] : "batch line " + std::to_string(line),
             reason});
      }
      if (!body.contains("error") && reply->status >= 200 && reply->status < 300) return outcome;
    }
    outcome.status = Status(StatusCode::failed_precondition, describe_error_reply(*reply));
    return outcome;
  }
}

// Keeps up to one batch in flight per connection, so that the server works on several at once
// (it commits concurrent batches together and parses them on separate threads). Outcomes are
// taken in the order the batches were sent. A batch holding an id that a batch in flight also
// holds waits for that one first, so that the later record still wins.
class Loader {
 public:
  Loader(std::vector<std::unique_ptr<HttpClient>> connections, const std::string& collection, std::size_t retries)
      : connections_(std::move(connections)),
        target_("/v1/collections/" + url_encode(collection) + "/shapes"),
        retries_(retries) {
    for (std::size_t c = 0; c < connections_.size(); ++c) idle_.push_back(c);
  }

  // Sends `batch` once a connection is free; false once a failure has stopped the load.
  bool send(Batch batch) {
    while (!in_flight_.empty() && shares_an_id(batch)) take_oldest();
    if (idle_.empty()) take_oldest();
    if (!failure_.is_ok()) return false;
    const std::size_t connection = idle_.back();
    idle_.pop_back();
    auto sent = std::make_shared<Batch>(std::move(batch));
    std::future<Outcome> outcome = std::async(std::launch::async, [this, connection, sent] {
      return send_batch(*connections_[connection], target_, retries_, *sent);
    });
    in_flight_.push_back({connection, sent, std::move(outcome)});
    return true;
  }
  // Waits for every batch in flight.
  void finish() {
    while (!in_flight_.empty()) take_oldest();
  }

  const Status& failure() const { return failure_; }
  std::size_t accepted() const { return accepted_; }
  std::size_t rejected() const { return rejected_; }
  std::size_t retries_used() const { return retries_used_; }
  // Rejected lines, in the order their batches were sent.
  std::vector<SourceProblem>& problems() { return problems_; }

 private:
  struct InFlight {
    std::size_t connection;
    std::shared_ptr<const Batch> batch;
    std::future<Outcome> outcome;
  };

  bool shares_an_id(const Batch& batch) const {
    for (const InFlight& flight : in_flight_) {
      for (const std::string& id : batch.ids) {
        if (flight.batch->ids.contains(id)) return true;
      }
    }
    return false;
  }

  void take_oldest() {
    InFlight oldest = std::move(in_flight_.front());
    in_flight_.pop_front();
    Outcome outcome;
    try {
      outcome = oldest.outcome.get();
    } catch (const std::exception& error) {  // a reply of an unexpected shape, say
      outcome.status = Status(StatusCode::failed_precondition, std::string("reading the server's reply: ") + error.what());
    }
    idle_.push_back(oldest.connection);
    accepted_ += outcome.accepted;
    rejected_ += outcome.rejected;
    retries_used_ += outcome.retries;
    problems_.insert(problems_.end(), outcome.problems.begin(), outcome.problems.end());
    if (failure_.is_ok() && !outcome.status.is_ok()) failure_ = outcome.status;
  }

  std::vector<std::unique_ptr<HttpClient>> connections_;
  std::string target_;
  std::size_t retries_;
  std::vector<std::size_t> idle_;
  std::deque<InFlight> in_flight_;
  Status failure_;
  std::size_t accepted_ = 0, rejected_ = 0, retries_used_ = 0;
  std::vector<SourceProblem> problems_;
};

int fail(const std::string& message) {
  std::cerr << "waymark ingest: " << message << "\n";
  return kExitServer;
}

}  // namespace

int ingest_command(const std::vector<std::string>& words) {
  Result<Arguments> arguments =
      Arguments::parse(words, with_server_flags({"id-property", "batch", "connections", "retries", "progress"}), {"resume"});
  if (!arguments || arguments->operands().size() < 2) {
    std::cerr << (arguments ? "" : "waymark ingest: " + arguments.status().to_string() + "\n") << kUsage;
    return kExitUsage;
  }
  Result<std::uint64_t> batch_size = arguments->count("batch", 1000);
  // Two batches at once keep a two-worker server busy: one is parsed while the other is written
  // (scripts/http-ingest-benchmark.py: 1.8x one connection's rate, 2026-12-03; clients/README.md).
  Result<std::uint64_t> connections = arguments->count("connections", 2);
  Result<std::uint64_t> retries = arguments->count("retries", 8);
  const std::string progress_flag = arguments->value_or("progress", "auto");
  if (!batch_size || !connections || !retries || *batch_size == 0 || *batch_size > 100000 || *connections == 0 ||
      *connections > 16 ||
      (progress_flag != "auto" && progress_flag != "bar" && progress_flag != "lines" && progress_flag != "none")) {
    std::cerr << "waymark ingest: --batch must be 1 to 100000, --connections 1 to 16, --retries a count, --progress "
                 "auto|bar|lines|none\n"
              << kUsage;
    return kExitUsage;
  }
  std::vector<std::unique_ptr<HttpClient>> clients;
  for (std::size_t c = 0; c < *connections; ++c) {
    Result<std::unique_ptr<HttpClient>> client = connect_from(*arguments);
    if (!client) {
      std::cerr << "waymark ingest: " << client.status().to_string() << "\n";
      return kExitUsage;
    }
    clients.push_back(std::move(*client));
  }
  HttpClient& client = *clients.front();
  const std::string collection = arguments->operands()[0];
  const std::vector<std::string> paths(arguments->operands().begin() + 1, arguments->operands().end());
  SourceOptions options;
  options.id_property = arguments->value_or("id-property", "");
  options.pass_plain_text = true;  // sent as read: the server checks it

  Result<Json> described = json_reply(client.send("GET", "/v1/collections/" + url_encode(collection)));
  if (!described) return fail(described.status().message());

  std::vector<SourceProblem> problems;
  std::size_t skipped_files = 0;
  const std::vector<std::filesystem::path> files = collect_input_files(paths, problems, skipped_files);

  // First pass: count, so that progress can show a total and an ETA.
  std::size_t total = 0;
  for (const auto& file : files) total += count_shapes(file, options);
  std::unordered_set<std::string> already;
  if (arguments->has("resume")) {
    Result<std::unordered_set<std::string>> ids = stored_ids(client, collection);
    if (!ids) return fail("listing the stored ids for --resume: " + ids.status().message());
    already = std::move(*ids);
  }

  ProgressReport::Style style = ProgressReport::Style::lines;
  if (progress_flag == "bar" || (progress_flag == "auto" && isatty(STDERR_FILENO))) style = ProgressReport::Style::bar;
  if (progress_flag == "none") style = ProgressReport::Style::none;
  const Clock::time_point start = Clock::now();

  Loader loader(std::move(clients), collection, *retries);
  std::size_t skipped_stored = 0;
  std::unordered_set<std::string> seen;
  std::vector<std::string> duplicates;
  Batch batch;
  bool stopped = false;
  ProgressReport progress(style, total);
  auto report_progress = [&](bool final) {
    progress.update(loader.accepted() + skipped_stored + loader.rejected(), problems.size() + loader.rejected(), final);
  };
  auto flush = [&]() {
    if (batch.where.empty() || stopped) return;
    const std::size_t body_bytes = batch.body.size();
    stopped = !loader.send(std::move(batch));
    batch = Batch();
    batch.body.reserve(body_bytes + body_bytes / 8);  // the next is likely as large: no regrowth
    report_progress(false);
  };
  for (const auto& file : files) {
    if (stopped) break;
    read_shape_file(file, options,
                    [&](SourceShape&& shape) {
                      if (stopped) return;
                      if (already.contains(shape.id)) {
                        ++skipped_stored;
                        return;
                      }
                      if (!seen.insert(shape.id).second && duplicates.size() < 100) {
                        duplicates.push_back(shape.id + " again at " + shape.where);
                      }
                      if (!shape.line.empty()) {
                        batch.body += shape.line;
                      } else {
                        Json line = {{"id", shape.id}, {"geometry", std::move(shape.geometry)}};
                        if (!shape.metadata.empty()) line["metadata"] = std::move(shape.metadata);
                        batch.body += line.dump(-1, ' ', false, Json::error_handler_t::replace);
                      }
                      batch.body += '\n';
                      batch.where.push_back(std::move(shape.where));
                      batch.ids.insert(shape.id);
                      if (batch.where.size() >= *batch_size) flush();
                    },
                    problems);
  }
  flush();
  loader.finish();
  report_progress(true);
  const std::size_t accepted = loader.accepted();
  const Status& failure = loader.failure();
  problems.insert(problems.end(), loader.problems().begin(), loader.problems().end());

  const double seconds = std::chrono::duration<double>(Clock::now() - start).count();
  std::printf("%s: stored %zu shapes from %zu %s in %.1f s (%.0f shapes/s)", collection.c_str(), accepted,
              files.size(), files.size() == 1 ? "file" : "files", seconds, seconds > 0 ? accepted / seconds : 0.0);
  if (skipped_stored > 0) std::printf("; skipped %zu already stored", skipped_stored);
  if (skipped_files > 0) {
    std::printf("; ignored %zu %s", skipped_files, skipped_files == 1 ? "file of another type" : "files of other types");
  }
  if (loader.retries_used() > 0) std::printf("; %zu retries after overload or lost connections", loader.retries_used());
  std::printf("\n");
  for (const std::string& duplicate : duplicates) {
    std::printf("note: id %s (the later shape replaced the earlier one)\n", duplicate.c_str());
  }
  if (!problems.empty()) {
    std::printf("rejected %zu inputs:\n", problems.size());
    for (const SourceProblem& problem : problems) std::printf("  %s: %s\n", problem.where.c_str(), problem.reason.c_str());
  }
  std::fflush(stdout);
  if (!failure.is_ok()) {
    return fail("stopped: " + failure.message() + "; " + std::to_string(accepted) +
                " shapes were stored before it. Rerun with --resume to continue.");
  }
  return problems.empty() ? kExitDone : kExitSomeRejected;
}

}  // namespace waymark::cli
