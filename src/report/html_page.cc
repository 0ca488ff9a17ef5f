#include "report/html_page.h"

#include "boldsum/design.h"

namespace boldsum {
namespace {

constexpr const char* kStyle = R"(
body { font-family: sans-serif; margin: 1.5em auto; max-width: 1120px; padding: 0 1em;
       color: #1a1a1a; background: #fff; line-height: 1.4; }
h1 { font-size: 1.6em; margin-bottom: 0.1em; }
h2 { font-size: 1.3em; border-bottom: 1px solid #ccc; margin-top: 1.8em; }
h3 { font-size: 1.05em; margin-top: 1.3em; }
p.subtitle { color: #555; margin-top: 0; }
p.note { color: #444; font-size: 0.92em; }
nav a { margin-right: 1em; }
table { border-collapse: collapse; margin: 0.6em 0 1em; font-size: 0.92em; }
caption { text-align: left; font-weight: bold; padding-bottom: 0.3em; }
th, td { border: 1px solid #ccc; padding: 0.25em 0.6em; vertical-align: top; }
th { background: #f2f2f2; text-align: left; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
figure { margin: 0.8em 0 1.2em; overflow-x: auto; }
figcaption { font-size: 0.9em; color: #444; max-width: 60em; }
svg.figure { display: block; }
.badge { display: inline-block; padding: 0 0.5em; border-radius: 0.6em; font-size: 0.85em; }
.badge.ok { background: #e3efe3; } .badge.warn { background: #fbe7c6; }
.badge.bad { background: #f6d2cc; }
ul.warnings li { margin-bottom: 0.2em; }
.row { display: flex; flex-wrap: wrap; gap: 1.5em; align-items: flex-start; }
)";

}  // namespace

std::string Html(const std::string& text) { return EscapeXml(text); }

std::string PageStart(const std::string& title, const std::string& subtitle) {
  return "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n"
         "<meta http-equiv=\"Content-Security-Policy\" content=\"default-src 'none'; "
         "img-src data:; style-src 'unsafe-inline'\">\n"
         "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n<title>" +
         Html(title) + "</title>\n<style>" + kStyle + "</style>\n</head>\n<body>\n<h1>" +
         Html(title) + "</h1>\n<p class=\"subtitle\">" + Html(subtitle) + "</p>\n";
}

std::string PageEnd() { return "</body>\n</html>\n"; }

std::string Heading(int level, const std::string& text, const std::string& id) {
  const std::string tag = level <= 2 ? "h2" : "h3";
  return "<" + tag + (id.empty() ? "" : " id=\"" + Html(id) + "\"") + ">" + Html(text) + "</" +
         tag + ">\n";
}

std::string Paragraph(const std::string& html, const std::string& css_class) {
  return "<p" + (css_class.empty() ? "" : " class=\"" + css_class + "\"") + ">" + html + "</p>\n";
}

std::string HtmlTable::ToHtml() const {
  std::string html = "<table>\n";
  if (!caption.empty()) html += "<caption>" + Html(caption) + "</caption>\n";
  html += "<thead><tr>";
  for (const std::string& cell : header) html += "<th>" + cell + "</th>";
  html += "</tr></thead>\n<tbody>\n";
  for (const std::vector<std::string>& row : rows) {
    html += "<tr>";
    for (size_t c = 0; c < row.size(); ++c) {
      const bool right = c < numeric.size() && numeric[c];
      html += (right ? "<td class=\"num\">" : "<td>") + row[c] + "</td>";
    }
    html += "</tr>\n";
  }
  return html + "</tbody>\n</table>\n";
}

std::string Figure(const std::string& content, const std::string& caption_html) {
  return "<figure>\n" + content + "<figcaption>" + caption_html + "</figcaption>\n</figure>\n";
}

std::string Badge(const std::string& text, const std::string& kind) {
  return "<span class=\"badge " + kind + "\">" + Html(text) + "</span>";
}

}  // namespace boldsum
