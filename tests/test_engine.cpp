// Engine framework: options validation, the registry, the shared loop's stopping rules and
// callbacks (with a scripted fake engine), the trace error and the reports.
#include <catch2/catch.hpp>

#include <chrono>
#include <cmath>
#include <limits>
#include <thread>

#include "retrieval/core/error.h"
#include "retrieval/engines/engine.h"
#include "tests/check_support.h"

using namespace sw;

namespace {

// An engine whose trace error follows a script; records its life cycle.
class FakeEngine : public Engine {
 public:
  explicit FakeEngine(std::function<double(int)> g, double sleep_s = 0.0)
      : g_(std::move(g)), sleep_s_(sleep_s) {}
  std::string name() const override { return "fake"; }
  std::string description() const override { return "scripted trace error"; }
  std::string reference() const override { return "none"; }
  void prepare(const RetrievalProblem&, const EngineOptions&) override { ++prepared; }
  IterationRecord iterate(int k) override {
    if (sleep_s_ > 0) std::this_thread::sleep_for(std::chrono::duration<double>(sleep_s_));
    IterationRecord r;
    r.trace_error = g_(k);
    if (r.trace_error < best) {
      best = r.trace_error;
      best_k = k;
    }
    last_k = k;
    return r;
  }
  Reconstruction finalize() override {
    ++finalized;
    Reconstruction r;
    r.trace_error = best;
    r.model = "none";
    return r;
  }
  int prepared = 0, finalized = 0, last_k = 0, best_k = 0;
  double best = std::numeric_limits<double>::infinity();

 private:
  std::function<double(int)> g_;
  double sleep_s_;
};

RetrievalProblem tiny_problem(double variance) {
  RetrievalProblem p;
  p.intensity = Eigen::MatrixXd::Constant(4, 5, 1.0);
  p.variance = Eigen::MatrixXd::Constant(4, 5, variance);
  return p;
}

}  // namespace

TEST_CASE("default engine options validate", "[engine]") {
  // STYLE.md (Ceres Options::IsValid practice): the defaults must be valid.
  CHECK(EngineOptions().validate().empty());
}

TEST_CASE("each bad option is named with its value", "[engine]") {
  // STYLE.md / DESIGN.md "Engines": every option validated with a message naming the field;
  // bad configuration is reported before any work starts (Ceres practice).
  struct Bad {
    const char* field;
    std::function<void(EngineOptions&)> set;
  };
  const std::vector<Bad> bad = {
      {"max_iterations", [](EngineOptions& o) { o.max_iterations = 0; }},
      {"relative_tolerance", [](EngineOptions& o) { o.relative_tolerance = -1; }},
      {"patience", [](EngineOptions& o) { o.patience = 0; }},
      {"noise_floor_factor", [](EngineOptions& o) { o.noise_floor_factor = -0.5; }},
      {"noise_floor_relative_tolerance",
       [](EngineOptions& o) { o.noise_floor_relative_tolerance = -1; }},
      {"threads", [](EngineOptions& o) { o.threads = 0; }},
      {"max_seconds", [](EngineOptions& o) { o.max_seconds = 0; }},
  };
  for (const Bad& b : bad) {
    EngineOptions o;
    b.set(o);
    const std::string m = o.validate();
    INFO(b.field << ": " << m);
    CHECK(m.find(b.field) == 0);  // the message starts with the field's name
    FakeEngine e([](int) { return 1.0; });
    try {
      run_engine(e, tiny_problem(0.0), o);
      FAIL("run_engine accepted a bad option");
    } catch (const Error& err) {
      CHECK(err.kind() == ErrorKind::kUsage);
      CHECK(std::string(err.what()).find(b.field) != std::string::npos);
    }
    CHECK(e.prepared == 0);  // bad configuration is reported before any work starts
  }
}

TEST_CASE("registry lists the built-in engines and rejects unknown names", "[engine]") {
  // DESIGN.md "Engines" and STYLE.md (PtyPy practice): engines registered by name; unknown
  // names give an error listing the registered ones.
  const auto names = engine_names();
  CHECK(std::find(names.begin(), names.end(), "ptychographic") != names.end());
  CHECK(std::find(names.begin(), names.end(), "projections") != names.end());
  for (const auto& n : names) {
    auto e = make_engine(n);
    REQUIRE(e);
    CHECK(e->name() == n);
    CHECK(!e->reference().empty());
    CHECK(!e->description().empty());
  }
  const std::string m =
      test::error_message([] { (void)make_engine("no-such-engine"); }, ErrorKind::kUsage);
  CHECK(m.find("no-such-engine") != std::string::npos);
  for (const auto& n : names) CHECK(m.find(n) != std::string::npos);
  // Every engine's settings: the defaults validate, their text form reads back to themselves
  // through the text boundary, and each setting is listed with its help (one description,
  // retrieval/engines/engine_options.h).
  CHECK(EngineSettings{}.validate().empty());
  for (const auto& n : names) {
    INFO(n);
    const std::string help = engine_options_help(n);
    EngineSettings from_text;
    std::vector<std::pair<std::string, std::string>> defaults;
    auto add = [&](const auto& settings) {
      for (const auto& [name, text] : described_texts(settings)) {
        defaults.emplace_back(name, text);
        CHECK(help.find(name + " = " + text + "  ") != std::string::npos);  // listed, default
      }
    };
    if (n == "ptychographic") add(PtychographicSettings{});
    if (n == "projections") add(ProjectionsSettings{});
    if (n == "full-model") add(FullModelSettings{});
    CHECK_NOTHROW(apply_engine_option_text(n, defaults, &from_text));
    for (const auto& [name, text] : defaults) CHECK(from_text.text(name) == text);
  }
  CHECK_FALSE(register_engine("ptychographic", [] { return make_engine("projections"); }));
  CHECK(register_engine("fake-for-registry-test",
                        [] { return std::make_unique<FakeEngine>([](int) { return 1.0; }); }));
  CHECK(make_engine("fake-for-registry-test")->name() == "fake");
}

TEST_CASE("engine-specific options are checked against the engine's description", "[engine]") {
  // STYLE.md "parameters described once": the description drives the reading of the text form
  // (name=value), once, at the boundary; the engines read typed settings.
  auto apply = [](std::vector<std::pair<std::string, std::string>> text) {
    EngineSettings s;
    apply_engine_option_text("ptychographic", text, &s);
    return s;
  };
  const EngineSettings good =
      apply({{"beta_object", "1.5"}, {"momentum_bands", "4"}, {"projection", "amplitude"}});
  CHECK(good.ptychographic.beta_object == 1.5);
  CHECK(good.ptychographic.cma.momentum_bands == 4);
  CHECK(good.ptychographic.cma.projection == CmaProjection::kAmplitude);
  CHECK(good.given == std::vector<std::string>{"beta_object", "momentum_bands", "projection"});
  CHECK(good.is_given("projection"));
  CHECK_FALSE(good.is_given("beta_gate"));
  const std::vector<std::pair<std::pair<std::string, std::string>, std::string>> bad = {
      {{"beta_object", "3"}, "beta_object = '3'"},
      {{"beta_object", "abc"}, "beta_object = 'abc'"},
      {{"momentum_bands", "2.5"}, "momentum_bands = '2.5'"},
      {{"momentum_bands", "-1"}, "momentum_bands = '-1'"},
      {{"projection", "c"}, "expected one of poisson|amplitude"},
      {{"nonsense", "1"}, "unknown engine option"}};
  for (const auto& [kv, expect] : bad) {
    INFO(kv.first << " = " << kv.second);
    try {
      apply({kv});
      FAIL("bad engine option text accepted");
    } catch (const Error& err) {
      CHECK(err.kind() == ErrorKind::kUsage);
      CHECK(std::string(err.what()).find(expect) != std::string::npos);
      CHECK(std::string(err.what()).rfind("ptychographic: ", 0) == 0);  // names the engine
    }
  }
  // An option another registered engine declares is meant for that engine (engine chains).
  CHECK(apply({{"mode", "lsgpa"}}).projections.mode == "lsgpa");
  // The last entry of a repeated name wins; an integer setting refuses a fraction.
  CHECK(apply({{"beta_object", "1"}, {"beta_object", "0.25"}}).ptychographic.beta_object == 0.25);
  CHECK_THROWS_AS(apply({{"momentum_bands", "1"}, {"momentum_bands", "2.5"}}), Error);
  // One name sets that setting of every engine that has one.
  const EngineSettings c = apply({{"spectrum_constraint", "centroid"}});
  CHECK(c.ptychographic.cma.spectrum == CmaSpectrum::kCentroid);
  CHECK(c.projections.cma.spectrum == CmaSpectrum::kCentroid);
  CHECK(c.full_model.spectrum_constraint == "centroid");
  // An engine without settings of its own accepts the others' and refuses unknown names.
  EngineSettings s;
  CHECK_NOTHROW(apply_engine_option_text("fake", {{"beta_object", "0.2"}}, &s));
  CHECK_THROWS_WITH(apply_engine_option_text("fake", {{"knob", "1"}}, &s),
                    Catch::Contains("fake: unknown engine option 'knob' (this engine accepts no "
                                    "extra options)"));
}

TEST_CASE("the loop stops at max_iterations and returns the best estimate", "[engine]") {
  // Contract of run_engine (retrieval/engines/engine.h; Ceres practice: numerical trouble or a stop
  // keeps the best estimate, never the last iterate if it was worse).
  // G oscillates: the best (lowest) iterate is not the last one.
  FakeEngine e([](int k) { return 1.0 + 0.5 * std::sin(0.7 * k) + 1.0 / k; });
  EngineOptions o;
  o.max_iterations = 20;
  o.relative_tolerance = 0;
  const Reconstruction r = run_engine(e, tiny_problem(0.0), o);
  CHECK(r.termination == Termination::kMaxIterations);
  CHECK_FALSE(r.converged());
  CHECK(r.iterations == 20);
  REQUIRE(r.history.size() == 20);
  CHECK(e.prepared == 1);
  CHECK(e.finalized == 1);
  CHECK(r.best_iteration == e.best_k);
  CHECK(r.best_iteration == 16);  // the deepest minimum of the script, not the last iterate
  for (std::size_t i = 0; i < r.history.size(); ++i) {
    CHECK(r.history[i].iteration == static_cast<int>(i) + 1);
    if (i > 0) CHECK(r.history[i].seconds >= r.history[i - 1].seconds);
  }
  CHECK(r.engine == "fake");
  CHECK(r.message.find("max_iterations") != std::string::npos);
}

TEST_CASE("the stall rule compares G over the patience window", "[engine]") {
  // Rule 4 of run_engine (engine.h): |G_k - G_{k-patience}| / G_k < relative_tolerance.
  // G halves until iteration 10, then is constant: the relative change over 5 iterations
  // first vanishes at k = 15.
  FakeEngine e([](int k) { return std::pow(0.5, std::min(k, 10)); });
  EngineOptions o;
  o.patience = 5;
  o.relative_tolerance = 1e-6;
  const Reconstruction r = run_engine(e, tiny_problem(0.0), o);
  CHECK(r.termination == Termination::kConverged);
  CHECK(r.converged());
  CHECK(r.iterations == 15);
}

TEST_CASE("the noise floor stops only once G has settled there", "[engine]") {
  // Rules 3 and 5 of run_engine (engine.h); DESIGN.md: "A trace error at the noise floor is
  // convergence, not failure".
  // G_noise = sqrt(sum var / (N max^2)) = sqrt(0.04) = 0.2 for var = 0.04, I = 1.
  const RetrievalProblem p = tiny_problem(0.04);
  EngineOptions o;
  o.patience = 4;
  o.relative_tolerance = 0;
  o.max_iterations = 200;
  SECTION("settled below the floor") {
    // Below the floor from k = 3 (0.19), still moving 5 %/iteration until k = 8, then flat.
    FakeEngine e([](int k) { return k < 3 ? 0.5 : 0.19 * std::pow(0.95, std::min(k, 8) - 3); });
    const Reconstruction r = run_engine(e, p, o);
    CHECK(r.termination == Termination::kNoiseFloor);
    CHECK(r.converged());
    CHECK(r.iterations == 12);  // first k with |G_k - G_{k-4}| / G_k < 1e-3
    CHECK(r.noise_floor_trace_error == Approx(0.2));
  }
  SECTION("above the floor it does not fire") {
    FakeEngine e([](int) { return 0.3; });
    o.max_iterations = 30;
    const Reconstruction r = run_engine(e, p, o);
    CHECK(r.termination == Termination::kMaxIterations);
  }
  SECTION("max_iterations reached at the floor counts as converged") {
    FakeEngine e([](int k) { return 0.19 * std::pow(0.9, k); });
    o.max_iterations = 10;
    const Reconstruction r = run_engine(e, p, o);
    CHECK(r.termination == Termination::kNoiseFloor);
    CHECK(r.iterations == 10);
  }
  SECTION("factor 0 disables the rule") {
    FakeEngine e([](int) { return 0.1; });
    o.noise_floor_factor = 0;
    o.max_iterations = 10;
    CHECK(run_engine(e, p, o).termination == Termination::kMaxIterations);
  }
}

TEST_CASE("the time limit ends the run", "[engine]") {
  // Rule 6 of run_engine (engine.h): wall time >= max_seconds.
  FakeEngine e([](int k) { return 1.0 / k; }, 0.02);
  EngineOptions o;
  o.max_seconds = 0.1;
  o.max_iterations = 1000;
  const Reconstruction r = run_engine(e, tiny_problem(0.0), o);
  CHECK(r.termination == Termination::kTimeLimit);
  CHECK(r.iterations >= 2);
  CHECK(r.iterations < 20);
  CHECK(r.seconds >= 0.1);
}

TEST_CASE("callbacks see every record and can stop or abort", "[engine]") {
  // Ceres-style iteration callbacks (STYLE.md): continue / stop / abort.
  std::vector<int> seen;
  auto watcher = [&](const IterationRecord& r) {
    seen.push_back(r.iteration);
    return CallbackResult::kContinue;
  };
  // A callback that answers `decision` at iteration k and continues otherwise.
  auto at = [](int k, CallbackResult decision) {
    return [=](const IterationRecord& r) {
      return r.iteration == k ? decision : CallbackResult::kContinue;
    };
  };
  FakeEngine e([](int k) { return 1.0 / k; });
  SECTION("stop") {
    const Reconstruction r =
        run_engine(e, tiny_problem(0.0), EngineOptions(), {watcher, at(3, CallbackResult::kStop)});
    CHECK(r.termination == Termination::kUserStopped);
    CHECK(r.iterations == 3);
    CHECK(seen == std::vector<int>{1, 2, 3});
    CHECK(e.finalized == 1);  // a stopped run still returns its best estimate
  }
  SECTION("abort") {
    const Reconstruction r =
        run_engine(e, tiny_problem(0.0), EngineOptions(), {at(2, CallbackResult::kAbort), watcher});
    CHECK(r.termination == Termination::kFailure);
    CHECK(r.iterations == 2);
    CHECK(seen == std::vector<int>{1});  // callbacks after a decision are not called
    CHECK(r.message.find("aborted") != std::string::npos);
  }
}

TEST_CASE("numerical failure keeps the best estimate", "[engine]") {
  // STYLE.md (Ceres): numerical failure ends with FAILURE and keeps the best estimate.
  SECTION("G not finite") {
    FakeEngine e([](int k) { return k < 4 ? 1.0 / k : std::numeric_limits<double>::quiet_NaN(); });
    const Reconstruction r = run_engine(e, tiny_problem(0.0), EngineOptions());
    CHECK(r.termination == Termination::kFailure);
    CHECK(r.iterations == 4);
    CHECK(r.best_iteration == 3);
    CHECK(r.trace_error == Approx(1.0 / 3));
  }
  SECTION("the engine reports a numerical error") {
    FakeEngine e([](int k) -> double {
      if (k == 5) throw numeric_error("diverged");
      return 1.0 / k;
    });
    const Reconstruction r = run_engine(e, tiny_problem(0.0), EngineOptions());
    CHECK(r.termination == Termination::kFailure);
    CHECK(r.message.find("diverged") != std::string::npos);
    CHECK(r.iterations == 4);
  }
}

TEST_CASE("trace error and noise floor follow their definitions", "[engine]") {
  // G of Fittinghoff et al., JOSA B 12, 1955 (1995), normalised to the measured peak, with the
  // optimal scale mu; here by hand on a 2 x 2 example.
  Eigen::MatrixXd I(2, 2), M(2, 2), V(2, 2);
  I << 1, 2, 3, 4;
  M << 2, 4, 6, 8;
  double mu = 0;
  CHECK(trace_error(I, M, &mu) == Approx(0.0).margin(1e-15));
  CHECK(mu == Approx(0.5));
  M << 1, 2, 3, 5;
  const double m = (1 + 4 + 9 + 20) / 39.0;  // sum I M / sum M^2
  const double r2 =
      std::pow(1 - m, 2) + std::pow(2 - 2 * m, 2) + std::pow(3 - 3 * m, 2) + std::pow(4 - 5 * m, 2);
  CHECK(trace_error(I, M, &mu) == Approx(std::sqrt(r2 / (4 * 16))));
  CHECK(mu == Approx(m));
  V << 1, 2, 3, 4;  // Poisson: variance = counts
  CHECK(noise_floor_trace_error(I, V) == Approx(std::sqrt(10.0 / (4 * 16))));
  CHECK(noise_floor_trace_error(I, Eigen::MatrixXd()) == 0.0);
  CHECK_THROWS_AS(trace_error(I, Eigen::MatrixXd::Zero(3, 2)), Error);
}

TEST_CASE("reports name the engine, the termination and every iteration", "[engine]") {
  // STYLE.md: a one-line brief report and a full table (Ceres Summary practice).
  FakeEngine e([](int k) { return 1.0 / k; });
  EngineOptions o;
  o.max_iterations = 100;
  const Reconstruction r = run_engine(e, tiny_problem(0.0), o);
  const std::string b = r.brief_report();
  CHECK(b.find("fake") != std::string::npos);
  CHECK(b.find(to_string(r.termination)) != std::string::npos);
  CHECK(b.find('\n') == std::string::npos);
  const std::string f = r.full_report();
  CHECK(f.find("iteration") != std::string::npos);
  CHECK(f.find("<- best") != std::string::npos);
  CHECK(f.find("\n        100 ") != std::string::npos);  // the last iteration is listed
  CHECK(std::string(to_string(Termination::kNoiseFloor)) == "noise_floor");
}
