// The per-row Gaussian profile fit of the line-delay analysis (retrieval/analysis/line_profiles.h)
// against closed-form expectations and Monte Carlo draws from the C++ standard library.
#include <cmath>
#include <random>
#include <vector>

#include <catch2/catch.hpp>

#include "retrieval/analysis/line_profiles.h"

using namespace sw;

namespace {

struct Line {
  double N, x, s;
};

// Expected counts per bin: background plus each line's Gaussian density times the bin width
// (the bins are narrow, so the density at the centre is the bin's share to < 1e-4 here).
std::vector<double> expected_row(const std::vector<double>& W, double width, double background,
                                 const std::vector<Line>& lines) {
  std::vector<double> mu(W.size(), background);
  for (std::size_t j = 0; j < W.size(); ++j)
    for (const Line& l : lines) {
      const double u = (W[j] - l.x) / l.s;
      mu[j] += l.N * width * std::exp(-0.5 * u * u) / (std::sqrt(2.0 * M_PI) * l.s);
    }
  return mu;
}

std::vector<double> axis(double lo, double step, int n) {
  std::vector<double> W(static_cast<std::size_t>(n));
  for (int j = 0; j < n; ++j) W[static_cast<std::size_t>(j)] = lo + step * j;
  return W;
}

}  // namespace

TEST_CASE("profile fit: noise-free counts give back the lines that made them", "[line_profiles]") {
  // The Poisson likelihood is largest where mu = c (Gibbs' inequality), so counts equal to the
  // model's expectation must return its parameters (common practice: a fit recovers the
  // parameters of noise-free data made by its own model).
  const std::vector<double> W = axis(20.0, 0.25, 240);  // eV
  const std::vector<Line> truth = {{4000, 48.0, 3.0}, {600, 61.5, 3.2}};
  const std::vector<double> c = expected_row(W, 0.25, 2.0, truth);
  const std::vector<double> bw(W.size(), 0.25), bg(W.size(), 2.0);
  const RowProfileFit f = fit_row_profiles(c.data(), W, bw, bg, {47.0, 62.5}, {2.5, 2.5});
  REQUIRE(f.ok);
  for (std::size_t k = 0; k < 2; ++k) {
    CHECK(f.centre[k] == Approx(truth[k].x).margin(1e-5));
    CHECK(f.width[k] == Approx(truth[k].s).epsilon(1e-5));
    CHECK(f.counts[k] == Approx(truth[k].N).epsilon(1e-5));
  }
}

TEST_CASE("profile fit: the centre's sigma is the Cramer-Rao bound s / sqrt(N)",
          "[line_profiles]") {
  // One Gaussian line without background on fine bins: the Fisher information of the mean of N
  // Poisson-distributed Gaussian counts is N / s^2, so sigma_x = s / sqrt(N) (Cramer-Rao; G.
  // Cowan, Statistical Data Analysis, Oxford 1998, sec. 6.6). Widths and counts are free in the
  // fit, but for a symmetric profile the centre decouples from them.
  const std::vector<double> W = axis(30.0, 0.1, 400);
  const Line l{2500, 50.0, 2.0};
  const std::vector<double> c = expected_row(W, 0.1, 0.0, {l});
  const std::vector<double> bw(W.size(), 0.1), bg(W.size(), 0.0);
  const RowProfileFit f = fit_row_profiles(c.data(), W, bw, bg, {50.3}, {1.8});
  REQUIRE(f.ok);
  CHECK(std::sqrt(f.centre_var[0]) == Approx(l.s / std::sqrt(l.N)).epsilon(0.01));
}

TEST_CASE("profile fit: a weak line beside a strong one, Poisson draws", "[line_profiles]") {
  // 300 rows drawn with std::poisson_distribution around a strong line (3000 counts) and a line
  // ten times weaker 11 eV away (about 3.5 widths: the strong line's tail reaches under it), on
  // a flat background. The fitted centres must be unbiased (mean within 3 standard errors of
  // the truth) and their scatter must match the Fisher sigma (within 15 %: the sample standard
  // deviation of 300 draws has a relative standard error of 4 %; common practice).
  const double step = 0.5;
  const std::vector<double> W = axis(10.0, step, 160);
  const std::vector<Line> truth = {{3000, 40.0, 3.0}, {300, 51.0, 3.0}};
  const double background = 3.0;
  const std::vector<double> mu = expected_row(W, step, background, truth);
  const std::vector<double> bw(W.size(), step), bg(W.size(), background);
  std::mt19937_64 rng(20261204);
  std::vector<double> weak, sig;
  std::vector<double> c(W.size());
  for (int d = 0; d < 300; ++d) {
    for (std::size_t j = 0; j < W.size(); ++j)
      c[j] = static_cast<double>(std::poisson_distribution<long>(mu[j])(rng));
    const RowProfileFit f = fit_row_profiles(c.data(), W, bw, bg, {40.5, 50.0}, {2.6, 2.6});
    if (!f.ok) continue;
    weak.push_back(f.centre[1]);
    sig.push_back(std::sqrt(f.centre_var[1]));
  }
  REQUIRE(weak.size() >= 295);
  double m = 0, s2 = 0, ms = 0;
  for (double v : weak) m += v;
  m /= static_cast<double>(weak.size());
  for (double v : weak) s2 += (v - m) * (v - m);
  const double sd = std::sqrt(s2 / static_cast<double>(weak.size() - 1));
  for (double v : sig) ms += v;
  ms /= static_cast<double>(sig.size());
  CHECK(std::abs(m - truth[1].x) < 3.0 * sd / std::sqrt(static_cast<double>(weak.size())));
  CHECK(sd == Approx(ms).epsilon(0.15));
}

TEST_CASE("profile fit: a missing line gets counts consistent with none", "[line_profiles]") {
  // Background only where the second line is started. Either the fit refuses the row, or the
  // line's counts stay within 3 sigma of zero: the background under +-2 widths of it is
  // 16 bins x 1 count, sigma ~ sqrt(16) = 4 counts, so < 15 (common practice: 3 sigma); the
  // analysis drops rows with fewer than min_row_counts (10) in a line.
  const std::vector<double> W = axis(20.0, 0.25, 200);
  const std::vector<double> c = expected_row(W, 0.25, 1.0, {{2000, 40.0, 2.0}});
  const std::vector<double> bw(W.size(), 0.25), bg(W.size(), 1.0);
  std::vector<double> noisy(c);
  std::mt19937_64 rng(7);
  for (double& v : noisy) v = static_cast<double>(std::poisson_distribution<long>(v)(rng));
  const RowProfileFit f = fit_row_profiles(noisy.data(), W, bw, bg, {40.0, 55.0}, {2.0, 2.0});
  CHECK((!f.ok || f.counts[1] < 15.0));
  // A start without a positive width is refused.
  const RowProfileFit bad = fit_row_profiles(c.data(), W, bw, bg, {40.0}, {-1.0});
  CHECK_FALSE(bad.ok);
}
