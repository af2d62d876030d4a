// SOURCE_DATE_EPOCH (core/source_date.h): which values count as set, and the
// UTC text of a time. The variable is the reproducible-builds convention
// (reproducible-builds.org specification of SOURCE_DATE_EPOCH, from memory:
// "a UNIX timestamp ... integer"); the accepted forms beyond that (leading
// white space, '+') are what strtoll reads, kept as the runs have read it.
#include "core/source_date.h"

#include <gtest/gtest.h>

#include <cstdlib>
#include <ctime>
#include <optional>
#include <string>

namespace prefsift {
namespace {

// Sets (or unsets, for nullptr) the variable for one test and restores it.
class SourceDateEnv {
 public:
  explicit SourceDateEnv(const char* value) {
    if (const char* old = std::getenv("SOURCE_DATE_EPOCH")) saved_ = old;
    if (value) ::setenv("SOURCE_DATE_EPOCH", value, 1);
    else ::unsetenv("SOURCE_DATE_EPOCH");
  }
  ~SourceDateEnv() {
    if (saved_) ::setenv("SOURCE_DATE_EPOCH", saved_->c_str(), 1);
    else ::unsetenv("SOURCE_DATE_EPOCH");
  }

 private:
  std::optional<std::string> saved_;
};

TEST(SourceDate, WholeNonNegativeSecondsAreSet) {
  struct Case { const char* value; int64_t seconds; };
  for (const Case& c : {Case{"0", 0}, Case{"1", 1}, Case{"1700000000", 1700000000}, Case{" 42", 42}, Case{"+7", 7}}) {
    SourceDateEnv env(c.value);
    ASSERT_TRUE(SourceDateEpoch().has_value()) << c.value;
    EXPECT_EQ(*SourceDateEpoch(), c.seconds) << c.value;
    EXPECT_EQ(NowOrSourceDate(), c.seconds) << c.value;
  }
}

TEST(SourceDate, AnythingElseIsUnsetAndTheClockIsUsed) {
  for (const char* value : {static_cast<const char*>(nullptr), "", " ", "abc", "12s", "-5", "1.5", "+", "0x10"}) {
    SourceDateEnv env(value);
    EXPECT_FALSE(SourceDateEpoch().has_value()) << (value ? value : "(unset)");
    const int64_t before = static_cast<int64_t>(std::time(nullptr));
    const int64_t now = NowOrSourceDate();
    EXPECT_GE(now, before);
    EXPECT_LE(now, before + 5);
  }
}

TEST(SourceDate, UtcText) {
  // Worked values: 0 is the epoch; 951782400 is 2000-02-29T00:00:00Z (a leap
  // day; 30 years of 365 days + 7 leap days + 59 days, times 86400).
  EXPECT_EQ(UtcText(0), "1970-01-01T00:00:00Z");
  EXPECT_EQ(UtcText(1), "1970-01-01T00:00:01Z");
  EXPECT_EQ(UtcText(951782400), "2000-02-29T00:00:00Z");
  EXPECT_EQ(UtcText(951782400 + 86399), "2000-02-29T23:59:59Z");
}

}  // namespace
}  // namespace prefsift
