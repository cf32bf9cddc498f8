// ptychographic engine (ePIE, CMA).
#include <catch2/catch.hpp>

#include <algorithm>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "retrieval/engine.h"
#include "tests/cma_test_problem.h"

using namespace sw;
using namespace sw::testing;

TEST_CASE("explore", "[.explore]") {
  const char* ex = std::getenv("EXTRA");
  for (double gdd : {0.0, 3000.0}) {
    CaseSpec c;
    c.gdd_as2 = gdd;
    if (const char* nz = std::getenv("NOISE")) c.peak_counts = std::atof(nz);
    if (const char* jt = std::getenv("JITTER")) c.jitter = std::atof(jt);
    if (const char* mr = std::getenv("MATCHED")) c.matched_ratio = std::atoi(mr);
    if (const char* gs = std::getenv("GRID")) c.grid_size = std::atoi(gs);
    if (const char* sd = std::getenv("SEED")) c.seed = std::atoi(sd);
    const Case k = make_case(c);
    const Metrics truth = metrics(k.xuv, k.ir);
    {
      RetrievalProblem q = k.problem;
      EngineOptions o1;
      o1.max_iterations = 1;
      o1.extra = {{"beta_object", "1e-6"}, {"beta_gate", "0"}, {"spectrum_interval", "1"}};
      auto e1 = make_engine("ptychographic");
      Reconstruction r1 = run_engine(*e1, q, o1);
      std::printf("initial-guess (TL of field-free) fwhm %.1f\n", units::au_to_as(intensity_fwhm(r1.xuv)));
    }
    EngineOptions o;
    if (ex) {
      std::string s(ex);
      std::size_t p = 0;
      while (p < s.size()) {
        std::size_t q = s.find(',', p);
        if (q == std::string::npos) q = s.size();
        std::string kv = s.substr(p, q - p);
        auto eq = kv.find('=');
        if (kv.substr(0, eq) == "iters") o.max_iterations = std::stoi(kv.substr(eq + 1));
        else if (kv.substr(0, eq) == "nff") o.noise_floor_factor = std::stod(kv.substr(eq + 1));
        else if (kv.substr(0, eq) == "tol") o.relative_tolerance = std::stod(kv.substr(eq + 1));
        else o.extra.emplace_back(kv.substr(0, eq), kv.substr(eq + 1));
        p = q + 1;
      }
    }
    if (std::getenv("TRUTH")) {
      o.initial_xuv = k.xuv;
      o.initial_ir = k.ir;
    }
    const char* en = std::getenv("ENGINE");
    auto e = make_engine(en ? en : "ptychographic");
    Reconstruction r = run_engine(*e, k.problem, o);
    const Metrics got = metrics(r.xuv, r.ir);
    std::printf("gdd %g: truth fwhm %.1f gdd %.0f A %.4f | got fwhm %.1f gdd %.0f A %.4f | %s\n", gdd,
                truth.fwhm_as, truth.gdd_as2, truth.peak_A, got.fwhm_as, got.gdd_as2, got.peak_A,
                r.brief_report().c_str());
    if (std::getenv("APRINT"))
      for (double t = -8; t <= 8; t += 0.25)
        std::printf("  A(%5.2f fs) truth %+.4f got %+.4f\n", t, k.ir.vector_potential_at(units::fs_to_au(t)),
                    r.ir.vector_potential_at(units::fs_to_au(t)));
    if (std::getenv("DUMP")) {
      const XuvField a = k.xuv.with_carrier(r.xuv.carrier_au());
      const auto It = a.intensity(), Ig = r.xuv.intensity();
      double mt = *std::max_element(It.begin(), It.end()), mg = *std::max_element(Ig.begin(), Ig.end());
      const auto t = a.grid().times();
      for (std::size_t i = 0; i < t.size(); ++i)
        if (std::abs(t[i]) < units::as_to_au(400))
          std::printf("  t %7.1f as truth %.4f got %.4f\n", units::au_to_as(t[i]), It[i] / mt, Ig[i] / mg);
      const auto St = a.spectrum(), Sg = r.xuv.spectrum();
      const auto w = a.photon_energies_au();
      double ms = 0; for (auto& v : St) ms = std::max(ms, std::abs(v));
      double mg2 = 0; for (auto& v : Sg) mg2 = std::max(mg2, std::abs(v));
      {
        CVec m1(St.size()), m2(St.size());
        for (std::size_t i = 0; i < St.size(); ++i) {
          m1[i] = std::polar(std::abs(St[i]) / ms, std::arg(Sg[i]));
          m2[i] = std::polar(std::abs(Sg[i]) / mg2, std::arg(St[i]));
        }
        std::printf("  MIX truth-amp/got-phase fwhm %.1f ; got-amp/truth-phase fwhm %.1f\n",
                    units::au_to_as(intensity_fwhm(XuvField::from_spectrum(a.grid(), a.carrier_au(), m1))),
                    units::au_to_as(intensity_fwhm(XuvField::from_spectrum(a.grid(), a.carrier_au(), m2))));
      }
      for (std::size_t i = 0; i < w.size(); i += 4)
        if (std::abs(St[i]) > 0.03 * ms)
          std::printf("  W %6.2f eV |S| truth %.3f got %.3f  phase diff %+.3f\n", units::au_to_eV(w[i]), std::abs(St[i]) / ms,
                      std::abs(Sg[i]) / mg2, std::arg(Sg[i] * std::conj(St[i])));
    }
    for (std::size_t i = 0; i < r.history.size(); i += 20)
      std::printf("  %d %.4e %.3f\n", r.history[i].iteration, r.history[i].trace_error, r.history[i].seconds);
  }
}
