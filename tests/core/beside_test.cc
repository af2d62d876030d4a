// Beside: work on a helper thread or, without one, at Wait; joined by the
// destructor when started, dropped when never started. Checks of the
// project's own contract (no outside reference applies).
#include "core/beside.h"

#include <gtest/gtest.h>

#include <atomic>
#include <thread>

namespace prefsift {
namespace {

TEST(Beside, OnAThreadTheWorkRunsOnceAndWaitJoinsIt) {
  std::atomic<int> runs{0};
  std::thread::id where;
  Beside b(true, [&] {
    where = std::this_thread::get_id();
    ++runs;
  });
  EXPECT_TRUE(b.on_thread());
  b.Wait();
  b.Wait();
  EXPECT_EQ(runs.load(), 1);
  EXPECT_NE(where, std::this_thread::get_id());
}

TEST(Beside, WithoutAThreadTheWorkRunsAtWaitOnTheCaller) {
  int runs = 0;
  std::thread::id where;
  Beside b(false, [&] {
    where = std::this_thread::get_id();
    ++runs;
  });
  EXPECT_FALSE(b.on_thread());
  EXPECT_EQ(runs, 0) << "not before Wait";
  b.Wait();
  b.Wait();
  EXPECT_EQ(runs, 1);
  EXPECT_EQ(where, std::this_thread::get_id());
}

TEST(Beside, TheDestructorJoinsStartedWorkAndDropsWorkNeverStarted) {
  std::atomic<int> runs{0};
  { Beside b(true, [&] { ++runs; }); }
  EXPECT_EQ(runs.load(), 1);
  { Beside b(false, [&] { ++runs; }); }
  EXPECT_EQ(runs.load(), 1);
}

}  // namespace
}  // namespace prefsift
