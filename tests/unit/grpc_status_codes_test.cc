#include <grpcpp/support/status.h>

#include <gtest/gtest.h>

#include "harness/broker/broker_endpoint.h"

namespace weir {
namespace {

// Source: the gRPC status code table (grpc.io "Status codes";
// grpc include/grpc/impl/codegen/status.h); docs/references.md.
TEST(CallCode, MatchesTheGrpcStatusCodeTable) {
  EXPECT_EQ(static_cast<int>(CallCode::kOk), 0);
  EXPECT_EQ(static_cast<int>(CallCode::kInvalidArgument), 3);
  EXPECT_EQ(static_cast<int>(CallCode::kDeadlineExceeded), 4);
  EXPECT_EQ(static_cast<int>(CallCode::kResourceExhausted), 8);
  EXPECT_EQ(static_cast<int>(CallCode::kFailedPrecondition), 9);
  EXPECT_EQ(static_cast<int>(CallCode::kUnavailable), 14);
}

// The codes weir sends must mean the same to the gRPC library it sends them with.
TEST(CallCode, AgreesWithTheLinkedGrpcLibrary) {
  EXPECT_EQ(static_cast<int>(CallCode::kDeadlineExceeded), grpc::StatusCode::DEADLINE_EXCEEDED);
  EXPECT_EQ(static_cast<int>(CallCode::kResourceExhausted), grpc::StatusCode::RESOURCE_EXHAUSTED);
  EXPECT_EQ(static_cast<int>(CallCode::kFailedPrecondition), grpc::StatusCode::FAILED_PRECONDITION);
  EXPECT_EQ(static_cast<int>(CallCode::kUnavailable), grpc::StatusCode::UNAVAILABLE);
  EXPECT_EQ(static_cast<int>(CallCode::kInvalidArgument), grpc::StatusCode::INVALID_ARGUMENT);
  // Codes weir reads from connectors' answers.
  EXPECT_EQ(grpc::StatusCode::CANCELLED, 1);
  EXPECT_EQ(grpc::StatusCode::NOT_FOUND, 5);
  EXPECT_EQ(grpc::StatusCode::ABORTED, 10);
}

}  // namespace
}  // namespace weir
