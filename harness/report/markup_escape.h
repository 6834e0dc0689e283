// File: markup_escape.h
//
// The one escaping function for every byte weir puts into HTML, SVG or XML
// reports (HTML pages, JUnit XML). Whatever it returns is safe as element text
// and inside a double- or single-quoted attribute value: it can open no tag,
// close no attribute and start no entity, and it is well-formed UTF-8 holding
// only characters XML 1.0 allows. Connector-supplied text (stderr, error
// details, argv) always goes through it; nothing else is needed on top.
//
//   EscapeMarkup("<script>\"&'")  ==  "&lt;script&gt;&quot;&amp;&#39;"
//
// Thread safety: a pure function.
#pragma once

#include <string>
#include <string_view>

namespace weir {

// & < > " ' become entities; bytes that are not well-formed UTF-8 (stray
// continuation bytes, truncated or overlong sequences, surrogates, code points
// above U+10FFFF) and characters XML 1.0 forbids (control characters other
// than tab, newline and carriage return; DEL and C1 controls; U+FFFE, U+FFFF)
// become U+FFFD: one per byte of an ill-formed sequence, one per forbidden
// character.
std::string EscapeMarkup(std::string_view text);

}  // namespace weir
