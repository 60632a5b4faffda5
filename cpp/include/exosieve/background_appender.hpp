#pragma once
//! \file
//! Appending row blocks to a result file from a thread of its own.
//!
//! A ResultAppender's append() writes, checksums, flushes and fsyncs a block (for a sweep of
//! 1024 cases about 6 us of CPU per case): on the thread that hands out a batch's chunks that
//! work delays the hand-out. A BackgroundAppender takes each block into a bounded queue and
//! appends it on its writer thread, one block at a time and in order, through the same
//! ResultAppender. The file on disk therefore passes through exactly the states of direct
//! appends: a kill at any moment leaves it as a kill between or during direct appends would
//! (every block fully appended before the kill is kept; reopening cuts a half-written one).
//! What the queue adds is only that a block handed over may not be on disk yet: drain()
//! waits until it is, and callers drain before they report rows as stored.

#include <condition_variable>
#include <cstddef>
#include <deque>
#include <exception>
#include <mutex>
#include <thread>
#include <vector>

#include "exosieve/hdf5_io.hpp"

namespace exosieve {

//! Appends row blocks to a ResultAppender on a writer thread of its own, in the order pushed.
class BackgroundAppender {
  public:
    //! Start the writer for `file`, which must outlive this object and see no other use (no
    //! append(), close() or reads of its state) until drain() returns or this is destroyed;
    //! at most `capacity` (>= 1, else InputError) blocks wait in the queue [blocks].
    explicit BackgroundAppender(ResultAppender& file, std::size_t capacity = 2);
    //! Append what is queued (errors are swallowed; call drain() to see them), stop the writer.
    ~BackgroundAppender();
    BackgroundAppender(const BackgroundAppender&) = delete;
    BackgroundAppender& operator=(const BackgroundAppender&) = delete;

    //! Queue `block` to be appended after the blocks pushed before it; waits while `capacity`
    //! blocks wait. Throws the error of a failed append instead (nothing is appended after a
    //! failure, so the file ends at the last good block).
    void push(RowBlock block);
    //! Wait until every block pushed so far is appended (on disk, fsynced); throws the error
    //! of a failed append (again on every later call).
    void drain();
    //! A block appended earlier, to be refilled (RowBlock::reset, set() from pointers) and
    //! pushed again, so that its storage is reused instead of allocated afresh; an empty
    //! block when none is spare.
    RowBlock spare();
    //! Blocks appended so far [blocks].
    std::size_t appended() const;

  private:
    void write_loop();
    void rethrow_failure() const; // with the lock held

    ResultAppender& file_;
    const std::size_t capacity_;
    mutable std::mutex m_;
    std::condition_variable queued_, progressed_;
    std::deque<RowBlock> queue_;
    std::vector<RowBlock> spares_; // appended blocks kept for reuse (at most capacity_)
    bool writing_ = false;         // the writer holds a block taken from the queue
    bool stopping_ = false;
    std::size_t appended_ = 0;
    std::exception_ptr failure_;
    std::thread writer_; // last: started once everything above exists
};

} // namespace exosieve
