// Running a task on a thread of its own, for work that overlaps other work: a batch's two
// halves, a store's read shards, a bulk request's next lines while the batch before commits.
//
// on_own_thread(task) starts task() on a new thread and returns its future. When no thread can
// be had (std::system_error from the thread's start), task() runs instead on the thread that
// calls get() or wait(): slower, never lost. The task is copied, as std::async copies it, so
// anything large it needs should be captured by reference or through a shared pointer.
// Like every std::async future, the one returned waits in its destructor for the task to end.
#pragma once

#include <future>
#include <system_error>

namespace waymark {

template <typename Task>
auto on_own_thread(const Task& task) -> std::future<decltype(task())> {
  try {
    return std::async(std::launch::async, task);
  } catch (const std::system_error&) {
    return std::async(std::launch::deferred, task);
  }
}

}  // namespace waymark
