// Options described once (retrieval/core/option_spec.h): every description is walked field by
// field. Each default validates, each bound rejects the value just outside it with a message naming
// the field, each choice list rejects a word outside it, and each CLI flag and config key is
// unique (common practice, STYLE.md: "parameters described once", "a test checks that the
// defaults are valid").
#include <catch2/catch.hpp>

#include <cmath>
#include <limits>
#include <set>
#include <string>
#include <type_traits>
#include <vector>

#include "retrieval/analysis/analyses.h"
#include "retrieval/analysis/retrieve.h"
#include "retrieval/core/option_spec.h"
#include "retrieval/engines/engine.h"
#include "retrieval/engines/full_model_engine.h"
#include "retrieval/engines/projections_engine.h"
#include "retrieval/engines/ptychographic_engine.h"

using namespace sw;

namespace {

struct Field {
  OptionSpec spec;
  bool numeric = false, integral = false, text = false;
};

template <class Options>
std::vector<Field> fields_of() {
  std::vector<Field> out;
  auto collect = [&](const OptionSpec& s, const auto& value) {
    using T = std::decay_t<decltype(value)>;
    Field f{s};
    f.numeric = std::is_arithmetic_v<T> && !std::is_same_v<T, bool>;
    f.integral = std::is_integral_v<T>;
    f.text = std::is_same_v<T, std::string>;
    out.push_back(f);
  };
  const Options d{};
  Options::describe(d, collect);
  return out;
}

// A copy of the defaults with field `index` set to `x` (numbers) or `word` (text).
template <class Options>
Options with_value(std::size_t index, double x, const std::string& word) {
  Options o{};
  std::size_t i = 0;
  auto set = [&](const OptionSpec&, auto& field) {
    using T = std::decay_t<decltype(field)>;
    if (i++ != index) return;
    if constexpr (std::is_arithmetic_v<T> && !std::is_same_v<T, bool>)
      field = static_cast<T>(x);
    else if constexpr (std::is_same_v<T, std::string>)
      field = word;
  };
  Options::describe(o, set);
  return o;
}

// The value just outside a bound: the next representable double (an integer field: the next
// integer) beyond a closed bound, the bound itself for an open one.
double outside(double bound, bool open, bool integral, bool below) {
  if (open) return bound;
  if (integral) return below ? std::floor(bound) - 1 : std::ceil(bound) + 1;
  return std::nextafter(bound, below ? -std::numeric_limits<double>::infinity()
                                     : std::numeric_limits<double>::infinity());
}

template <class Options>
void walk_description(const std::string& what) {
  INFO(what);
  CHECK(Options{}.validate().empty());
  const std::vector<Field> fields = fields_of<Options>();
  REQUIRE(!fields.empty());
  std::set<std::string> names, flags, keys;
  for (std::size_t i = 0; i < fields.size(); ++i) {
    const OptionSpec& s = fields[i].spec;
    const std::string name(s.name);
    INFO("field " << name);
    CHECK(!s.help.empty());
    CHECK(names.insert(name).second);
    // Every flag of the field (CLI11 syntax: "--a,!--no-a") and its config key are unique.
    std::string f(s.flag);
    for (std::size_t start = 0; !f.empty() && start <= f.size();) {
      const std::size_t comma = f.find(',', start);
      std::string one =
          f.substr(start, comma == std::string::npos ? std::string::npos : comma - start);
      if (!one.empty() && one[0] == '!') one.erase(0, 1);
      CHECK(flags.insert(one).second);
      if (comma == std::string::npos) break;
      start = comma + 1;
    }
    if (!s.config_key.empty()) CHECK(keys.insert(std::string(s.config_key)).second);

    if (fields[i].numeric) {
      if (std::isfinite(s.min)) {
        const double x = outside(s.min, s.min_open, fields[i].integral, true);
        INFO("below min: " << x);
        const std::string m = with_value<Options>(i, x, "").validate();
        CHECK_THAT(m, Catch::Contains(name));
      }
      if (std::isfinite(s.max)) {
        const double x = outside(s.max, s.max_open, fields[i].integral, false);
        INFO("above max: " << x);
        const std::string m = with_value<Options>(i, x, "").validate();
        CHECK_THAT(m, Catch::Contains(name));
      }
      if (!fields[i].integral) {  // a number that is not finite is never valid
        const std::string m =
            with_value<Options>(i, std::numeric_limits<double>::quiet_NaN(), "").validate();
        CHECK_THAT(m, Catch::Contains(name));
      }
    }
    if (fields[i].text) {
      CHECK_THAT(with_value<Options>(i, 0, "").validate(), Catch::Contains(name));
      if (!s.choices.empty())
        CHECK_THAT(with_value<Options>(i, 0, "no-such-choice").validate(), Catch::Contains(name));
    }
  }
}

}  // namespace

TEST_CASE("every options description: defaults valid, bounds and choices enforced, names unique",
          "[options]") {
  walk_description<RetrieveOptions>("RetrieveOptions");
  walk_description<FullModelSettings>("FullModelSettings");
  walk_description<CmaSettings>("CmaSettings");
  walk_description<PtychographicSettings>("PtychographicSettings");
  walk_description<ProjectionsSettings>("ProjectionsSettings");
  walk_description<RabbittAnalysisOptions>("RabbittAnalysisOptions");
  walk_description<ClassifyAnalysisOptions>("ClassifyAnalysisOptions");
}

TEST_CASE("the rabbitt and classify settings echo keeps the result.json keys", "[options]") {
  // The settings.* keys these analyses wrote before their descriptions existed (from memory of
  // rabbitt_analysis.cpp and classify_analysis.cpp; settings.xuv_only and
  // settings.ir_wavelength_nm are added by the analyses themselves).
  auto keys_of = [](const auto& options) {
    std::vector<Param> echo;
    append_settings_echo(options, &echo);
    std::vector<std::string> keys;
    for (const Param& p : echo) keys.push_back(p.key);
    return keys;
  };
  CHECK(keys_of(RabbittAnalysisOptions{}) ==
        std::vector<std::string>{
            "settings.atomic_correction", "settings.window_half_width_fraction",
            "settings.apply_delay_calibration", "settings.cross_section", "settings.dipole",
            "settings.isolated_max_satellite_ratio", "settings.satellites_max_satellite_ratio"});
  CHECK(keys_of(ClassifyAnalysisOptions{}) ==
        std::vector<std::string>{
            "settings.isolated_max_satellite_ratio", "settings.satellites_max_satellite_ratio",
            "settings.train_min_comparable_bursts", "settings.comb_min_period_contrast",
            "settings.delay_train_min_share", "settings.delay_streaking_max_share",
            "settings.min_total_counts", "settings.retrieve"});
  // Only atomic_correction reaches the batch option strings (its resume hash).
  const auto texts = described_texts(RabbittAnalysisOptions{});
  REQUIRE(texts.size() == 1);
  CHECK(texts[0] == std::pair<std::string, std::string>{"atomic_correction", "auto"});
}

TEST_CASE("the retrieve settings echo keeps the result.json keys", "[options]") {
  // DESIGN.md result contract: these settings.* keys, in this order, as written before the
  // description existed (tests and DESIGN.md rely on them); cma_min_signal_counts and
  // energy_combine added since (the old keys keep their order).
  std::vector<Param> echo;
  append_settings_echo(RetrieveOptions{}, &echo);
  std::vector<std::string> keys;
  for (const Param& p : echo) keys.push_back(p.key);
  CHECK(keys == std::vector<std::string>{"settings.engine",
                                         "settings.iterations",
                                         "settings.bootstrap",
                                         "settings.seed",
                                         "settings.threads",
                                         "settings.uncertainty",
                                         "settings.laplace_check_replicas",
                                         "settings.warm_patience",
                                         "settings.full_model_patience",
                                         "settings.cma_phase_error_max_rad",
                                         "settings.cma_trace_error_max_ratio",
                                         "settings.cma_min_signal_counts",
                                         "settings.method_sigma_relative",
                                         "settings.window_cut_sigma_per_share",
                                         "settings.isolated_max_satellite_ratio",
                                         "settings.satellites_max_satellite_ratio",
                                         "settings.satellite_start",
                                         "settings.satellite_start_ratio",
                                         "settings.satellite_start_margin",
                                         "settings.replica_satellite_margin",
                                         "settings.dipole",
                                         "settings.energy_combine"});
  // Integers are written as integers, the dipole by name.
  CHECK(std::holds_alternative<long long>(echo[1].value));
  CHECK(std::get<std::string>(echo[echo.size() - 2].value) == "constant");
  CHECK(std::get<long long>(echo.back().value) == 0);
}

TEST_CASE("engine options from the typed settings' description", "[options]") {
  // The text form (name=value) reads into the typed settings through the same description,
  // once, where it enters (apply_engine_option_text).
  auto full_model = [](std::vector<std::pair<std::string, std::string>> text) {
    EngineSettings settings;
    apply_engine_option_text("full-model", text, &settings);
    return settings.full_model;
  };
  const FullModelSettings s =
      full_model({{"lbfgs_memory", "7"}, {"block_phase_rad", "1.5"}, {"ir", "spline"}});
  CHECK(s.lbfgs_memory == 7);
  CHECK(s.block_phase_rad == 1.5);
  CHECK(s.ir == "spline");
  CHECK(s.chebyshev_nodes == FullModelSettings{}.chebyshev_nodes);
  CHECK_THROWS_WITH(full_model({{"lbfgs_memory", "7.5"}}), Catch::Contains("lbfgs_memory = '7.5'"));
  // An integer beyond the field's type is refused, not wrapped into its bounds (2^32 + 7 would
  // become 7 in a 32-bit int).
  CHECK_THROWS_WITH(full_model({{"lbfgs_memory", "4294967303"}}),
                    Catch::Contains("lbfgs_memory = '4294967303'"));
  int wrapped = 0;
  CHECK(set_option_from_text(OptionSpec{.name = "n"}, "4294967303", &wrapped) ==
        "expected an integer");
  CHECK(wrapped == 0);
  // The open upper bound of support_threshold: 1 passes the listed (closed) range but not the
  // typed rule.
  CHECK_THROWS_WITH(full_model({{"support_threshold", "1"}}),
                    Catch::Contains("support_threshold = 1"));
  // The generated listing carries the description's defaults and units.
  CHECK_THAT(engine_options_help("full-model"),
             Catch::Contains("support_margin_eV = 1  widening of the XUV spectral support on each "
                             "side, eV (a number in [0, 10000])"));
  // The CMA engines: their defaults differ only in the data projection
  // (retrieval/engines/cma_problem.h: poisson for ptychographic, amplitude for projections).
  for (const auto& [engine, projection] :
       {std::pair{"ptychographic", "poisson"}, std::pair{"projections", "amplitude"}})
    CHECK_THAT(engine_options_help(engine),
               Catch::Contains(std::string("\nprojection = ") + projection + "  "));
  CHECK(to_string(PtychographicSettings{}.cma.projection) == std::string("poisson"));
  CHECK(to_string(ProjectionsSettings{}.cma.projection) == std::string("amplitude"));
}
