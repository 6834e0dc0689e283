// Every kind of trace event is wired into the places that must know it: a
// new kind added to proto/weir/v1/trace.proto fails here until it has words
// in reports (DescribeEvent) and survives the compact reference that
// evidence keeps (MakeRef, then Rebuild keeps its kind). The kinds are read
// from the message's own descriptor, so the test needs no list to update.
#include <gtest/gtest.h>

#include <string>

#include "google/protobuf/descriptor.h"
#include "google/protobuf/message.h"
#include "harness/trace/describe.h"
#include "harness/trace/event_ref.h"
#include "weir/v1/trace.pb.h"

namespace weir {
namespace {

using google::protobuf::FieldDescriptor;
using google::protobuf::OneofDescriptor;

const OneofDescriptor& KindOneof() {
  const OneofDescriptor* kind = v1::TraceEvent::descriptor()->FindOneofByName("kind");
  EXPECT_NE(kind, nullptr);
  return *kind;
}

// An event of the kind set by `field`, every field of it at its default.
v1::TraceEvent EventOfKind(const FieldDescriptor* field) {
  v1::TraceEvent e;
  e.set_seq(7);
  e.GetReflection()->MutableMessage(&e, field);
  return e;
}

TEST(TraceEventKinds, TheOneofHasKinds) {
  // A guard for the tests below: they loop over these.
  EXPECT_GE(KindOneof().field_count(), 20);
}

TEST(TraceEventKinds, EveryKindIsDescribed) {
  const OneofDescriptor& kind = KindOneof();
  for (int i = 0; i < kind.field_count(); ++i) {
    const FieldDescriptor* field = kind.field(i);
    const v1::TraceEvent e = EventOfKind(field);
    ASSERT_EQ(static_cast<int>(e.kind_case()), field->number()) << field->name();
    const std::string text = DescribeEvent(e);
    EXPECT_NE(text, "unknown event") << field->name() << " has no words in describe.cc";
    EXPECT_FALSE(text.empty()) << field->name();
  }
}

TEST(TraceEventKinds, EveryKindSurvivesTheCompactReference) {
  const OneofDescriptor& kind = KindOneof();
  for (int i = 0; i < kind.field_count(); ++i) {
    const FieldDescriptor* field = kind.field(i);
    const EventRef ref = MakeRef(EventOfKind(field));
    EXPECT_TRUE(ref.valid()) << field->name();
    EXPECT_EQ(ref.seq, 7u) << field->name();
    EXPECT_EQ(static_cast<int>(Rebuild(ref).kind_case()), field->number())
        << field->name() << " is lost by MakeRef/Rebuild in event_ref.cc";
  }
}

// A crash cited as evidence keeps its point (kept as a number, not a string).
TEST(TraceEventKinds, ACrashKeepsItsPointThroughTheReference) {
  v1::TraceEvent e;
  e.mutable_crashed()->set_point("in-notice-after-ack");
  EXPECT_EQ(Rebuild(MakeRef(e)).crashed().point(), "in-notice-after-ack");
  EXPECT_EQ(DescribeEvent(Rebuild(MakeRef(e))), "crashed the connector at in-notice-after-ack");
}

}  // namespace
}  // namespace weir
