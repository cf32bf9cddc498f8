#pragma once
// Command-line numbers checked at parse time (exit 2 before any work, docs/cli.md):
// every FLOAT option must be finite (no "nan", "inf", "1e999"), every UINT option must not be
// negative (CLI11 would otherwise wrap "-1" to 2^64 - 1), and an IR wavelength must lie in the
// range the trace reader accepts. Also the option texts that the Python module parses the same
// way (line names).

#include <string>
#include <vector>

#include <CLI/CLI.hpp>

#include "io/plot.h"

namespace sw::cli {

/// Adds the finite / non-negative checks to every numeric option of `cmd` (call after all
/// add_option calls of a subcommand).
void check_numeric_options(CLI::App* cmd);

/// Validator of an IR wavelength option (nm): finite, in [100, 20000] nm (the trace reader's range,
/// io/trace_reader_internal.h).
CLI::Validator ir_wavelength_nm_check();

/// The same rule for wavelengths from files (batch config, manifest): "" or the violated rule.
std::string ir_wavelength_nm_problem(double nm);

/// `--lines NAME[,NAME...]|none` of retrieve into LineDelayOptions::names (replaced): throws
/// sw::Error(kUsage) naming `option` and the text for an empty name or "none" among names.
void parse_line_names(const std::string& text, const std::string& option,
                      std::vector<std::string>* names);

/// `--figure-format png|svg` (default png: PNG figures; svg: vector figures for papers, trace
/// images embedded), parsed into `out`. Shared by every subcommand that writes figures.
CLI::Option* add_figure_format_option(CLI::App* cmd, plot::FigureFormat* out);

}  // namespace sw::cli
