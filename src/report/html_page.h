// Building blocks of the report's HTML pages: one self-contained document each (inline
// CSS, inline SVG and PNG data; no scripts, no network: a Content-Security-Policy meta
// element forbids any other source, so a stray reference shows as a console error).
#pragma once

#include <string>
#include <vector>

namespace boldsum {

// Text for HTML content or a quoted attribute value.
std::string Html(const std::string& text);

// The document up to and including the page's <h1>.
std::string PageStart(const std::string& title, const std::string& subtitle);
std::string PageEnd();

// <h2 id="...">text</h2> (level 2) or <h3> (level 3).
std::string Heading(int level, const std::string& text, const std::string& id = "");

// <p class="...">html</p>; `html` is inserted as is.
std::string Paragraph(const std::string& html, const std::string& css_class = "");

// A table; cells are HTML (escape text with Html()). `numeric` right-aligns columns.
struct HtmlTable {
  std::vector<std::string> header;
  std::vector<std::vector<std::string>> rows;
  std::vector<bool> numeric;  // per column; missing entries mean text
  std::string caption;

  std::string ToHtml() const;
};

// A figure around inline SVG or an <img>, with a caption (HTML).
std::string Figure(const std::string& content, const std::string& caption_html);

// <span class="badge ...">text</span>: kind "ok", "warn" or "bad".
std::string Badge(const std::string& text, const std::string& kind);

}  // namespace boldsum
