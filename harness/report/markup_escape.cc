#include "harness/report/markup_escape.h"

#include <cstdint>

namespace weir {
namespace {

constexpr char kReplacement[] = "\xEF\xBF\xBD";  // U+FFFD

// Length of the well-formed UTF-8 sequence starting at text[i] (RFC 3629 §4,
// "UTF8-octets" grammar), or 0 when it is not one. Stores the code point.
std::size_t Utf8Sequence(std::string_view text, std::size_t i, std::uint32_t* cp) {
  auto byte = [&](std::size_t k) { return static_cast<unsigned char>(text[i + k]); };
  const unsigned char c = byte(0);
  std::size_t len;
  std::uint32_t min;
  if (c >= 0xC2 && c <= 0xDF) {
    len = 2, min = 0x80, *cp = c & 0x1Fu;
  } else if (c >= 0xE0 && c <= 0xEF) {
    len = 3, min = 0x800, *cp = c & 0x0Fu;
  } else if (c >= 0xF0 && c <= 0xF4) {
    len = 4, min = 0x10000, *cp = c & 0x07u;
  } else {
    return 0;
  }
  if (i + len > text.size()) return 0;
  for (std::size_t k = 1; k < len; ++k) {
    if ((byte(k) & 0xC0u) != 0x80u) return 0;
    *cp = (*cp << 6) | (byte(k) & 0x3Fu);
  }
  if (*cp < min || *cp > 0x10FFFF || (*cp >= 0xD800 && *cp <= 0xDFFF)) return 0;
  return len;
}

}  // namespace

std::string EscapeMarkup(std::string_view text) {
  std::string out;
  out.reserve(text.size() + text.size() / 8);
  for (std::size_t i = 0; i < text.size(); ++i) {
    const unsigned char c = static_cast<unsigned char>(text[i]);
    switch (c) {
      case '&': out += "&amp;"; continue;
      case '<': out += "&lt;"; continue;
      case '>': out += "&gt;"; continue;
      case '"': out += "&quot;"; continue;
      case '\'': out += "&#39;"; continue;
      default: break;
    }
    if (c < 0x80) {
      if (c < 0x20 && c != '\t' && c != '\n' && c != '\r') {
        out += kReplacement;
      } else if (c == 0x7F) {
        out += kReplacement;
      } else {
        out.push_back(static_cast<char>(c));
      }
      continue;
    }
    std::uint32_t cp = 0;
    const std::size_t len = Utf8Sequence(text, i, &cp);
    if (len == 0) {
      out += kReplacement;
      continue;
    }
    if (cp == 0xFFFE || cp == 0xFFFF || (cp >= 0x80 && cp <= 0x9F)) {
      out += kReplacement;
      i += len - 1;
      continue;
    }
    out.append(text.substr(i, len));
    i += len - 1;
  }
  return out;
}

}  // namespace weir
