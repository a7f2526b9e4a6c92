// Ring<T>: a first-in first-out queue of fixed-width rows in one contiguous
// block, for a series' window of history (series/series_model.h).
//
// Contract:
// - A row is `width` elements of T (T trivially copyable). row(i) points at
//   the i-th oldest row's `width` contiguous elements; the pointer stays
//   valid until the next push_back, reserve, clear, assignment or
//   destruction. push_back appends at the back, pop_front drops the oldest:
//   the order of std::deque's push_back / pop_front.
// - The elements of a new row are unspecified until written.
// - Storage is one allocation, never shrunk (clear keeps it). When a push
//   finds the ring full it grows by doubling (the first allocation holds
//   kFirstRows rows), capped at `max_rows`: a window of at most R records
//   ends with room for exactly R rows. Pushing beyond `max_rows` still works
//   (past it the ring doubles again). reserve(n) makes room for n rows
//   at once, whatever `max_rows` says. Growing copies the rows, oldest first,
//   to the start of the new block.
// - adopt(block, rows) makes an empty ring use `block` (room for `rows`
//   rows, aligned for T) instead of allocating: for a restore that carves
//   every series' history out of one mapping (core/bulk_memory.h). The ring
//   never frees an adopted block; its owner keeps it alive as long as the
//   ring. Growing past it moves the rows to a block of the ring's own.
// - Width 0 counts rows and allocates nothing; row() is then nullptr.
// - Copying copies the rows (into a block of exactly size() rows); moving
//   takes the block and leaves the source empty.
// Not thread-safe.
#pragma once

#include <algorithm>
#include <cstddef>
#include <cstring>
#include <limits>
#include <memory>
#include <type_traits>

namespace tallyd {

template <class T>
class Ring {
  static_assert(std::is_trivially_copyable_v<T>, "Ring copies rows as bytes");

 public:
  static constexpr std::size_t kFirstRows = 8;

  explicit Ring(std::size_t width = 1, std::size_t max_rows = std::numeric_limits<std::size_t>::max())
      : width_(width), max_rows_(std::max<std::size_t>(max_rows, 1)) {}

  Ring(const Ring& other) : width_(other.width_), max_rows_(other.max_rows_) { copy_from(other); }
  Ring& operator=(const Ring& other) {
    if (this != &other) {
      width_ = other.width_;
      max_rows_ = other.max_rows_;
      owned_.reset();
      data_ = nullptr;
      capacity_ = head_ = size_ = 0;
      copy_from(other);
    }
    return *this;
  }
  Ring(Ring&& other) noexcept { swap(other); }
  Ring& operator=(Ring&& other) noexcept {
    if (this != &other) {
      Ring gone(std::move(*this));
      swap(other);
    }
    return *this;
  }

  std::size_t width() const { return width_; }
  std::size_t size() const { return size_; }
  bool empty() const { return size_ == 0; }
  // Rows the current block holds.
  std::size_t capacity() const { return capacity_; }

  // Precondition: i < size().
  T* row(std::size_t i) { return width_ == 0 ? nullptr : data_ + slot(i) * width_; }
  const T* row(std::size_t i) const { return width_ == 0 ? nullptr : data_ + slot(i) * width_; }

  // A new row at the back, its elements unspecified; returns it.
  T* push_back() {
    if (width_ != 0 && size_ == capacity_) {
      std::size_t rows = capacity_ == 0 ? kFirstRows : capacity_ * 2;
      if (capacity_ < max_rows_) rows = std::min(rows, max_rows_);
      regrow(rows);
    }
    ++size_;
    return row(size_ - 1);
  }
  // A new row at the back holding values[0 .. width).
  void push_back(const T* values) {
    T* to = push_back();
    if (width_ != 0) std::memcpy(to, values, width_ * sizeof(T));
  }

  // Drops the `rows` oldest rows. Precondition: rows <= size().
  void pop_front(std::size_t rows = 1) {
    size_ -= rows;
    if (capacity_ != 0) head_ = (head_ + rows) % capacity_;
    if (size_ == 0) head_ = 0;
  }

  void clear() { size_ = head_ = 0; }

  // Room for at least `rows` rows without another allocation.
  void reserve(std::size_t rows) {
    if (width_ != 0 && rows > capacity_) regrow(rows);
  }

  // Uses `block` (rows * width() elements) as storage from now on; the
  // ring's own block, if any, is freed. Precondition: empty().
  void adopt(T* block, std::size_t rows) {
    if (width_ == 0) return;
    owned_.reset();
    data_ = block;
    capacity_ = rows;
    head_ = size_ = 0;
  }

 private:
  std::size_t slot(std::size_t i) const {
    const std::size_t s = head_ + i;
    return s < capacity_ ? s : s - capacity_;
  }

  void regrow(std::size_t rows) {
    // make_unique_for_overwrite: a new block is not zeroed, so its pages are
    // touched only as rows are written.
    std::unique_ptr<T[]> block = std::make_unique_for_overwrite<T[]>(rows * width_);
    // The rows in order: [head_, capacity_) then [0, wrapped).
    const std::size_t first = std::min(size_, capacity_ - head_);
    if (first != 0) std::memcpy(block.get(), data_ + head_ * width_, first * width_ * sizeof(T));
    if (size_ > first) std::memcpy(block.get() + first * width_, data_, (size_ - first) * width_ * sizeof(T));
    owned_ = std::move(block);
    data_ = owned_.get();
    capacity_ = rows;
    head_ = 0;
  }

  void copy_from(const Ring& other) {
    size_ = other.size_;
    if (width_ == 0 || size_ == 0) return;
    owned_ = std::make_unique_for_overwrite<T[]>(size_ * width_);
    data_ = owned_.get();
    capacity_ = size_;
    for (std::size_t i = 0; i < size_; ++i) std::memcpy(row(i), other.row(i), width_ * sizeof(T));
  }

  void swap(Ring& other) noexcept {
    std::swap(width_, other.width_);
    std::swap(max_rows_, other.max_rows_);
    std::swap(owned_, other.owned_);
    std::swap(data_, other.data_);
    std::swap(capacity_, other.capacity_);
    std::swap(head_, other.head_);
    std::swap(size_, other.size_);
  }

  std::size_t width_ = 1;
  std::size_t max_rows_ = std::numeric_limits<std::size_t>::max();
  std::unique_ptr<T[]> owned_;  // the block, unless adopted
  T* data_ = nullptr;           // the block in use
  std::size_t capacity_ = 0;  // rows
  std::size_t head_ = 0;      // slot of the oldest row
  std::size_t size_ = 0;      // rows
};

}  // namespace tallyd
