#include "harness/edge/connector_identity.h"

#include <sys/stat.h>
#include <unistd.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "absl/strings/match.h"

namespace weir {
namespace {

namespace fs = std::filesystem;

// A scratch directory that becomes the working directory for the test and is
// removed (and the old working directory restored) at the end.
class ConnectorIdentityTest : public ::testing::Test {
 protected:
  void SetUp() override {
    old_cwd_ = fs::current_path();
    char templ[] = "/tmp/weir-identity-XXXXXX";
    ASSERT_NE(::mkdtemp(templ), nullptr);
    dir_ = templ;
    fs::current_path(dir_);
    fs::create_directories("bin");
  }
  void TearDown() override {
    fs::current_path(old_cwd_);
    fs::remove_all(dir_);
  }
  static void Write(const std::string& path, const std::string& bytes, bool executable) {
    std::ofstream(path, std::ios::binary) << bytes;
    ::chmod(path.c_str(), executable ? 0755 : 0644);
  }
  // Identifies argv here, then goes to a sibling directory, as a replay would.
  v1::TraceHeader Record(const std::vector<std::string>& argv) {
    auto id = IdentifyConnector(argv);
    EXPECT_TRUE(id.ok()) << id.status();
    v1::TraceHeader h;
    for (const auto& a : argv) h.add_connector_argv(a);
    if (id.ok()) *h.mutable_connector() = *id;
    fs::create_directories(dir_ + "/elsewhere");
    fs::current_path(dir_ + "/elsewhere");
    return h;
  }

  fs::path old_cwd_;
  std::string dir_;
};

TEST_F(ConnectorIdentityTest, RecordsAbsolutePathsAndHashesOfExecutableAndFirstFileArgument) {
  Write("bin/conn", "#!/bin/sh\n", true);
  Write("ci.conf", "x", false);
  auto id = IdentifyConnector({"bin/conn", "--config", "ci.conf", "bin/conn"});
  ASSERT_TRUE(id.ok()) << id.status();
  EXPECT_EQ(id->working_directory(), dir_);
  EXPECT_EQ(id->executable(), dir_ + "/bin/conn");
  EXPECT_TRUE(absl::StartsWith(id->executable_sha256(), "sha256:"));
  EXPECT_EQ(id->executable_sha256().size(), 7u + 64u);
  EXPECT_EQ(id->file_argument_index(), 2u);  // "--config" names no file
  EXPECT_EQ(id->file_argument(), dir_ + "/ci.conf");
  EXPECT_NE(id->file_argument_sha256(), id->executable_sha256());
}

TEST_F(ConnectorIdentityTest, FindsAProgramOnPathAsAnAbsolutePath) {
  auto id = IdentifyConnector({"sh", "-c", "true"});
  ASSERT_TRUE(id.ok()) << id.status();
  EXPECT_TRUE(fs::path(id->executable()).is_absolute()) << id->executable();
  EXPECT_EQ(id->file_argument_index(), 0u);
}

TEST_F(ConnectorIdentityTest, RefusesACommandThatIsNotAnExecutableFile) {
  Write("bin/plain", "x", false);
  EXPECT_EQ(IdentifyConnector({"bin/plain"}).status().code(), absl::StatusCode::kNotFound);
  EXPECT_EQ(IdentifyConnector({"./bin"}).status().code(), absl::StatusCode::kNotFound);
}

TEST_F(ConnectorIdentityTest, ReplayElsewhereStartsTheRecordedAbsolutePaths) {
  Write("bin/conn", "#!/bin/sh\n", true);
  Write("source.py", "print()\n", false);
  const v1::TraceHeader h = Record({"bin/conn", "source.py", "--flag"});
  auto c = ResolveRecordedConnector(h, {});
  ASSERT_TRUE(c.ok()) << c.status();
  EXPECT_EQ(c->argv, (std::vector<std::string>{dir_ + "/bin/conn", dir_ + "/source.py", "--flag"}));
  EXPECT_FALSE(c->changed());
}

TEST_F(ConnectorIdentityTest, AChangedBinaryOrFileArgumentIsSaidWithBothHashes) {
  Write("bin/conn", "one", true);
  Write("source.py", "one", false);
  const v1::TraceHeader h = Record({"bin/conn", "source.py"});
  Write(dir_ + "/bin/conn", "two", true);
  Write(dir_ + "/source.py", "two", false);
  auto c = ResolveRecordedConnector(h, {});
  ASSERT_TRUE(c.ok()) << c.status();
  ASSERT_EQ(c->changes.size(), 2u);
  const std::string then = h.connector().executable_sha256().substr(7);
  EXPECT_TRUE(absl::StartsWith(
      c->changes[0], "the connector binary changed since this trace was recorded: sha256 " + then + " then, "))
      << c->changes[0];
  EXPECT_TRUE(absl::StartsWith(c->changes[1], "the connector file argument changed")) << c->changes[1];
}

TEST_F(ConnectorIdentityTest, AMissingExecutableCannotStartAndSaysWhatWasRecorded) {
  Write("bin/conn", "#!/bin/sh\n", true);
  const v1::TraceHeader h = Record({"bin/conn"});
  fs::remove(dir_ + "/bin/conn");
  auto c = ResolveRecordedConnector(h, {});
  ASSERT_EQ(c.status().code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_EQ(c.status().message(), "the connector cannot start: '" + dir_ + "/bin/conn' (recorded as 'bin/conn' in " +
                                      dir_ + ") no longer exists; give --connector 'CMD ARGS…' to name it");
}

TEST_F(ConnectorIdentityTest, AMissingFileArgumentCannotStart) {
  Write("bin/conn", "#!/bin/sh\n", true);
  Write("source.py", "print()\n", false);
  const v1::TraceHeader h = Record({"bin/conn", "source.py"});
  fs::remove(dir_ + "/source.py");
  auto c = ResolveRecordedConnector(h, {});
  ASSERT_EQ(c.status().code(), absl::StatusCode::kFailedPrecondition);
  EXPECT_TRUE(absl::StrContains(c.status().message(), "its file argument '" + dir_ + "/source.py'")) << c.status();
}

TEST_F(ConnectorIdentityTest, AnOverrideIsTakenAsGivenAndStillCompared) {
  Write("bin/conn", "one", true);
  const v1::TraceHeader h = Record({"bin/conn"});
  Write("moved", "one", true);  // in elsewhere/: the same bytes
  auto same = ResolveRecordedConnector(h, {"./moved"});
  ASSERT_TRUE(same.ok()) << same.status();
  EXPECT_EQ(same->argv, std::vector<std::string>{"./moved"});
  EXPECT_FALSE(same->changed());
  Write("other", "two", true);
  auto other = ResolveRecordedConnector(h, {"./other"});
  ASSERT_TRUE(other.ok()) << other.status();
  EXPECT_TRUE(other->changed());
  EXPECT_EQ(ResolveRecordedConnector(h, {"./absent"}).status().code(), absl::StatusCode::kFailedPrecondition);
}

TEST_F(ConnectorIdentityTest, ATraceWithoutIdentityRunsTheCommandAsGiven) {
  v1::TraceHeader h;
  h.add_connector_argv("sh");
  auto c = ResolveRecordedConnector(h, {});
  ASSERT_TRUE(c.ok()) << c.status();
  EXPECT_EQ(c->argv, std::vector<std::string>{"sh"});
  h.set_connector_argv(0, "bin/absent");
  EXPECT_EQ(ResolveRecordedConnector(h, {}).status().code(), absl::StatusCode::kFailedPrecondition);
}

}  // namespace
}  // namespace weir
