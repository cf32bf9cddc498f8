// Tests of the SVG back end of the figures (io/plot_canvas.h, io/figures.h) and of
// --figure-format on the command line: well-formed XML, text as <text> with the axis labels,
// curves as paths at the documented pixel positions, trace images embedded as PNG that decode
// to the raster figure's pixels, the PNG output unchanged by the vector back end.
#include <catch2/catch.hpp>

#include <cctype>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <sstream>
#include <string>
#include <vector>

#include <opencv2/imgcodecs.hpp>

#include "io/figures.h"
#include "io/plot.h"
#include "io/report_html.h"
#include "tests/plot_test_support.h"
#include "tests/test_support.h"

namespace fs = std::filesystem;
using sw::plot::FigureFormat;
using sw::test::pulse_and_phase_plot;
using sw::test::TempDir;

namespace {

// ---- a small, independent XML 1.0 well-formedness checker (W3C XML 1.0, 5th ed., 2008) ----

struct XmlElement {
  std::string name;
  std::map<std::string, std::string> attrs;  ///< values with entities decoded
  std::string text;                          ///< direct character data, entities decoded
};

bool name_start(char c) {
  return std::isalpha(static_cast<unsigned char>(c)) || c == '_' || c == ':';
}
bool name_char(char c) {
  return name_start(c) || std::isdigit(static_cast<unsigned char>(c)) || c == '-' || c == '.';
}

// Decodes the five predefined entities and numeric character references (ASCII only);
// returns false on any other '&'.
bool decode_entities(const std::string& raw, std::string* out) {
  out->clear();
  for (std::size_t i = 0; i < raw.size(); ++i) {
    if (raw[i] != '&') {
      *out += raw[i];
      continue;
    }
    const std::size_t semi = raw.find(';', i);
    if (semi == std::string::npos) return false;
    const std::string ent = raw.substr(i + 1, semi - i - 1);
    if (ent == "amp")
      *out += '&';
    else if (ent == "lt")
      *out += '<';
    else if (ent == "gt")
      *out += '>';
    else if (ent == "quot")
      *out += '"';
    else if (ent == "apos")
      *out += '\'';
    else if (ent.size() > 1 && ent[0] == '#') {
      const long v = ent[1] == 'x' ? std::strtol(ent.c_str() + 2, nullptr, 16)
                                   : std::strtol(ent.c_str() + 1, nullptr, 10);
      if (v <= 0 || v > 127) return false;
      *out += static_cast<char>(v);
    } else {
      return false;
    }
    i = semi;
  }
  return true;
}

// "" if `doc` is a well-formed document (optional XML declaration, comments, one root element
// with properly nested children, quoted unique attributes, valid entities); else the problem.
std::string parse_xml(const std::string& doc, std::vector<XmlElement>* elements) {
  std::size_t i = 0;
  std::vector<std::size_t> open;  // indices into *elements
  bool root_seen = false, root_closed = false;
  auto err = [&](const std::string& what) { return what + " at byte " + std::to_string(i); };
  if (doc.compare(0, 5, "<?xml") == 0) {
    const std::size_t e = doc.find("?>");
    if (e == std::string::npos) return err("unterminated XML declaration");
    i = e + 2;
  }
  while (i < doc.size()) {
    if (doc[i] != '<') {
      const std::size_t next = doc.find('<', i);
      const std::string raw =
          doc.substr(i, next == std::string::npos ? std::string::npos : next - i);
      std::string text;
      if (!decode_entities(raw, &text)) return err("bad entity in character data");
      if (open.empty()) {
        for (char c : raw)
          if (!std::isspace(static_cast<unsigned char>(c))) return err("text outside the root");
      } else {
        (*elements)[open.back()].text += text;
      }
      if (raw.find('>') != std::string::npos && raw.find("]]>") != std::string::npos)
        return err("']]>' in character data");
      i = next == std::string::npos ? doc.size() : next;
      continue;
    }
    if (doc.compare(i, 4, "<!--") == 0) {
      const std::size_t e = doc.find("-->", i + 4);
      if (e == std::string::npos) return err("unterminated comment");
      i = e + 3;
      continue;
    }
    if (doc.compare(i, 2, "</") == 0) {
      std::size_t j = i + 2;
      while (j < doc.size() && name_char(doc[j])) ++j;
      const std::string name = doc.substr(i + 2, j - i - 2);
      while (j < doc.size() && std::isspace(static_cast<unsigned char>(doc[j]))) ++j;
      if (j >= doc.size() || doc[j] != '>') return err("malformed end tag");
      if (open.empty() || (*elements)[open.back()].name != name)
        return err("end tag </" + name + "> does not match the open element");
      open.pop_back();
      if (open.empty()) root_closed = true;
      i = j + 1;
      continue;
    }
    // Start tag.
    if (root_closed) return err("a second root element");
    std::size_t j = i + 1;
    if (j >= doc.size() || !name_start(doc[j])) return err("bad element name");
    while (j < doc.size() && name_char(doc[j])) ++j;
    XmlElement el;
    el.name = doc.substr(i + 1, j - i - 1);
    bool self_closing = false;
    while (true) {
      const std::size_t before = j;
      while (j < doc.size() && std::isspace(static_cast<unsigned char>(doc[j]))) ++j;
      if (j >= doc.size()) return err("unterminated start tag");
      if (doc[j] == '>') {
        ++j;
        break;
      }
      if (doc.compare(j, 2, "/>") == 0) {
        self_closing = true;
        j += 2;
        break;
      }
      if (j == before) return err("attributes must be separated by white space");
      if (!name_start(doc[j])) return err("bad attribute name");
      const std::size_t a0 = j;
      while (j < doc.size() && name_char(doc[j])) ++j;
      const std::string an = doc.substr(a0, j - a0);
      if (j >= doc.size() || doc[j] != '=') return err("attribute '" + an + "' without '='");
      ++j;
      if (j >= doc.size() || (doc[j] != '"' && doc[j] != '\'')) return err("unquoted attribute");
      const char q = doc[j];
      const std::size_t e = doc.find(q, j + 1);
      if (e == std::string::npos) return err("unterminated attribute value");
      const std::string raw = doc.substr(j + 1, e - j - 1);
      if (raw.find('<') != std::string::npos) return err("'<' in attribute '" + an + "'");
      std::string value;
      if (!decode_entities(raw, &value)) return err("bad entity in attribute '" + an + "'");
      if (el.attrs.count(an)) return err("duplicate attribute '" + an + "'");
      el.attrs[an] = value;
      j = e + 1;
    }
    if (open.empty() && root_seen) return err("a second root element");
    root_seen = true;
    elements->push_back(el);
    if (!self_closing)
      open.push_back(elements->size() - 1);
    else if (open.empty())
      root_closed = true;
    i = j;
  }
  if (!root_seen) return "no root element";
  if (!open.empty()) return "element <" + (*elements)[open.back()].name + "> is not closed";
  return "";
}

std::vector<XmlElement> parsed_svg(const std::string& svg) {
  std::vector<XmlElement> els;
  const std::string problem = parse_xml(svg, &els);
  INFO(problem);
  REQUIRE(problem.empty());
  REQUIRE(!els.empty());
  REQUIRE(els.front().name == "svg");
  return els;
}

std::vector<std::string> texts(const std::vector<XmlElement>& els) {
  std::vector<std::string> t;
  for (const auto& e : els)
    if (e.name == "text") t.push_back(e.text);
  return t;
}

bool has_text(const std::vector<XmlElement>& els, const std::string& s) {
  for (const auto& t : texts(els))
    if (t == s) return true;
  return false;
}

// The embedded PNG images of an SVG, decoded (BGR).
std::vector<std::pair<const XmlElement*, cv::Mat>> images(const std::vector<XmlElement>& els) {
  std::vector<std::pair<const XmlElement*, cv::Mat>> out;
  const std::string prefix = "data:image/png;base64,";
  for (const auto& e : els) {
    if (e.name != "image") continue;
    const auto it = e.attrs.find("xlink:href");
    REQUIRE(it != e.attrs.end());
    REQUIRE(it->second.compare(0, prefix.size(), prefix) == 0);
    const std::vector<unsigned char> png = sw::base64_decode(it->second.substr(prefix.size()));
    out.emplace_back(&e, cv::imdecode(png, cv::IMREAD_COLOR));
  }
  return out;
}

// xmllint (Debian libxml2-utils) as a second, external check when it is installed.
void check_with_xmllint(const std::string& path) {
  if (std::system("command -v xmllint >/dev/null 2>&1") != 0) {
    WARN("xmllint not installed (Debian libxml2-utils): external XML check skipped");
    return;
  }
  const sw::test::CliRun r = sw::test::run_command("xmllint --noout '" + path + "'");
  INFO(r.out);
  CHECK(r.code == 0);
}

std::string read_file(const std::string& p) {
  std::ifstream in(p, std::ios::binary);
  std::stringstream s;
  s << in.rdbuf();
  return s.str();
}

// A smooth synthetic trace: a Gaussian line whose centre oscillates with delay.
struct TestTrace {
  Eigen::MatrixXd data;
  std::vector<double> delay, energy;
};
TestTrace make_trace() {
  TestTrace t;
  for (int i = 0; i < 41; ++i) t.delay.push_back(-4.0 + 0.2 * i);
  for (int j = 0; j < 60; ++j) t.energy.push_back(80.0 + 0.5 * j);
  t.data.resize(41, 60);
  for (int i = 0; i < 41; ++i)
    for (int j = 0; j < 60; ++j) {
      const double c = 95.0 + 4.0 * std::sin(2.0 * M_PI * t.delay[i] / 2.67);
      t.data(i, j) = 500.0 * std::exp(-0.5 * std::pow((t.energy[j] - c) / 2.5, 2));
    }
  return t;
}

}  // namespace

TEST_CASE("figure formats: names, parsing and file extensions", "[svg]") {
  // The option values are the format names; extensions as in the figure files (common
  // practice: .png for PNG, .svg for SVG, W3C SVG 1.1).
  FigureFormat f = FigureFormat::kPng;
  CHECK(sw::plot::parse_figure_format("svg", &f));
  CHECK(f == FigureFormat::kSvg);
  CHECK(sw::plot::parse_figure_format("png", &f));
  CHECK(f == FigureFormat::kPng);
  CHECK_FALSE(sw::plot::parse_figure_format("pdf", &f));
  CHECK_FALSE(sw::plot::parse_figure_format("SVG ", &f));
  CHECK(std::string(sw::plot::figure_extension(FigureFormat::kSvg)) == ".svg");
  CHECK(sw::plot::with_figure_extension("scan.png", FigureFormat::kSvg) == "scan.svg");
  CHECK(sw::plot::with_figure_extension("scan.png", FigureFormat::kPng) == "scan.png");
  CHECK(sw::plot::with_figure_extension("summary.csv", FigureFormat::kSvg) == "summary.csv");
  CHECK(sw::plot::figure_format_of_path("a/b/FIG.SVG") == FigureFormat::kSvg);
  CHECK(sw::plot::figure_format_of_path("a/b/fig.png") == FigureFormat::kPng);
}

TEST_CASE("trace image as SVG: well-formed, labels as text, image embedded at the raster's pixels",
          "[svg]") {
  const TestTrace t = make_trace();
  sw::TraceFigureOptions o;
  o.title = "synthetic trace";
  o.curves.push_back(
      {t.delay, std::vector<double>(t.delay.size(), 95.0), "centre", {255, 255, 255}, true, 2});
  o.markers.push_back({100.0, "SB14", {255, 255, 255}});
  const sw::FigureBytes b =
      sw::render_trace_image(t.data, t.delay, t.energy, o, FigureFormat::kSvg);
  const std::vector<XmlElement> els = parsed_svg(b.svg);

  // Text as text: title, both axis labels, colour-bar label, marker label (W3C SVG 1.1 <text>).
  CHECK(has_text(els, "synthetic trace"));
  CHECK(has_text(els, "delay tau (fs)"));
  CHECK(has_text(els, "photoelectron energy (eV)"));
  CHECK(has_text(els, "counts"));
  CHECK(has_text(els, "SB14"));
  CHECK(has_text(els, "centre"));  // legend entry of the labelled curve
  // The y label reads bottom to top: rotated by -90 degrees.
  for (const auto& e : els) {
    if (e.name == "text" && e.text == "photoelectron energy (eV)") {
      REQUIRE(e.attrs.count("transform"));
      CHECK(e.attrs.at("transform").rfind("rotate(-90 ", 0) == 0);
    }
  }
  // Curves as vector paths (the overlay and the sideband marker: one dashed each).
  int dashed_paths = 0;
  for (const auto& e : els)
    if (e.name == "path" && e.attrs.count("stroke-dasharray")) ++dashed_paths;
  CHECK(dashed_paths >= 2);

  // The raster figure (PNG) with its geometry, to compare the embedded image against.
  TempDir dir("svg_trace");
  const sw::PlotGeometry g =
      sw::plot_trace_image(t.data, t.delay, t.energy, o, dir.file("trace.png"));
  const cv::Mat png = cv::imread(dir.file("trace.png"), cv::IMREAD_COLOR);
  REQUIRE(!png.empty());
  const auto imgs = images(els);
  REQUIRE(imgs.size() == 2);  // the trace and the colour bar
  const auto& [el, img] = imgs.front();
  REQUIRE(!img.empty());
  // The embedded trace covers exactly the data area of the PNG (PlotGeometry: inclusive edges).
  CHECK(std::stoi(el->attrs.at("x")) == g.left);
  CHECK(std::stoi(el->attrs.at("y")) == g.top);
  CHECK(img.cols == g.right - g.left + 1);
  CHECK(img.rows == g.bottom - g.top + 1);
  // Its pixels are the trace's colours: compare with the PNG away from the overlay lines
  // (a row near the top where no curve or marker passes).
  int equal = 0, total = 0;
  const int r = 3;
  for (int c = 0; c < img.cols; ++c) {
    ++total;
    equal += img.at<cv::Vec3b>(r, c) == png.at<cv::Vec3b>(g.top + r, g.left + c) ? 1 : 0;
  }
  CHECK(equal == total);
  // Data value -> colour: the brightest trace pixel sits at the line's centre. At delay 0 the
  // centre is 95 eV (sin 0 = 0): the embedded column of delay 0 is brightest near 95 eV.
  const int col0 = static_cast<int>(std::floor(g.x_to_col(0.0))) - g.left;
  int best_row = 0;
  double best = -1.0;
  for (int rr = 0; rr < img.rows; ++rr) {
    const cv::Vec3b p = img.at<cv::Vec3b>(rr, col0);
    const double l =
        0.0722 * p[0] + 0.7152 * p[1] + 0.2126 * p[2];  // Rec. 709 luma (common practice)
    if (l > best) {
      best = l;
      best_row = rr;
    }
  }
  CHECK(std::abs((best_row + g.top + 0.5) - g.y_to_row(95.0)) < 12.0);  // ~1 energy bin
  // The white overlay curve at 95 eV and the marker are vector elements drawn over the image,
  // not baked into it: no white pixel in the embedded trace (viridis never reaches white;
  // its top colour is yellow, Smith and van der Walt 2015 matplotlib colormap, from memory).
  int white = 0;
  for (int rr = 0; rr < img.rows; ++rr)
    for (int cc = 0; cc < img.cols; ++cc)
      white += img.at<cv::Vec3b>(rr, cc) == cv::Vec3b(255, 255, 255) ? 1 : 0;
  CHECK(white == 0);

  // Written to a ".svg" path the figure is the same document; xmllint agrees it is XML.
  sw::plot_trace_image(t.data, t.delay, t.energy, o, dir.file("trace.svg"));
  CHECK(read_file(dir.file("trace.svg")) == b.svg);
  check_with_xmllint(dir.file("trace.svg"));
}

TEST_CASE("line plot as SVG: paths at the documented pixel positions, markers as circles",
          "[svg]") {
  const sw::LinePlot lp = pulse_and_phase_plot();
  const sw::FigureBytes b = sw::render_lines(lp, FigureFormat::kSvg);
  const std::vector<XmlElement> els = parsed_svg(b.svg);
  CHECK(has_text(els, "pulse & phase <test>"));  // escaped and decoded back
  CHECK(has_text(els, "time (as)"));
  CHECK(has_text(els, "intensity (arb. u.)"));
  CHECK(has_text(els, "phase (rad)"));
  CHECK(images(els).empty());  // nothing painted pixel by pixel in a line plot
  int circles = 0;
  for (const auto& e : els) circles += e.name == "circle" ? 1 : 0;
  CHECK(circles == 3 + 1);  // three data points and the legend's marker sample

  // The first solid path is the first series; its first vertex is at the pixel position that
  // PlotGeometry documents for (x[0], y[0]) (x_min -> left, x_max -> right + 1).
  TempDir dir("svg_lines");
  const sw::PlotGeometry g = sw::plot_lines(lp, dir.file("lines.svg"));
  const XmlElement* first = nullptr;
  for (const auto& e : els) {
    if (e.name == "path" && !e.attrs.count("stroke-dasharray") && e.attrs.count("clip-path") &&
        e.attrs.at("stroke-width") == "2") {
      first = &e;
      break;
    }
  }
  REQUIRE(first != nullptr);
  double px = 0, py = 0;
  REQUIRE(std::sscanf(first->attrs.at("d").c_str(), "M%lf %lf", &px, &py) == 2);
  CHECK(px == Approx(g.x_to_col(lp.series[0].x[0])).margin(0.01));
  CHECK(py == Approx(g.y_to_row(lp.series[0].y[0])).margin(0.01));
  check_with_xmllint(dir.file("lines.svg"));

  // A comparison figure (three panels) is well-formed too and embeds 3 traces + 3 bars.
  const TestTrace t = make_trace();
  const sw::FigureBytes c = sw::render_trace_comparison(
      t.data, t.data * 0.9, t.delay, t.energy, sw::ComparisonFigureOptions{}, FigureFormat::kSvg);
  const std::vector<XmlElement> cels = parsed_svg(c.svg);
  CHECK(images(cels).size() == 6);
  CHECK(has_text(cels, "measured - retrieved"));
}

TEST_CASE("the vector back end leaves the PNG output unchanged", "[svg]") {
  // The PNG of a figure drawn with the SVG recorder on is byte for byte the PNG drawn without
  // it (the raster path is the same code).
  const TestTrace t = make_trace();
  sw::TraceFigureOptions o;
  o.markers.push_back({100.0, "SB14", {255, 255, 255}});
  CHECK(sw::render_trace_image(t.data, t.delay, t.energy, o, FigureFormat::kSvg).png ==
        sw::render_trace_image_png(t.data, t.delay, t.energy, o));
  const sw::LinePlot lp = pulse_and_phase_plot();
  CHECK(sw::render_lines(lp, FigureFormat::kSvg).png == sw::render_lines_png(lp));
  CHECK(sw::render_lines(lp, FigureFormat::kPng).svg.empty());
  const sw::ComparisonFigureOptions co;
  CHECK(sw::render_trace_comparison(t.data, t.data * 0.5, t.delay, t.energy, co, FigureFormat::kSvg)
            .png == sw::render_trace_comparison_png(t.data, t.data * 0.5, t.delay, t.energy, co));
}

TEST_CASE("report.html embeds an SVG figure as image/svg+xml", "[svg]") {
  TempDir dir("svg_report");
  sw::plot_lines(pulse_and_phase_plot(), dir.file("f.svg"));
  sw::HtmlReport r("svg report");
  r.add_figure(dir.file("f.svg"), "a vector figure");
  const std::string h = r.html();
  const std::string key = "data:image/svg+xml;base64,";
  const auto at = h.find(key);
  REQUIRE(at != std::string::npos);
  const auto end = h.find('"', at);
  const std::vector<unsigned char> back =
      sw::base64_decode(h.substr(at + key.size(), end - at - key.size()));
  CHECK(std::string(back.begin(), back.end()) == read_file(dir.file("f.svg")));
  sw::test::write_text(dir.file("bad.svg"), "not a figure");
  CHECK_THROWS_WITH(r.add_figure(dir.file("bad.svg"), "x"), Catch::Contains("neither a PNG"));
}

TEST_CASE("--figure-format svg on simulate, classify and batch", "[svg][cli]") {
  TempDir dir("svg_cli");
  const std::string d = dir.path.string();
  auto cli = [](const std::string& args) { return sw::test::run_cli(args); };
  auto r = cli("simulate --preset neon-150as --out " + d +
               "/in --name s1 --seed 3 --quiet --figure-format svg");
  INFO(r.out);
  REQUIRE(r.code == 0);
  CHECK(fs::exists(d + "/in/s1.figure.svg"));
  CHECK_FALSE(fs::exists(d + "/in/s1.figure.png"));

  r = cli("classify " + d + "/in/s1.json --out " + d + "/cls --quiet --figure-format svg");
  INFO(r.out);
  REQUIRE(r.code == 0);
  for (const char* f : {"scan", "spectrum"}) {
    CHECK(fs::exists(d + "/cls/" + f + ".svg"));
    CHECK_FALSE(fs::exists(d + "/cls/" + f + ".png"));
  }
  const std::vector<XmlElement> els = parsed_svg(read_file(d + "/cls/scan.svg"));
  CHECK(has_text(els, "delay tau (fs)"));
  const std::string report = read_file(d + "/cls/report.html");
  CHECK(report.find("data:image/svg+xml;base64,") != std::string::npos);
  CHECK(report.find("data:image/png;base64,") == std::string::npos);

  // Bad value: usage error (exit 2) naming the option.
  r = cli("classify " + d + "/in/s1.json --out " + d + "/cls2 --figure-format pdf");
  CHECK(r.code == 2);
  CHECK(r.out.find("--figure-format") != std::string::npos);

  // batch: config key and option string, trend figures as SVG.
  sw::test::write_text(d + "/cfg.json", R"({"figure_format": "svg", "analysis": "classify"})");
  r = cli("batch " + d + "/in --out " + d + "/b --quiet --config " + d + "/cfg.json");
  INFO(r.out);
  REQUIRE(r.code == 0);
  CHECK(fs::exists(d + "/b/trend_fwhm.svg"));
  CHECK(fs::exists(d + "/b/s1/scan.svg"));
  CHECK(read_file(d + "/b/summary.json").find("figure_format=svg") != std::string::npos);
  sw::test::write_text(d + "/bad.json", R"({"figure_format": "eps"})");
  r = cli("batch " + d + "/in --out " + d + "/b2 --quiet --config " + d + "/bad.json");
  CHECK(r.code == 2);
  CHECK(r.out.find("figure_format") != std::string::npos);
}
