// Tests of src/core/free_memory: with glibc, ReturnFreeMemory really gives
// freed heap pages back (resident anonymous memory drops). An earlier build
// tested __GLIBC__ before any C library header defined it, so the call
// compiled to nothing and every decide step's freed memory stayed resident.
#include "core/free_memory.h"

#include <cstdlib>
#include <fstream>
#include <memory>
#include <string>
#include <vector>

#include <gtest/gtest.h>

namespace prefsift {
namespace {

// RssAnon of this process in kB (Linux), or -1.
long RssAnonKb() {
  std::ifstream f("/proc/self/status");
  std::string line;
  while (std::getline(f, line)) {
    if (line.rfind("RssAnon:", 0) == 0) return std::stol(line.substr(8));
  }
  return -1;
}

TEST(FreeMemory, ActiveWithGlibc) {
#if defined(__GLIBC__)
  EXPECT_TRUE(ReturnsFreeMemory());
#else
  GTEST_SKIP() << "not a glibc build: ReturnFreeMemory does nothing here";
#endif
}

// AddressSanitizer and ThreadSanitizer replace malloc with their own
// allocators, which ignore malloc_trim (GCC defines __SANITIZE_ADDRESS__ and
// __SANITIZE_THREAD__, Clang answers __has_feature(address_sanitizer) and
// __has_feature(thread_sanitizer)).
#if defined(__SANITIZE_ADDRESS__) || defined(__SANITIZE_THREAD__)
#define PREFSIFT_OWN_ALLOCATOR 1
#elif defined(__has_feature)
#if __has_feature(address_sanitizer) || __has_feature(thread_sanitizer)
#define PREFSIFT_OWN_ALLOCATOR 1
#endif
#endif

TEST(FreeMemory, FreedHeapPagesLeaveTheResidentSet) {
#if defined(PREFSIFT_OWN_ALLOCATOR)
  GTEST_SKIP() << "the sanitizer's allocator, not glibc's, serves this build";
#endif
  if (!ReturnsFreeMemory() || RssAnonKb() < 0) GTEST_SKIP() << "needs glibc and /proc/self/status";
  // 64 MiB in 4 KiB blocks (below the mmap threshold, so from the heap); every
  // 16th stays, so free() alone cannot shrink the heap, only the pages inside
  // the free runs between the kept blocks can go.
  std::vector<std::unique_ptr<char[]>> blocks;
  for (int i = 0; i < 16384; ++i) {
    blocks.emplace_back(new char[4096]);
    for (int b = 0; b < 4096; b += 512) blocks.back()[b] = static_cast<char>(i + b);  // touch every page
  }
  for (size_t i = 0; i < blocks.size(); ++i) {
    if (i % 16 != 15) blocks[i].reset();
  }
  const long before = RssAnonKb();
  ReturnFreeMemory();
  const long after = RssAnonKb();
  EXPECT_LT(after, before - 32 * 1024) << "before " << before << " kB, after " << after << " kB";
}

}  // namespace
}  // namespace prefsift
