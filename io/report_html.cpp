#include "io/report_html.h"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstddef>
#include <cstdio>
#include <fstream>
#include <iterator>
#include <sstream>

#include "io/plot_canvas.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"
#include "streakwright_version.h"

namespace sw {

namespace {

constexpr char kAlphabet[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";

// Inline stylesheet: readable on screen, clean when printed; no external resources.
constexpr const char* kCss = R"css(
:root { --ink: #1d2430; --muted: #5b6472; --rule: #d5d9df; --band: #f4f6f8; --warn: #fff4e0; }
* { box-sizing: border-box; }
body { margin: 0; color: var(--ink); background: #ffffff;
       font: 15px/1.45 "Helvetica Neue", Helvetica, Arial, "Liberation Sans", sans-serif; }
main, header, footer { max-width: 1000px; margin: 0 auto; padding: 0 24px; }
header { padding-top: 28px; border-bottom: 2px solid var(--ink); margin-bottom: 18px; }
h1 { font-size: 24px; margin: 0 0 10px 0; }
h2 { font-size: 19px; margin: 28px 0 8px 0; padding-bottom: 3px; border-bottom: 1px solid var(--rule); }
h3 { font-size: 16px; margin: 20px 0 6px 0; }
p { margin: 6px 0 10px 0; white-space: pre-line; }
table { border-collapse: collapse; margin: 8px 0 16px 0; font-variant-numeric: tabular-nums; }
caption { caption-side: top; text-align: left; font-weight: bold; padding: 4px 0; }
th, td { border-bottom: 1px solid var(--rule); padding: 4px 12px 4px 6px; text-align: left;
         vertical-align: top; }
th { background: var(--band); border-bottom: 1px solid var(--ink); }
td.num { text-align: right; font-family: "DejaVu Sans Mono", Menlo, Consolas, monospace; }
td.unit { color: var(--muted); }
a { color: #1a4f9c; }
figure { margin: 14px 0 22px 0; page-break-inside: avoid; break-inside: avoid; }
figure img { max-width: 100%; height: auto; border: 1px solid var(--rule); }
figcaption { color: var(--muted); font-size: 14px; margin-top: 4px; }
figcaption b { color: var(--ink); }
pre { background: var(--band); border: 1px solid var(--rule); padding: 10px 12px; overflow-x: auto;
      font: 13px/1.35 "DejaVu Sans Mono", Menlo, Consolas, monospace; white-space: pre-wrap; }
.banner { background: #fde2e2; border-left: 6px solid #c00000; color: #600000; padding: 6px 12px;
  margin: 8px 0; }
.warning { background: var(--warn); border-left: 4px solid #d08a00; padding: 6px 12px; margin: 8px 0;
           white-space: pre-line; }
footer { margin-top: 36px; padding-top: 8px; padding-bottom: 28px; border-top: 1px solid var(--rule);
         color: var(--muted); font-size: 13px; }
@media print {
  body { font-size: 11pt; }
  main, header, footer { max-width: none; padding: 0; }
  h2, h3 { page-break-after: avoid; break-after: avoid; }
  table, pre, .warning, .banner { page-break-inside: avoid; break-inside: avoid; }
}
)css";

bool is_png(const std::vector<unsigned char>& b) {
  static constexpr std::array<unsigned char, 8> kSig = {0x89, 'P',  'N',  'G',
                                                        0x0D, 0x0A, 0x1A, 0x0A};
  return b.size() > kSig.size() && std::equal(kSig.begin(), kSig.end(), b.begin());
}

// An SVG document as the figures write it: an XML declaration, then the <svg element.
bool is_svg(const std::vector<unsigned char>& b) {
  const std::string head(
      b.begin(), b.begin() + static_cast<std::ptrdiff_t>(std::min<std::size_t>(b.size(), 512)));
  return head.rfind("<?xml", 0) == 0 && head.find("<svg") != std::string::npos;
}

}  // namespace

KeyValueRow KeyValueRow::number(const std::string& name, double value, const std::string& unit,
                                std::optional<double> sigma, int significant) {
  KeyValueRow row{name, format_g(value, significant), unit, std::nullopt};
  if (!sigma) return row;
  ValueSigmaText t = round_value_sigma(value, *sigma);
  row.value = std::move(t.value);
  row.sigma = std::move(t.sigma);
  return row;
}

std::string html_escape(const std::string& text) {
  return plot::escape_markup(text, "&#39;", false);
}

std::string base64_encode(const unsigned char* data, std::size_t size) {
  std::string out;
  out.reserve((size + 2) / 3 * 4);
  std::size_t i = 0;
  for (; i + 2 < size; i += 3) {
    const unsigned v = (unsigned(data[i]) << 16) | (unsigned(data[i + 1]) << 8) | data[i + 2];
    out += kAlphabet[(v >> 18) & 63];
    out += kAlphabet[(v >> 12) & 63];
    out += kAlphabet[(v >> 6) & 63];
    out += kAlphabet[v & 63];
  }
  if (i + 1 == size) {
    const unsigned v = unsigned(data[i]) << 16;
    out += kAlphabet[(v >> 18) & 63];
    out += kAlphabet[(v >> 12) & 63];
    out += "==";
  } else if (i + 2 == size) {
    const unsigned v = (unsigned(data[i]) << 16) | (unsigned(data[i + 1]) << 8);
    out += kAlphabet[(v >> 18) & 63];
    out += kAlphabet[(v >> 12) & 63];
    out += kAlphabet[(v >> 6) & 63];
    out += '=';
  }
  return out;
}

std::string base64_encode(const std::vector<unsigned char>& data) {
  return base64_encode(data.data(), data.size());
}

std::vector<unsigned char> base64_decode(const std::string& text) {
  std::array<int, 256> rev;
  rev.fill(-1);
  for (int k = 0; k < 64; ++k) rev[static_cast<unsigned char>(kAlphabet[k])] = k;
  std::vector<unsigned char> out;
  out.reserve(text.size() / 4 * 3);
  unsigned acc = 0;
  int bits = 0;
  std::size_t pos = 0;
  for (; pos < text.size(); ++pos) {
    const unsigned char ch = static_cast<unsigned char>(text[pos]);
    if (ch == '=') break;
    const int v = rev[ch];
    if (v < 0) {
      throw input_error("base64 text has the character '" + std::string(1, char(ch)) +
                        "' at position " + std::to_string(pos) +
                        " (expected A-Z, a-z, 0-9, '+', '/' or '=' padding).");
    }
    acc = (acc << 6) | unsigned(v);
    bits += 6;
    if (bits >= 8) {
      bits -= 8;
      out.push_back(static_cast<unsigned char>((acc >> bits) & 0xFF));
    }
  }
  for (; pos < text.size(); ++pos) {
    if (text[pos] != '=') {
      throw input_error("base64 text continues after '=' padding at position " +
                        std::to_string(pos) + " (expected padding only at the end).");
    }
  }
  return out;
}

HtmlReport::HtmlReport(std::string title)
    : title_(std::move(title)), footer_(std::string("streakwright ") + STREAKWRIGHT_VERSION) {}

void HtmlReport::add_heading(const std::string& text, int level) {
  const std::string tag = level <= 2 ? "h2" : "h3";
  std::string block = "<";
  block.append(tag).append(">").append(html_escape(text)).append("</").append(tag).append(">");
  blocks_.push_back(std::move(block));
}

void HtmlReport::add_paragraph(const std::string& text) {
  blocks_.push_back("<p>" + html_escape(text) + "</p>");
}

void HtmlReport::add_warning(const std::string& text) {
  blocks_.push_back("<div class=\"warning\"><b>Warning:</b> " + html_escape(text) + "</div>");
}

void HtmlReport::add_quality(const QualitySection& q) {
  auto num = [](double v) { return format_g(v, kDisplayDigits); };
  if (!q.trusted) {
    std::string h =
        "<div class=\"banner\"><b>Not trusted.</b> The numbers below are written, but "
        "these quality checks failed:<ul>";
    for (const auto& c : q.checks)
      if (!c.pass && c.guards_headline)
        h += "<li>" + html_escape(c.name) + ": " + html_escape(num(c.value)) + " (required " +
             html_escape(c.rule + " " + num(c.limit)) + ") &mdash; " + html_escape(c.detail) +
             "</li>";
    h += "</ul></div>";
    blocks_.push_back(std::move(h));
  }
  std::vector<std::vector<std::string>> rows;
  for (const auto& c : q.checks)
    rows.push_back({c.name, num(c.value), c.rule + " " + num(c.limit), c.pass ? "pass" : "FAIL",
                    c.guards_headline ? "yes" : "no (reported)"});
  add_table({"check", "value", "required", "result", "guards a headline number"}, rows,
            q.trusted ? "Quality checks: trusted" : "Quality checks: NOT trusted");
}

void HtmlReport::add_key_value_table(const std::string& title,
                                     const std::vector<KeyValueRow>& rows) {
  std::string h = "<table class=\"kv\">";
  if (!title.empty()) h += "<caption>" + html_escape(title) + "</caption>";
  h += "<thead><tr><th>quantity</th><th>value</th><th>unit</th></tr></thead><tbody>";
  for (const auto& r : rows) {
    std::string value = html_escape(r.value);
    if (r.sigma) value += " &plusmn; " + html_escape(*r.sigma);
    h += "<tr><td>" + html_escape(r.name) + "</td><td class=\"num\">" + value +
         "</td><td class=\"unit\">" + html_escape(r.unit) + "</td></tr>";
  }
  h += "</tbody></table>";
  blocks_.push_back(std::move(h));
}

void HtmlReport::add_table(const std::vector<std::string>& header,
                           const std::vector<std::vector<std::string>>& rows,
                           const std::string& title) {
  add_table_with_links(header, rows, {}, title);
}

void HtmlReport::add_table_with_links(const std::vector<std::string>& header,
                                      const std::vector<std::vector<std::string>>& rows,
                                      const std::vector<std::vector<std::string>>& links,
                                      const std::string& title) {
  std::string h = "<table>";
  if (!title.empty()) h += "<caption>" + html_escape(title) + "</caption>";
  if (!header.empty()) {
    h += "<thead><tr>";
    for (const auto& c : header) h += "<th>" + html_escape(c) + "</th>";
    h += "</tr></thead>";
  }
  h += "<tbody>";
  for (std::size_t r = 0; r < rows.size(); ++r) {
    h += "<tr>";
    const std::size_t n = std::max(header.size(), rows[r].size());
    for (std::size_t k = 0; k < n; ++k) {
      const std::string text = k < rows[r].size() ? html_escape(rows[r][k]) : std::string();
      const std::string href =
          r < links.size() && k < links[r].size() ? links[r][k] : std::string();
      h += "<td>" +
           (href.empty() ? text : "<a href=\"" + html_escape(href) + "\">" + text + "</a>") +
           "</td>";
    }
    h += "</tr>";
  }
  h += "</tbody></table>";
  blocks_.push_back(std::move(h));
}

void HtmlReport::add_figure(const std::string& png_path, const std::string& caption) {
  std::ifstream in(png_path, std::ios::binary);
  if (!in) {
    throw input_error("Cannot embed the figure '" + png_path +
                      "' into the report: the file cannot be opened.");
  }
  std::vector<unsigned char> bytes((std::istreambuf_iterator<char>(in)),
                                   std::istreambuf_iterator<char>());
  if (is_svg(bytes)) {
    add_embedded("image/svg+xml", bytes, caption);
    return;
  }
  if (!is_png(bytes)) {
    throw input_error("Cannot embed the figure '" + png_path +
                      "' into the report: the file is neither a PNG (no PNG signature) nor an "
                      "SVG document (no <?xml ...?> declaration followed by <svg).");
  }
  add_figure_png(bytes, caption);
}

void HtmlReport::add_embedded(const std::string& mime, const std::vector<unsigned char>& bytes,
                              const std::string& caption) {
  ++figures_;
  std::string h = "<figure><img alt=\"Figure " + std::to_string(figures_) +
                  "\" src=\"data:" + mime + ";base64," + base64_encode(bytes) + "\">";
  h += "<figcaption><b>Figure " + std::to_string(figures_) + ".</b> " + html_escape(caption) +
       "</figcaption></figure>";
  blocks_.push_back(std::move(h));
}

void HtmlReport::add_figure_png(const std::vector<unsigned char>& png, const std::string& caption) {
  if (!is_png(png)) {
    throw input_error("Cannot embed a figure into the report '" + title_ +
                      "': the bytes are not a PNG (no PNG signature).");
  }
  add_embedded("image/png", png, caption);
}

void HtmlReport::add_preformatted(const std::string& text) {
  blocks_.push_back("<pre>" + html_escape(text) + "</pre>");
}

void HtmlReport::set_footer(const std::string& text) { footer_ = text; }

std::string HtmlReport::html() const {
  std::string h;
  h += "<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n";
  h += "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n";
  h += "<title>" + html_escape(title_) + "</title>\n<style>" + kCss + "</style>\n</head>\n";
  h += "<body>\n<header><h1>" + html_escape(title_) + "</h1></header>\n<main>\n";
  for (const auto& b : blocks_) {
    h += b;
    h += '\n';
  }
  h += "</main>\n<footer>" + html_escape(footer_) + "</footer>\n</body>\n</html>\n";
  return h;
}

void HtmlReport::write(const std::string& path) const {
  const std::string doc = html();
  plot::write_file_atomically(path, std::vector<unsigned char>(doc.begin(), doc.end()),
                              "HTML report");
}

}  // namespace sw
