#include "exosieve/background_appender.hpp"

#include <string>
#include <utility>

#include "exosieve/errors.hpp"

namespace exosieve {

namespace {

std::size_t checked_capacity(std::size_t capacity) {
    if (capacity < 1)
        throw InputError("capacity must be >= 1 [blocks], got " + std::to_string(capacity));
    return capacity;
}

} // namespace

BackgroundAppender::BackgroundAppender(ResultAppender& file, std::size_t capacity)
    : file_(file), capacity_(checked_capacity(capacity)), writer_([this] { write_loop(); }) {}

BackgroundAppender::~BackgroundAppender() {
    {
        std::lock_guard<std::mutex> lock(m_);
        stopping_ = true;
    }
    queued_.notify_all();
    writer_.join(); // the writer appends what is queued first
}

void BackgroundAppender::rethrow_failure() const {
    if (failure_)
        std::rethrow_exception(failure_);
}

void BackgroundAppender::push(RowBlock block) {
    std::unique_lock<std::mutex> lock(m_);
    progressed_.wait(lock, [&] { return failure_ || queue_.size() < capacity_; });
    rethrow_failure();
    queue_.push_back(std::move(block));
    lock.unlock();
    queued_.notify_one();
}

void BackgroundAppender::drain() {
    std::unique_lock<std::mutex> lock(m_);
    progressed_.wait(lock, [&] { return failure_ || (queue_.empty() && !writing_); });
    rethrow_failure();
}

RowBlock BackgroundAppender::spare() {
    std::lock_guard<std::mutex> lock(m_);
    if (spares_.empty())
        return RowBlock(0);
    RowBlock block = std::move(spares_.back());
    spares_.pop_back();
    return block;
}

std::size_t BackgroundAppender::appended() const {
    std::lock_guard<std::mutex> lock(m_);
    return appended_;
}

void BackgroundAppender::write_loop() {
    std::unique_lock<std::mutex> lock(m_);
    for (;;) {
        queued_.wait(lock, [&] { return stopping_ || !queue_.empty(); });
        if (queue_.empty() || failure_)
            return; // stopping, with nothing (more) to write
        RowBlock block = std::move(queue_.front());
        queue_.pop_front();
        writing_ = true;
        lock.unlock();
        // Blocks are appended one at a time, in order: the file goes through the states of
        // direct appends.
        std::exception_ptr failed;
        try {
            file_.append(block);
        } catch (...) {
            failed = std::current_exception();
        }
        lock.lock();
        writing_ = false;
        if (failed) {
            failure_ = failed;
            queue_.clear(); // later rows would follow a gap: they are not written
        } else {
            ++appended_;
            // Kept for reuse: the next block filled into it allocates nothing, and its
            // memory is freed by the thread that allocated it.
            if (spares_.size() < capacity_)
                spares_.push_back(std::move(block));
        }
        progressed_.notify_all();
    }
}

} // namespace exosieve
