#include "harness/core/event_queue.h"

#include <gtest/gtest.h>

namespace weir {
namespace {

TEST(EventQueue, PopsEarliestFirst) {
  EventQueue<int> q;
  q.Push(30, 3);
  q.Push(10, 1);
  q.Push(20, 2);
  EXPECT_EQ(q.NextTime(), 10);
  EXPECT_EQ(q.Pop().payload, 1);
  EXPECT_EQ(q.Pop().payload, 2);
  EXPECT_EQ(q.Pop().payload, 3);
  EXPECT_TRUE(q.empty());
}

TEST(EventQueue, EventsAtTheSameTimeComeOutInPushOrder) {
  EventQueue<int> q;
  for (int i = 0; i < 100; ++i) q.Push(5, i);
  for (int i = 0; i < 100; ++i) EXPECT_EQ(q.Pop().payload, i);
}

TEST(VirtualTime, SaturatingAddStopsAtNever) {
  EXPECT_EQ(SaturatingAdd(kNever - 5, 10), kNever);
  EXPECT_EQ(SaturatingAdd(5, 10), 15);
  EXPECT_EQ(FormatTime(Millis(1500)), "1.500000000s");
  EXPECT_EQ(FormatTime(kNever), "never");
}

}  // namespace
}  // namespace weir
