#include <catch2/catch.hpp>

#include <cstdint>
#include <filesystem>
#include <fstream>
#include <new>
#include <sstream>
#include <string>
#include <thread>

#include "heft/buffers.hpp"

using namespace heft;

namespace {
// The VmFlags of the mapping that holds address p (/proc/self/smaps), empty
// when none does.
std::string vm_flags_at(const void* p) {
  const auto addr = reinterpret_cast<std::uintptr_t>(p);
  std::ifstream smaps("/proc/self/smaps");
  std::string line;
  bool inside = false;
  while (std::getline(smaps, line)) {
    std::uintptr_t lo = 0, hi = 0;
    char dash = 0;
    std::istringstream head(line);
    if (head >> std::hex >> lo >> dash >> hi && dash == '-') {
      inside = addr >= lo && addr < hi;
      continue;
    }
    if (inside && line.rfind("VmFlags:", 0) == 0) return line;
  }
  return {};
}
}  // namespace

TEST_CASE("large buffers: huge-page aligned, advised, zeroed, and small ones ordinary", "[buffers]") {
  // 2 MiB is the x86-64 huge page (common practice, no source).
  constexpr std::uintptr_t kHuge = std::uintptr_t{2} << 20;
  LargeVector<double> big(3 * (kLargeBufferBytes / sizeof(double)) + 7);
  REQUIRE(big.size() * sizeof(double) >= kLargeBufferBytes);
  CHECK(reinterpret_cast<std::uintptr_t>(big.data()) % kHuge == 0);
  for (double v : big) REQUIRE(v == 0.0);
  for (std::size_t i = 0; i < big.size(); ++i) big[i] = static_cast<double>(i);
  CHECK(big.back() == static_cast<double>(big.size() - 1));
  // The advice shows as "hg" among the mapping's flags (proc(5), smaps
  // VmFlags), wherever the kernel has transparent huge pages at all.
  if (std::filesystem::exists("/sys/kernel/mm/transparent_hugepage")) {
    const std::string flags = vm_flags_at(big.data());
    REQUIRE(!flags.empty());
    CHECK(flags.find(" hg") != std::string::npos);
  }
  // Growing past the reserve moves the contents to a new mapping.
  big.resize(2 * big.size(), -1.0);
  CHECK(big[12345] == 12345.0);
  CHECK(big.back() == -1.0);

  LargeVector<double> small(16, 2.5);
  CHECK(small[15] == 2.5);
  CHECK(vm_flags_at(small.data()).find(" hg") == std::string::npos);

  LargeBufferAllocator<double> alloc;
  CHECK_THROWS_AS(alloc.allocate(static_cast<std::size_t>(-1) / 4), std::bad_array_new_length);
}

TEST_CASE("large buffers: one given back is reused for the same size, its vector still initialised", "[buffers]") {
  // On a thread of its own, whose cache starts empty.
  const std::size_t n = (std::size_t{11} << 20) / sizeof(double);  // a 12 MiB mapping
  double* first = nullptr;
  double* reused = nullptr;
  double kept_value = 0.0;
  const void* in_vector = nullptr;
  const void* other = nullptr;
  bool zeros = true;
  std::thread([&] {
    LargeBufferAllocator<double> alloc;
    first = alloc.allocate(n);
    first[n / 2] = 7.0;
    alloc.deallocate(first, n);
    // The same mapping, old contents and all (a new one would be zeroed).
    reused = alloc.allocate(n);
    kept_value = reused[n / 2];
    alloc.deallocate(reused, n);
    LargeVector<double> b(n);
    in_vector = b.data();
    for (double v : b) zeros = zeros && v == 0.0;
    LargeVector<double> c(n);  // the kept one is in use: a mapping of its own
    other = c.data();
  }).join();
  CHECK(reused == first);
  CHECK(kept_value == 7.0);
  CHECK(in_vector == first);
  CHECK(zeros);  // the vector constructs its elements over the old contents
  CHECK(other != first);
  // At the thread's end its kept buffers are unmapped.
  CHECK(vm_flags_at(first).empty());
}
