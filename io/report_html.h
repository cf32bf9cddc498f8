#pragma once
// A single self-contained HTML report: headings, paragraphs, tables of results with units and
// uncertainties, figures embedded as base64 PNG data URIs, preformatted text (e.g. a full
// engine report) and a footer for version and provenance. No external resources, no
// JavaScript; inline CSS that prints cleanly on A4/letter. All text is HTML-escaped.
//
// Typical use:
//   sw::HtmlReport r("scan_0042: XUV retrieval");
//   r.add_key_value_table("XUV pulse", {sw::KeyValueRow::number("FWHM", 151.2, "as", 3.1)});
//   r.add_figure("out/trace.png", "Measured and retrieved traces.");
//   r.write("out/report.html");

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "retrieval/core/format.h"
#include "retrieval/core/result.h"

namespace sw {

/// One row of a result table: name, value, unit and optional 1-sigma uncertainty, all as
/// display text (use number() to format doubles consistently).
struct KeyValueRow {
  std::string name;
  std::string value;
  std::string unit;
  std::optional<std::string> sigma;  ///< shown as "± sigma" after the value

  /// Formats value with `significant` significant digits; with a sigma, value and sigma by
  /// sw::round_value_sigma (retrieval/core/format.h: sigma to two significant digits, the value to
  /// the same decimal place).
  static KeyValueRow number(const std::string& name, double value, const std::string& unit,
                            std::optional<double> sigma = std::nullopt,
                            int significant = kDisplayDigits);
};

class HtmlReport {
 public:
  explicit HtmlReport(std::string title);

  /// Section heading; level 2 (section) or 3 (subsection). The title itself is level 1.
  void add_heading(const std::string& text, int level = 2);
  /// A paragraph of plain text (escaped; line breaks kept).
  void add_paragraph(const std::string& text);
  /// A highlighted warning box (physicist-facing warnings of an analysis).
  void add_warning(const std::string& text);
  /// The quality section (DESIGN.md "quality"): when it is not trusted, a red banner naming
  /// every failed check that guards a headline number with its value and limit; then a table
  /// of all checks (name, value, rule and limit, pass, guards a headline). Call it first, so
  /// the banner sits under the title.
  void add_quality(const QualitySection& quality);
  /// A captioned table of name | value ± sigma | unit.
  void add_key_value_table(const std::string& title, const std::vector<KeyValueRow>& rows);
  /// A general table; every row should have header.size() cells (short rows are padded).
  void add_table(const std::vector<std::string>& header,
                 const std::vector<std::vector<std::string>>& rows, const std::string& title = "");
  /// Same as add_table, with links: a cell whose `links[row][column]` is non-empty becomes an
  /// <a href> to that (escaped) address, e.g. a relative path "scan_0042/report.html". `links`
  /// may be shorter than `rows` and its rows shorter than the table's.
  void add_table_with_links(const std::vector<std::string>& header,
                            const std::vector<std::vector<std::string>>& rows,
                            const std::vector<std::vector<std::string>>& links,
                            const std::string& title = "");
  /// Embeds the figure file as a data:image/png;base64 URI (a PNG) or a
  /// data:image/svg+xml;base64 URI (an SVG document, as io/figures.h writes for ".svg" paths)
  /// with a caption. Throws sw::Error (kInput) naming the path if the file cannot be read or
  /// is neither.
  void add_figure(const std::string& png_path, const std::string& caption);
  /// Same, from PNG bytes in memory (e.g. sw::render_lines_png).
  void add_figure_png(const std::vector<unsigned char>& png, const std::string& caption);
  /// Monospaced preformatted text (escaped), e.g. a convergence log or a full report.
  void add_preformatted(const std::string& text);
  /// Footer line (version, provenance, date). Default: "streakwright <version>".
  void set_footer(const std::string& text);

  const std::string& title() const { return title_; }
  /// The complete document.
  std::string html() const;
  /// Writes html() atomically (temporary file in the same folder, then rename). Throws
  /// sw::Error naming the path on failure.
  void write(const std::string& path) const;

 private:
  void add_embedded(const std::string& mime, const std::vector<unsigned char>& bytes,
                    const std::string& caption);

  std::string title_;
  std::string footer_;
  std::vector<std::string> blocks_;  ///< body fragments, already escaped HTML
  int figures_ = 0;                  ///< figures so far (for "Figure n." captions)
};

/// Escapes &, <, >, " and ' for HTML text and attribute values.
std::string html_escape(const std::string& text);

/// Standard base64 (RFC 4648, section 4) with '=' padding, no line breaks.
std::string base64_encode(const unsigned char* data, std::size_t size);
std::string base64_encode(const std::vector<unsigned char>& data);
/// Inverse of base64_encode; throws sw::Error (kInput) on characters outside the alphabet.
std::vector<unsigned char> base64_decode(const std::string& text);

}  // namespace sw
