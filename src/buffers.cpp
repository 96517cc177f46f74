#include "heft/buffers.hpp"

#include <sys/mman.h>

#include <cstdint>

namespace heft {
namespace {
constexpr std::size_t kHugePageBytes = std::size_t{2} << 20;

std::size_t mapped_size(std::size_t bytes) { return (bytes + kHugePageBytes - 1) / kHugePageBytes * kHugePageBytes; }
}  // namespace

void* map_large_buffer(std::size_t bytes) {
  const std::size_t size = mapped_size(bytes);
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

void unmap_large_buffer(void* p, std::size_t bytes) noexcept { munmap(p, mapped_size(bytes)); }

}  // namespace heft
