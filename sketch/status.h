// Errors as values for every boundary of the project (parsing, I/O, storage, HTTP).
//
// A Status is a code, a message for a person, and an optional location ("line 3, column 7",
// "$.coordinates[0][2]", "byte 1042") saying where in the input the problem is. Codes are
// chosen so that each maps onto one HTTP status in server/. Result<T> holds either a value or
// a non-ok Status. Neither throws; accessing the value of a failed Result is a programming
// error (asserted).
#pragma once

#include <cassert>
#include <string>
#include <utility>
#include <variant>

namespace waymark {

enum class StatusCode {
  ok,
  invalid_argument,    // bad input from a caller (HTTP 400)
  not_applicable,      // valid input, but the operation does not apply to it (HTTP 422)
  not_found,           // (HTTP 404)
  already_exists,      // (HTTP 409)
  resource_exhausted,  // a configured limit was exceeded (HTTP 413 / 429)
  storage_full,        // the disk holding the data has less free space than allowed (HTTP 507)
  data_loss,           // stored data failed its checksum or is truncated
  io_error,            // the operating system refused a read or write
  failed_precondition, // the system is not in a state that allows the operation (HTTP 409/503)
  internal,            // a bug: an invariant did not hold
};

// Stable lower-case name of a code, used in logs and in JSON error replies.
const char* status_code_name(StatusCode code);

class [[nodiscard]] Status {
 public:
  Status() = default;
  Status(StatusCode code, std::string message, std::string where = {})
      : code_(code), message_(std::move(message)), where_(std::move(where)) {}

  static Status ok() { return {}; }

  bool is_ok() const { return code_ == StatusCode::ok; }
  StatusCode code() const { return code_; }
  const std::string& message() const { return message_; }
  // Where in the input the problem is; empty when it has no position.
  const std::string& where() const { return where_; }

  // "message (at where)" or just the message.
  std::string to_string() const;

 private:
  StatusCode code_ = StatusCode::ok;
  std::string message_;
  std::string where_;
};

inline Status invalid_argument(std::string message, std::string where = {}) {
  return {StatusCode::invalid_argument, std::move(message), std::move(where)};
}

template <typename T>
class [[nodiscard]] Result {
 public:
  Result(T value) : state_(std::move(value)) {}
  Result(Status status) : state_(std::move(status)) {
    assert(!std::get<Status>(state_).is_ok() && "a Result holding a Status must hold an error");
  }

  bool is_ok() const { return std::holds_alternative<T>(state_); }
  explicit operator bool() const { return is_ok(); }

  const T& value() const& {
    assert(is_ok());
    return std::get<T>(state_);
  }
  T& value() & {
    assert(is_ok());
    return std::get<T>(state_);
  }
  T&& value() && {
    assert(is_ok());
    return std::get<T>(std::move(state_));
  }
  const T& operator*() const& { return value(); }
  T& operator*() & { return value(); }
  const T* operator->() const { return &value(); }
  T* operator->() { return &value(); }

  // The error; Status::ok() when a value is held.
  Status status() const { return is_ok() ? Status::ok() : std::get<Status>(state_); }

 private:
  std::variant<T, Status> state_;
};

}  // namespace waymark
