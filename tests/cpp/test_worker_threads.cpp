#include <doctest/doctest.h>

#include <algorithm>
#include <atomic>
#include <condition_variable>
#include <memory>
#include <mutex>
#include <stdexcept>
#include <string>
#include <thread>
#include <vector>

#include "../../cpp/src/worker_threads.hpp"

using namespace exosieve::detail;

TEST_CASE("thread_count: the request, or the hardware's count for 0, within [1, useful]") {
    const std::size_t hardware = std::max(1u, std::thread::hardware_concurrency());
    CHECK(thread_count(3, 10) == 3);
    CHECK(thread_count(5, 2) == 2);
    CHECK(thread_count(4, 0) == 1);
    CHECK(thread_count(0, 0) == 1);
    CHECK(thread_count(0, 1) == 1);
    CHECK(thread_count(0, 1000) == std::min<std::size_t>(hardware, 1000));
    CHECK(thread_count(0, 1000) >= 1);
}

TEST_CASE("run_on_threads runs every index once, index 0 on the calling thread") {
    for (std::size_t n : {0, 1, 2, 3, 7}) {
        CAPTURE(n);
        std::vector<std::atomic<int>> runs(n);
        std::vector<std::thread::id> ids(n);
        run_on_threads(n, [&](std::size_t k) {
            runs[k].fetch_add(1);
            ids[k] = std::this_thread::get_id();
        });
        for (std::size_t k = 0; k < n; ++k)
            CHECK(runs[k].load() == 1);
        if (n > 0)
            CHECK((ids[0] == std::this_thread::get_id()));
        for (std::size_t k = 1; k < n; ++k)
            CHECK((ids[k] != std::this_thread::get_id()));
    }
}

TEST_CASE("run_in_chunks covers every index once, in contiguous chunks, the first here") {
    const std::thread::id caller = std::this_thread::get_id();
    for (std::size_t count : {1, 5, 100, 101}) {
        for (std::size_t threads : {1, 2, 3, 8}) {
            CAPTURE(count);
            CAPTURE(threads);
            std::vector<std::atomic<int>> hits(count);
            std::mutex m;
            std::vector<std::pair<std::size_t, std::size_t>> chunks;
            std::thread::id first;
            run_in_chunks(count, threads, [&](std::size_t begin, std::size_t end) {
                for (std::size_t i = begin; i < end; ++i)
                    hits[i].fetch_add(1);
                std::lock_guard<std::mutex> lock(m);
                chunks.emplace_back(begin, end);
                if (begin == 0)
                    first = std::this_thread::get_id();
            });
            for (std::size_t i = 0; i < count; ++i)
                CHECK(hits[i].load() == 1);
            CHECK(chunks.size() <= threads);
            for (const auto& [begin, end] : chunks)
                CHECK(begin < end);
            CHECK((first == caller));
        }
    }
    std::size_t calls = 0; // an empty range: the one call of a single thread, as a loop would
    run_in_chunks(0, 1,
                  [&](std::size_t begin, std::size_t end) { calls += begin == 0 && end == 0; });
    CHECK(calls == 1);
}

TEST_CASE("run_on_threads rethrows the exception of the lowest index that threw") {
    std::vector<std::atomic<int>> runs(6);
    auto body = [&](std::size_t k) {
        runs[k].fetch_add(1);
        if (k == 2 || k == 4)
            throw std::runtime_error("failed at " + std::to_string(k));
    };
    CHECK_THROWS_WITH_AS(run_on_threads(6, body), "failed at 2", std::runtime_error);
    // The others ran to their end before the exception came out.
    for (std::size_t k = 0; k < runs.size(); ++k)
        CHECK(runs[k].load() == 1);

    // The calling thread's own exception (index 0) comes first, after the others are joined.
    std::atomic<int> others{0};
    CHECK_THROWS_WITH_AS(run_on_threads(3,
                                        [&](std::size_t k) {
                                            if (k == 0)
                                                throw std::invalid_argument("first");
                                            others.fetch_add(1);
                                            throw std::runtime_error("later");
                                        }),
                         "first", std::invalid_argument);
    CHECK(others.load() == 2);
}

TEST_CASE("WorkerThreads: join() waits for every worker and rethrows any exception type") {
    std::vector<std::atomic<int>> runs(4);
    {
        WorkerThreads pool(4, [&](std::size_t k) { runs[k].fetch_add(1); });
        pool.join();
        for (std::size_t k = 0; k < runs.size(); ++k)
            CHECK(runs[k].load() == 1);
        pool.join(); // a second join has nothing left to wait for or rethrow
    }
    {
        WorkerThreads pool(3, [](std::size_t k) {
            if (k == 1)
                throw 42; // not a std::exception
        });
        CHECK_THROWS_AS(pool.join(), int);
        CHECK_NOTHROW(pool.join()); // rethrown once
    }
    // Without join(), the destructor waits for the workers (and drops their exceptions).
    std::atomic<int> done{0};
    {
        WorkerThreads pool(3, [&](std::size_t) {
            done.fetch_add(1);
            throw std::runtime_error("dropped");
        });
    }
    CHECK(done.load() == 3);
}

namespace {

// A body whose copies run out: the copy that starts the third worker throws, so that the
// failure to start a worker happens on every run.
struct CopiesRunOut {
    std::shared_ptr<std::atomic<int>> copies_left;
    std::shared_ptr<std::atomic<int>> ran;
    std::shared_ptr<std::mutex> m;
    std::shared_ptr<std::condition_variable> cv;
    std::shared_ptr<bool> stopped;

    CopiesRunOut() = default;
    CopiesRunOut(CopiesRunOut&&) = default;
    CopiesRunOut(const CopiesRunOut& o)
        : copies_left(o.copies_left), ran(o.ran), m(o.m), cv(o.cv), stopped(o.stopped) {
        if (copies_left->fetch_sub(1) <= 0)
            throw std::runtime_error("no thread for this worker");
    }
    // Waits until the group is stopped, as a worker waiting for work would.
    void operator()(std::size_t) const {
        std::unique_lock<std::mutex> lock(*m);
        cv->wait(lock, [&] { return *stopped; });
        ran->fetch_add(1);
    }
};

} // namespace

TEST_CASE("WorkerThreads: a failure to start stops and joins the started workers, then throws") {
    auto ran = std::make_shared<std::atomic<int>>(0);
    auto m = std::make_shared<std::mutex>();
    auto cv = std::make_shared<std::condition_variable>();
    auto stopped = std::make_shared<bool>(false);
    CopiesRunOut body;
    body.copies_left = std::make_shared<std::atomic<int>>(2);
    body.ran = ran;
    body.m = m;
    body.cv = cv;
    body.stopped = stopped;
    int stops = 0;
    auto stop = [&] {
        ++stops;
        {
            std::lock_guard<std::mutex> lock(*m);
            *stopped = true;
        }
        cv->notify_all();
    };
    auto start = [&] { WorkerThreads pool(5, std::move(body), stop); };
    CHECK_THROWS_WITH_AS(start(), "no thread for this worker", std::runtime_error);
    CHECK(stops == 1);
    CHECK(ran->load() == 2); // both started workers ran to their end before the throw
}
