#include "core/ordered_lines.h"

#include <gtest/gtest.h>

#include <string>

namespace prefsift {
namespace {

// A file that keeps what it is given; `fail_after` appends, it fails.
class StringFile : public WritableFile {
 public:
  explicit StringFile(int fail_after = -1) : fail_after_(fail_after) {}
  Status Append(std::string_view bytes) override {
    if (fail_after_ >= 0 && appends_++ >= fail_after_) return Status::Io("cannot write /x: No space left on device");
    text += bytes;
    return Status::Ok();
  }
  Status Close() override { return Status::Ok(); }
  std::string text;

 private:
  int fail_after_;
  int appends_ = 0;
};

// Items with no line, one line and two lines, over more than one round of
// blocks (64 blocks of 4096 items): the file is the lines in item order,
// whatever the thread count.
TEST(AppendLinesInOrder, ItemOrderAtAnyThreadCount) {
  const size_t n = 64 * 4096 * 2 + 17;
  auto lines_of = [](size_t i, std::string* t) {
    for (size_t k = 0; k < i % 3; ++k) *t += std::to_string(i) + "." + std::to_string(k) + "\n";
  };
  std::string expected;
  for (size_t i = 0; i < n; ++i) lines_of(i, &expected);
  for (unsigned threads : {1u, 2u, 4u}) {
    StringFile f;
    ASSERT_TRUE(AppendLinesInOrder(&f, n, threads, lines_of).ok());
    EXPECT_EQ(f.text, expected) << threads << " threads";
  }
  StringFile empty;
  ASSERT_TRUE(AppendLinesInOrder(&empty, 0, 2, lines_of).ok());
  EXPECT_EQ(empty.text, "");
}

TEST(AppendLinesInOrder, FirstWriteErrorIsReturned) {
  StringFile f(/*fail_after=*/1);
  Status s = AppendLinesInOrder(&f, 10000, 2, [](size_t i, std::string* t) { *t += std::to_string(i) + "\n"; });
  ASSERT_FALSE(s.ok());
  EXPECT_NE(s.message().find("No space left"), std::string::npos);
}

}  // namespace
}  // namespace prefsift
