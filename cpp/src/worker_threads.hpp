#pragma once
// Worker threads: the one place that picks a thread count, starts std::threads, joins them and
// carries a worker's exception back to the thread that waits for them.

#include <algorithm>
#include <cstddef>
#include <exception>
#include <functional>
#include <thread>
#include <utility>
#include <vector>

namespace exosieve::detail {

//! The number of threads to use: `requested`, or the hardware's count for 0, within [1, useful].
inline std::size_t thread_count(std::size_t requested, std::size_t useful) {
    const std::size_t hardware = std::max(1u, std::thread::hardware_concurrency());
    return std::max<std::size_t>(1, std::min(requested ? requested : hardware, useful));
}

//! A group of threads running body(k) for k in [0, count), joined by join() or the destructor.
//! A worker's exception is kept; join() rethrows that of the lowest k, so that which failure
//! is reported does not depend on timing.
class WorkerThreads {
  public:
    //! Starts the workers. If one cannot be started, calls `stop` (if given: the workers that
    //! did start may wait for work the caller would have handed out), joins them and rethrows.
    template <class Body>
    WorkerThreads(std::size_t count, Body body, const std::function<void()>& stop = {})
        : errors_(count) {
        threads_.reserve(count);
        try {
            for (std::size_t k = 0; k < count; ++k)
                threads_.emplace_back([this, body, k] {
                    try {
                        body(k);
                    } catch (...) {
                        errors_[k] = std::current_exception();
                    }
                });
        } catch (...) {
            if (stop)
                stop();
            join_all();
            throw;
        }
    }
    WorkerThreads(const WorkerThreads&) = delete;
    WorkerThreads& operator=(const WorkerThreads&) = delete;
    //! Joins every worker (a kept exception is dropped: the caller is already unwinding).
    ~WorkerThreads() { join_all(); }

    //! Waits for every worker, then rethrows the exception of the lowest k that threw.
    void join() {
        join_all();
        for (std::exception_ptr& e : errors_)
            if (e)
                std::rethrow_exception(std::exchange(e, nullptr));
    }

  private:
    void join_all() {
        for (std::thread& t : threads_)
            if (t.joinable())
                t.join();
    }

    std::vector<std::exception_ptr> errors_; // one per worker, written by it alone
    std::vector<std::thread> threads_;
};

//! Runs body(k) for k in [0, count): k = 0 on the calling thread, the others on threads of
//! their own. Returns when all are done; rethrows the exception of the lowest k that threw.
template <class Body> void run_on_threads(std::size_t count, const Body& body) {
    if (count == 0)
        return;
    if (count == 1) {
        body(std::size_t{0});
        return;
    }
    WorkerThreads others(count - 1, [&body](std::size_t k) { body(k + 1); });
    body(std::size_t{0}); // on a throw, the destructor joins the others first
    others.join();
}

//! Runs body(begin, end) on `threads` contiguous chunks of [0, count), the first on the calling
//! thread; with one thread, body(0, count) right here. Rethrows like run_on_threads.
template <class Body> void run_in_chunks(std::size_t count, std::size_t threads, const Body& body) {
    if (threads <= 1) {
        body(std::size_t{0}, count);
        return;
    }
    const std::size_t chunk = (count + threads - 1) / threads;
    run_on_threads(threads, [&](std::size_t t) {
        const std::size_t begin = std::min(count, t * chunk), end = std::min(count, begin + chunk);
        if (begin < end)
            body(begin, end);
    });
}

} // namespace exosieve::detail
