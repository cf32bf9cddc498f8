#pragma once
// Plain-text matrices and tables of numbers (RFC 4180 "Common Format and MIME Type for CSV
// Files", extended the way lab software writes them).
//
// Reading (parse_csv_matrix / read_csv_matrix):
//  - cells are separated by ',' or ';' or runs of spaces/tabs, decided per line: a line that
//    contains ';' is split at ';', else one that contains ',' is split at ',', else at white
//    space. With ';' as separator a cell such as "1,5" (one comma, no point) is read with a
//    decimal comma (spreadsheet exports of European locales).
//  - surrounding white space and RFC 4180 double quotes around a cell are removed;
//  - empty lines and lines whose first non-blank character is '#' are skipped;
//  - the first remaining line is a header and is skipped when none of its cells is a number;
//  - a single empty cell at the end of a line (trailing separator) is ignored;
//  - numbers are parsed locale-independently (std::from_chars); "nan"/"inf" are parsed as such
//    (the trace reader then reports their position);
//  - every row must have the same number of cells.
// Errors: sw::Error(kInput) naming `where` (the file), the 1-based line and column and, when
// `quote_cells`, a short escaped excerpt of the cell (io/input_guard.h escape_excerpt: control
// bytes as \xNN, at most 24 characters); never a whole line. More than limits::kMaxSamples
// numbers (io/input_guard.h) is an error before they are stored.

#include <string>
#include <string_view>
#include <vector>

#include <Eigen/Core>

namespace sw {

/// Parses CSV text into a matrix (rows = lines). `where` names the file in messages.
Eigen::MatrixXd parse_csv_matrix(std::string_view text, const std::string& where,
                                 bool quote_cells = true);

/// Reads and parses a CSV file (see above; only a regular file, io/input_guard.h). Throws
/// sw::Error(kInput) if missing or malformed.
Eigen::MatrixXd read_csv_matrix(const std::string& path);

/// Formats a matrix as comma-separated text, one line per row, with 17 significant digits
/// (exact double round trip). An optional header line of column names comes first.
std::string format_csv_matrix(const Eigen::MatrixXd& m,
                              const std::vector<std::string>& header = {});

}  // namespace sw
