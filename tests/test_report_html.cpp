// Tests of io/report_html.h: escaping, base64, embedded figures, atomic writing.
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <random>
#include <set>
#include <string>

#include <unistd.h>

#include <opencv2/imgcodecs.hpp>

#include "io/figures.h"
#include "io/report_html.h"
#include "retrieval/core/error.h"
#include "tests/plot_test_support.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;

namespace {

using sw::test::TempDir;
using sw::test::write_text;

std::string read_all(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
}

std::size_t count(const std::string& hay, const std::string& needle) {
  std::size_t n = 0;
  for (auto p = hay.find(needle); p != std::string::npos; p = hay.find(needle, p + 1)) ++n;
  return n;
}

// The shared line plot at a small size.
sw::LinePlot small_plot() {
  sw::LinePlot lp = sw::test::pulse_and_phase_plot();
  lp.width_px = 400;
  lp.height_px = 300;
  return lp;
}

}  // namespace

TEST_CASE("base64 matches the RFC 4648 test vectors and round-trips", "[report]") {
  // RFC 4648 (S. Josefsson, 2006), section 10 test vectors.
  auto enc = [](const std::string& s) {
    return sw::base64_encode(reinterpret_cast<const unsigned char*>(s.data()), s.size());
  };
  CHECK(enc("") == "");
  CHECK(enc("f") == "Zg==");
  CHECK(enc("fo") == "Zm8=");
  CHECK(enc("foo") == "Zm9v");
  CHECK(enc("foob") == "Zm9vYg==");
  CHECK(enc("fooba") == "Zm9vYmE=");
  CHECK(enc("foobar") == "Zm9vYmFy");
  std::mt19937 rng(7);
  for (std::size_t n : {0u, 1u, 2u, 3u, 100u, 1001u}) {
    std::vector<unsigned char> bytes(n);
    for (auto& b : bytes) b = static_cast<unsigned char>(rng() & 0xFF);
    CHECK(sw::base64_decode(sw::base64_encode(bytes)) == bytes);
  }
  CHECK_THROWS_AS(sw::base64_decode("Zm9v!"), sw::Error);
}

TEST_CASE("HTML escaping of all text", "[report]") {
  CHECK(sw::html_escape("<b>Ne & \"Ar\"</b> 'x'") ==
        "&lt;b&gt;Ne &amp; &quot;Ar&quot;&lt;/b&gt; &#39;x&#39;");
  sw::HtmlReport r("scan <42> & \"friends\"");
  r.add_heading("fit <G>");
  r.add_paragraph("a < b");
  r.add_warning("bandwidth/energy > 0.3");
  r.add_table({"name", "value"}, {{"<script>", "1"}, {"short row"}}, "settings & steps");
  r.add_key_value_table("XUV", {sw::KeyValueRow{"FWHM <est>", "151", "as", "3"}});
  r.add_preformatted("iter  G\n1  <0.1>");
  r.set_footer("streakwright test <footer>");
  const std::string h = r.html();
  CHECK(count(h, "scan &lt;42&gt; &amp; &quot;friends&quot;") == 2);  // <title> and <h1>
  CHECK(h.find("<42>") == std::string::npos);
  CHECK(h.find("<script>") == std::string::npos);
  CHECK(h.find("&lt;script&gt;") != std::string::npos);
  CHECK(h.find("fit &lt;G&gt;") != std::string::npos);
  CHECK(h.find("1  &lt;0.1&gt;") != std::string::npos);
  CHECK(h.find("streakwright test &lt;footer&gt;") != std::string::npos);
  CHECK(h.find("151 &plusmn; 3") != std::string::npos);
  // The short row is padded to the header's two cells.
  CHECK(h.find("<td>short row</td><td></td>") != std::string::npos);
}

TEST_CASE("table cells with links point to escaped relative addresses", "[report]") {
  sw::HtmlReport r("batch");
  r.add_table_with_links({"scan", "status"}, {{"scan <1>", "ok"}, {"scan 2", "failed"}},
                         {{"scan_1/report.html?a=1&b=2"}, {}});
  const std::string h = r.html();
  CHECK(h.find("<a href=\"scan_1/report.html?a=1&amp;b=2\">scan &lt;1&gt;</a>") !=
        std::string::npos);
  CHECK(count(h, "<a href=") == 1);  // the row without a link stays plain text
  CHECK(h.find("<td>scan 2</td>") != std::string::npos);
}

TEST_CASE("figures are embedded as data URIs that decode to the PNG", "[report]") {
  TempDir dir("fig");
  const std::string png = dir.file("plot.png");
  sw::plot_lines(small_plot(), png);
  sw::HtmlReport r("report");
  r.add_figure(png, "a caption with <tags>");
  r.add_figure_png(sw::render_lines_png(small_plot()), "from memory");
  const std::string h = r.html();

  const std::string key = "src=\"data:image/png;base64,";
  CHECK(count(h, key) == 2);
  const auto start = h.find(key) + key.size();
  const auto end = h.find('"', start);
  REQUIRE(end != std::string::npos);
  const std::vector<unsigned char> bytes = sw::base64_decode(h.substr(start, end - start));
  const std::string file = read_all(png);
  CHECK(std::string(bytes.begin(), bytes.end()) == file);
  const cv::Mat img = cv::imdecode(bytes, cv::IMREAD_UNCHANGED);
  REQUIRE(!img.empty());
  CHECK(img.cols == 400);
  CHECK(img.rows == 300);
  CHECK(img.channels() == 3);
  CHECK(h.find("a caption with &lt;tags&gt;") != std::string::npos);
  CHECK(h.find("Figure 2.") != std::string::npos);

  // Self-contained: no external resources, no scripts.
  for (const char* bad : {"http:", "https:", "<link", "<script", "@import", "url("}) {
    INFO(bad);
    CHECK(h.find(bad) == std::string::npos);
  }
  CHECK(count(h, "src=\"") == count(h, key));

  // A file that is not a PNG is refused with its path in the message.
  std::ofstream(dir.file("fake.png")) << "not a png";
  CHECK_THROWS_WITH(r.add_figure(dir.file("fake.png"), ""), Catch::Contains("fake.png"));
  CHECK_THROWS_WITH(r.add_figure(dir.file("absent.png"), ""), Catch::Contains("absent.png"));
}

TEST_CASE("key-value rows quote the uncertainty with two significant digits", "[report]") {
  // Value rounded to the last digit of a two-significant-digit sigma (common practice, e.g.
  // the Particle Data Group's rounding rules use 1-2 significant digits).
  auto r = sw::KeyValueRow::number("FWHM", 151.2345, "as", 3.14159);
  CHECK(r.value == "151.2");
  CHECK(r.sigma.value() == "3.1");
  r = sw::KeyValueRow::number("GDD", 123.4, "as^2", 310.0);
  CHECK(r.value == "120");
  CHECK(r.sigma.value() == "310");
  r = sw::KeyValueRow::number("G", 0.01236, "", 0.00067);
  CHECK(r.value == "0.01236");
  CHECK(r.sigma.value() == "0.00067");
  r = sw::KeyValueRow::number("I", 5.0e12, "W/cm^2");
  CHECK(r.value == "5e+12");
  CHECK_FALSE(r.sigma.has_value());
}

TEST_CASE("report is written atomically, complete, and leaves no temporary file", "[report]") {
  TempDir dir("write");
  sw::HtmlReport r("atomic");
  r.add_paragraph("hello");
  const std::string path = dir.file("report.html");
  r.write(path);
  CHECK(read_all(path) == r.html());
  r.add_paragraph("second version");
  r.write(path);  // replaces the old file
  CHECK(read_all(path) == r.html());
  CHECK(dir.listing() == std::vector<std::string>{"report.html"});
  CHECK(r.html().rfind("</html>") != std::string::npos);
  CHECK_THROWS_AS(r.write(dir.file("no/such/folder/report.html")), sw::Error);
  CHECK(dir.listing() == std::vector<std::string>{"report.html"});
}
