#include "cli/option_checks.h"

#include <algorithm>
#include <cmath>
#include <sstream>
#include <string>

#include "retrieval/core/error.h"

namespace sw::cli {

namespace {

bool parse_double(const std::string& s, double* v) {
  try {
    std::size_t used = 0;
    *v = std::stod(s, &used);
    return used == s.size();
  } catch (...) {
    return false;
  }
}

}  // namespace

void parse_line_names(const std::string& text, const std::string& option,
                      std::vector<std::string>* names) {
  names->clear();
  std::stringstream ls(text);
  for (std::string n; std::getline(ls, n, ',');) {
    if (n.empty())
      throw usage_error(option + " " + text +
                        ": an empty name; expected NAME[,NAME...] (e.g. 2s) or none");
    names->push_back(n);
  }
  if (names->size() > 1 && std::find(names->begin(), names->end(), "none") != names->end())
    throw usage_error(option + " " + text + ": none cannot be combined with line names");
}

std::string ir_wavelength_nm_problem(double nm) {
  if (!(std::isfinite(nm) && nm >= 100.0 && nm <= 20000.0))
    return "expected an IR wavelength in [100, 20000] nm";
  return "";
}

CLI::Validator ir_wavelength_nm_check() {
  return CLI::Validator(
      [](std::string& s) -> std::string {
        double v = 0;
        if (!parse_double(s, &v)) return "'" + s + "' is not a number; expected nm";
        if (const std::string p = ir_wavelength_nm_problem(v); !p.empty())
          return "'" + s + "': " + p;
        return "";
      },
      "NM in [100, 20000]");
}

void check_numeric_options(CLI::App* cmd) {
  for (CLI::Option* opt : cmd->get_options()) {
    const std::string type = opt->get_type_name();
    if (type.rfind("FLOAT", 0) == 0) {
      opt->check(CLI::Validator(
          [](std::string& s) -> std::string {
            double v = 0;
            if (parse_double(s, &v) && !std::isfinite(v))
              return "'" + s + "' is not a finite number; expected a finite value";
            if (!parse_double(s, &v)) {
              // std::stod rejects "1e999" by range: it is not finite either.
              if (s.find_first_of("0123456789") != std::string::npos &&
                  s.find_first_not_of("0123456789+-.eE") == std::string::npos)
                return "'" + s + "' overflows a double; expected a finite value";
            }
            return "";
          },
          ""));
    } else if (type.rfind("UINT", 0) == 0) {
      opt->check(CLI::Validator(
          [](std::string& s) -> std::string {
            if (s.find('-') != std::string::npos)
              return "'" + s + "' is negative; expected a whole number >= 0";
            return "";
          },
          ""));
    }
  }
}

CLI::Option* add_figure_format_option(CLI::App* cmd, plot::FigureFormat* out) {
  return cmd
      ->add_option_function<std::string>(
          "--figure-format",
          [out](const std::string& s) {
            if (!plot::parse_figure_format(s, out))
              throw CLI::ValidationError("--figure-format", s + ": expected png or svg");
          },
          "figures: png (default) | svg (vector figures for papers; trace images embedded)")
      ->check(CLI::IsMember({"png", "svg"}));
}

}  // namespace sw::cli
