#include "heft/buffers.hpp"

#include <sys/mman.h>

#include <cstdint>

namespace heft {
namespace {
constexpr std::size_t kHugePageBytes = std::size_t{2} << 20;

std::size_t mapped_size(std::size_t bytes) { return (bytes + kHugePageBytes - 1) / kHugePageBytes * kHugePageBytes; }

// Buffers given back on this thread, kept mapped for the next buffer of
// the same size: one curve after another (heft curve --all, heft rank)
// reserves the same sizes, and reusing a mapping skips its page faults and
// the kernel's zeroing of every page touched again (1.9-3.3 % of a
// curve's CPU in `perf`). At most kCachedBytes per thread are kept; at
// the thread's end they are unmapped.
constexpr std::size_t kCachedBytes = std::size_t{64} << 20;
constexpr int kCachedBuffers = 16;
struct Cached {
  void* p = nullptr;
  std::size_t size = 0;
};
thread_local bool cache_gone = false;  // trivially destructible: readable while the thread ends
struct BufferCache {
  Cached slot[kCachedBuffers];
  std::size_t bytes = 0;
  ~BufferCache() {
    for (const Cached& c : slot)
      if (c.p) munmap(c.p, c.size);
    cache_gone = true;
  }
};
thread_local BufferCache cache;

void* take_cached(std::size_t size) {
  if (cache_gone) return nullptr;
  for (Cached& c : cache.slot)
    if (c.p && c.size == size) {
      void* p = c.p;
      c = {};
      cache.bytes -= size;
      return p;
    }
  return nullptr;
}

bool keep_cached(void* p, std::size_t size) {
  if (cache_gone || cache.bytes + size > kCachedBytes) return false;
  for (Cached& c : cache.slot)
    if (!c.p) {
      c = {p, size};
      cache.bytes += size;
      return true;
    }
  return false;
}
}  // namespace

void* map_large_buffer(std::size_t bytes) {
  const std::size_t size = mapped_size(bytes);
  if (void* p = take_cached(size)) return p;
  // Map one huge page more than needed and cut the ends, so that the
  // buffer starts on a huge-page boundary (the kernel backs only aligned
  // 2 MiB ranges with huge pages).
  void* raw = mmap(nullptr, size + kHugePageBytes, PROT_READ | PROT_WRITE, MAP_PRIVATE | MAP_ANONYMOUS, -1, 0);
  if (raw == MAP_FAILED) throw std::bad_alloc();
  const auto start = reinterpret_cast<std::uintptr_t>(raw);
  const std::uintptr_t aligned = (start + kHugePageBytes - 1) / kHugePageBytes * kHugePageBytes;
  if (aligned > start) munmap(raw, aligned - start);
  const std::size_t tail = start + size + kHugePageBytes - (aligned + size);
  if (tail > 0) munmap(reinterpret_cast<void*>(aligned + size), tail);
  void* p = reinterpret_cast<void*>(aligned);
  madvise(p, size, MADV_HUGEPAGE);  // advice only: no error when huge pages are off
  return p;
}

void unmap_large_buffer(void* p, std::size_t bytes) noexcept {
  const std::size_t size = mapped_size(bytes);
  if (!keep_cached(p, size)) munmap(p, size);
}

}  // namespace heft
