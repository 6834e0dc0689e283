#include "harness/core/crc32c.h"

#include <string>

#include <gtest/gtest.h>

namespace weir {
namespace {

// Source: RFC 3720 (iSCSI), appendix B.4 "CRC Examples". The RFC prints the
// CRC bytes in transmission order (aa 36 91 8a = 0x8A9136AA); docs/references.md.
TEST(Crc32c, MatchesRfc3720AppendixB4) {
  EXPECT_EQ(Crc32c(std::string(32, '\x00')), 0x8A9136AAu);
  EXPECT_EQ(Crc32c(std::string(32, '\xFF')), 0x62A8AB43u);
  std::string up, down;
  for (int i = 0; i < 32; ++i) {
    up.push_back(static_cast<char>(i));
    down.push_back(static_cast<char>(31 - i));
  }
  EXPECT_EQ(Crc32c(up), 0x46DD794Eu);
  EXPECT_EQ(Crc32c(down), 0x113FDB5Cu);
}

// Source: CRC catalogue (reveng), CRC-32/ISCSI check value; docs/references.md.
TEST(Crc32c, MatchesCatalogueCheckValue) { EXPECT_EQ(Crc32c("123456789"), 0xE3069283u); }

}  // namespace
}  // namespace weir
