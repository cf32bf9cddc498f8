#include "io/csv.h"

#include "io/input_guard.h"

#include <charconv>
#include <cmath>
#include <cstdio>
#include <sstream>

#include "io/atomic_file.h"
#include "retrieval/core/error.h"
#include "retrieval/core/format.h"

namespace sw {
namespace {

std::string_view trim(std::string_view s) {
  const char* ws = " \t\r\n\v\f";
  const auto b = s.find_first_not_of(ws);
  if (b == std::string_view::npos) return {};
  const auto e = s.find_last_not_of(ws);
  return s.substr(b, e - b + 1);
}

std::string_view unquote(std::string_view s) {
  s = trim(s);
  if (s.size() >= 2 && s.front() == '"' && s.back() == '"') s = trim(s.substr(1, s.size() - 2));
  return s;
}

std::vector<std::string_view> split_cells(std::string_view line, char* sep_out) {
  std::vector<std::string_view> cells;
  char sep = 0;
  if (line.find(';') != std::string_view::npos)
    sep = ';';
  else if (line.find(',') != std::string_view::npos)
    sep = ',';
  *sep_out = sep;
  if (sep) {
    std::size_t start = 0;
    while (true) {
      const auto p = line.find(sep, start);
      cells.push_back(line.substr(start, p == std::string_view::npos ? line.npos : p - start));
      if (p == std::string_view::npos) break;
      start = p + 1;
    }
    if (cells.size() > 1 && trim(cells.back()).empty()) cells.pop_back();  // trailing separator
  } else {
    std::size_t i = 0;
    while (i < line.size()) {
      while (i < line.size() && (line[i] == ' ' || line[i] == '\t' || line[i] == '\r')) ++i;
      if (i >= line.size()) break;
      std::size_t j = i;
      while (j < line.size() && line[j] != ' ' && line[j] != '\t' && line[j] != '\r') ++j;
      cells.push_back(line.substr(i, j - i));
      i = j;
    }
  }
  return cells;
}

/// Parses a whole cell as a double; false if it is not exactly one number.
bool parse_number(std::string_view cell, char sep, double* out) {
  std::string buffer;
  if (sep == ';' && cell.find(',') != std::string_view::npos && cell.find(',') == cell.rfind(',') &&
      cell.find('.') == std::string_view::npos) {
    buffer.assign(cell);
    buffer[buffer.find(',')] = '.';
    cell = buffer;
  }
  if (!cell.empty() && cell.front() == '+') cell.remove_prefix(1);  // from_chars rejects '+'
  if (cell.empty()) return false;
  const char* end = cell.data() + cell.size();
  const auto r = std::from_chars(cell.data(), end, *out);
  return r.ec == std::errc() && r.ptr == end;
}

}  // namespace

Eigen::MatrixXd parse_csv_matrix(std::string_view text, const std::string& where,
                                 bool quote_cells) {
  std::vector<std::vector<double>> rows;
  std::size_t samples = 0;
  std::size_t line_no = 0, pos = 0;
  bool first_content_line = true;
  if (text.size() >= 3 && text.substr(0, 3) == "\xEF\xBB\xBF") pos = 3;  // UTF-8 byte order mark
  while (pos <= text.size()) {
    const auto nl = text.find('\n', pos);
    std::string_view line =
        text.substr(pos, nl == std::string_view::npos ? std::string_view::npos : nl - pos);
    pos = nl == std::string_view::npos ? text.size() + 1 : nl + 1;
    ++line_no;
    const std::string_view t = trim(line);
    if (t.empty() || t.front() == '#') continue;
    char sep = 0;
    const auto cells = split_cells(line, &sep);
    std::vector<double> values(cells.size());
    std::size_t bad = cells.size();
    std::size_t numeric = 0;
    for (std::size_t c = 0; c < cells.size(); ++c) {
      if (parse_number(unquote(cells[c]), sep, &values[c]))
        ++numeric;
      else if (bad == cells.size())
        bad = c;
    }
    if (first_content_line) {
      first_content_line = false;
      if (numeric == 0) continue;  // header line of names
    }
    if (bad != cells.size()) {
      const std::string_view cell = unquote(cells[bad]);
      std::ostringstream m;
      m << where << ": CSV cell at line " << line_no << ", column " << bad + 1 << " is ";
      if (cell.empty())
        m << "empty";
      else if (quote_cells)
        m << "'" << escape_excerpt(cell) << "', not a number";
      else
        m << "not a number";
      m << "; expected a matrix of numbers separated by ',', ';' or spaces";
      throw input_error(m.str());
    }
    if (!rows.empty() && values.size() != rows.front().size()) {
      std::ostringstream m;
      m << where << ": CSV line " << line_no << " has " << values.size() << " cells but the first "
        << "data line has " << rows.front().size()
        << "; expected every row to have the same number "
        << "of columns";
      throw input_error(m.str());
    }
    samples += values.size();
    if (samples > limits::kMaxSamples)
      throw input_error(where + ": the CSV file has more than " +
                        std::to_string(limits::kMaxSamples) +
                        " numbers (docs/file_formats.md, Limits); expected a smaller matrix");
    rows.push_back(std::move(values));
  }
  if (rows.empty())
    throw input_error(where + ": the CSV file contains no numbers; expected a matrix of numbers");
  Eigen::MatrixXd m(rows.size(), rows.front().size());
  for (std::size_t i = 0; i < rows.size(); ++i)
    for (std::size_t j = 0; j < rows[i].size(); ++j) m(i, j) = rows[i][j];
  return m;
}

Eigen::MatrixXd read_csv_matrix(const std::string& path) {
  return parse_csv_matrix(read_regular_file(path, limits::kMaxDataFileBytes, "data file"),
                          printable_path(path));
}

std::string format_csv_matrix(const Eigen::MatrixXd& m, const std::vector<std::string>& header) {
  std::string out;
  out.reserve(static_cast<std::size_t>(m.size()) * 20 + 64);
  for (std::size_t j = 0; j < header.size(); ++j) {
    if (j) out += ',';
    out += header[j];
  }
  if (!header.empty()) out += '\n';
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    for (Eigen::Index j = 0; j < m.cols(); ++j) {
      if (j) out += ',';
      out += format_exact(m(i, j));
    }
    out += '\n';
  }
  return out;
}

}  // namespace sw
