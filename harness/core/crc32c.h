// File: crc32c.h
//
// CRC-32C (Castagnoli, reflected polynomial 0x82F63B78), as used by iSCSI
// (RFC 3720) to protect message payloads. Backed by Boost.CRC.
#pragma once

#include <cstdint>
#include <string_view>

namespace weir {

std::uint32_t Crc32c(std::string_view bytes);

}  // namespace weir
