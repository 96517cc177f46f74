#pragma once
/// \file buffers.hpp
/// Large work buffers backed by transparent huge pages.
///
/// A curve touches some 17 MB of draws, deviates and weights. Backed by
/// 4 KiB pages that is about 4,300 first-touch page faults, which cost
/// 20-25 % of a single upper limit's CPU time on a virtual machine
/// (docs/performance.md, "Stop 35"). Buffers of at least
/// kLargeBufferBytes are mapped on their own and advised for transparent
/// huge pages (`madvise(MADV_HUGEPAGE)`), so that one fault maps 2 MiB;
/// where the kernel has huge pages off, the advice does nothing. Smaller
/// buffers use the ordinary allocator.

#include <cstddef>
#include <memory>
#include <new>
#include <vector>

namespace heft {

/// Size (bytes) from which an allocation is mapped on its own with
/// huge-page advice: an eighth of a 2 MiB huge page, below which zeroing
/// a whole huge page on first touch outweighs the faults it saves.
inline constexpr std::size_t kLargeBufferBytes = std::size_t{1} << 18;

/// Maps `bytes` (>= kLargeBufferBytes) of memory, 2 MiB-aligned and
/// advised for huge pages; throws std::bad_alloc when the mapping fails.
/// A buffer of the same size given back on this thread is reused as it
/// is, so the contents are unspecified (the allocator's vectors construct
/// their elements).
void* map_large_buffer(std::size_t bytes);
/// Gives back a buffer from map_large_buffer with the same `bytes`: kept
/// for reuse on this thread (at most 64 MiB, unmapped at the thread's
/// end), else unmapped.
void unmap_large_buffer(void* p, std::size_t bytes) noexcept;

/// Standard allocator that sends allocations of at least kLargeBufferBytes
/// to map_large_buffer and the rest to std::allocator<T>.
template <class T>
struct LargeBufferAllocator {
  using value_type = T;
  LargeBufferAllocator() = default;
  template <class U>
  LargeBufferAllocator(const LargeBufferAllocator<U>&) noexcept {}  // NOLINT: allocators convert implicitly

  T* allocate(std::size_t n) {
    if (n > static_cast<std::size_t>(-1) / sizeof(T)) throw std::bad_array_new_length();
    if (n * sizeof(T) < kLargeBufferBytes) return std::allocator<T>().allocate(n);
    return static_cast<T*>(map_large_buffer(n * sizeof(T)));
  }
  void deallocate(T* p, std::size_t n) noexcept {
    if (n * sizeof(T) < kLargeBufferBytes)
      std::allocator<T>().deallocate(p, n);
    else
      unmap_large_buffer(p, n * sizeof(T));
  }
  template <class U>
  bool operator==(const LargeBufferAllocator<U>&) const noexcept {
    return true;
  }
};

/// A std::vector whose large storage is backed by huge pages.
template <class T>
using LargeVector = std::vector<T, LargeBufferAllocator<T>>;

}  // namespace heft
