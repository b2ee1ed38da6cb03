// The statistics behind `earshot tally` (dsp/cli/stats.hpp) against SciPy
// 1.10.1 / NumPy 1.24.2 (Debian 12's python3-scipy, python3-numpy), values
// printed with repr() by:
//   scipy.special.betainc(a, b, x)          beta_inc
//   scipy.stats.t.sf(t, nu)                 t_upper
//   mpmath (40 digits)                      t_quantile (see there why not t.ppf)
//   scipy.stats.binom.sf(k - 1, n, 0.5)     binom_half_upper
//   scipy.stats.binomtest(k, n, 0.5).pvalue binom_half_two_sided (two-sided)
//   numpy.percentile(v, q) (linear, = Hyndman & Fan type 7), numpy.std(ddof=1),
//   the 95 % interval mean ± t_{0.975, n-1}·sd/√n with t from mpmath      summarize
// Each table row is its own section, so a failure names the row and every
// other row still runs.
#include <catch2/catch.hpp>

#include <vector>

#include "../../dsp/cli/stats.hpp"

using namespace earshot::stats;

TEST_CASE("stats: regularized incomplete beta against scipy.special.betainc", "[stats]") {
  struct Row { double a, b, x, want; };
  const Row row = GENERATE(values<Row>({{0.5, 0.5, 0.3, 0.3690101195655454},
                                        {2, 3, 0.4, 0.5247999999999999},
                                        {5, 0.5, 0.9, 0.316642915020012},
                                        {0.5, 5, 0.01, 0.24284189089843752},
                                        {10, 10, 0.5, 0.5000000000000002},
                                        {50, 0.5, 0.98, 0.15624350786681956},
                                        {1, 1, 0.25, 0.25},
                                        {3.5, 0.5, 0.999, 0.9356322688440224}}));
  CAPTURE(row.a, row.b, row.x);
  CHECK(beta_inc(row.a, row.b, row.x) == Approx(row.want).epsilon(1e-12));
  CHECK(beta_inc(row.a, row.b, 0.0) == 0.0);
  CHECK(beta_inc(row.a, row.b, 1.0) == 1.0);
}

TEST_CASE("stats: Student's t quantile against mpmath (40 digits)", "[stats]") {
  // Reference: mpmath.findroot of mpmath.betainc(nu/2, 1/2, 0, nu/(nu+t^2), regularized=True)/2 = 1 - p
  // at 40 digits (A&S 26.7.1). SciPy 1.10's scipy.stats.t.ppf is off by up to 2e-9 relative here
  // (1.637744357215907 for p = 0.9, nu = 3 against 1.6377443536962103), so it is not the reference.
  // Closed forms agree (recalled from memory, checked with mpmath): nu = 1, tan(pi (p - 1/2));
  // nu = 2, (2p - 1) / sqrt(2p (1 - p)).
  struct Row { double p, nu, want; };
  const Row row = GENERATE(values<Row>({{0.975, 1, 12.706204736174693},
                                        {0.975, 2, 4.3026527297494618},
                                        {0.975, 5, 2.5705818356363148},
                                        {0.975, 10, 2.2281388519862742},
                                        {0.975, 30, 2.0422724563012379},
                                        {0.995, 4, 4.604094871349992},
                                        {0.95, 15, 1.753050355692573},
                                        {0.975, 1000, 1.9623390808264081},
                                        {0.9, 3, 1.6377443536962103}}));
  CAPTURE(row.p, row.nu);
  CHECK(t_quantile(row.p, row.nu) == Approx(row.want).epsilon(1e-12));
}

TEST_CASE("stats: Student's t upper tail against scipy.stats.t.sf", "[stats]") {
  struct Row { double t, nu, want; };
  const Row row = GENERATE(values<Row>({{0.0, 3, 0.5},
                                        {1.0, 1, 0.24999999999999978},
                                        {2.0, 5, 0.05096973941492914},
                                        {3.5, 12, 0.0021909347158740743},
                                        {10, 2, 0.004926228511662846}}));
  CAPTURE(row.t, row.nu);
  CHECK(t_upper(row.t, row.nu) == Approx(row.want).epsilon(1e-12));
}

TEST_CASE("stats: one-tailed exact binomial test against scipy.stats.binom.sf", "[stats]") {
  struct Row { long k, n; double want; };
  const Row row = GENERATE(values<Row>({{12, 16, 0.0384063720703125},
                                        {9, 10, 0.0107421875},
                                        {0, 5, 1.0},
                                        {6, 5, 0.0},
                                        {5, 5, 0.03125},
                                        {30, 50, 0.10131937553227033},
                                        {1, 1, 0.5},
                                        {60, 100, 0.02844396682049044}}));
  CAPTURE(row.k, row.n);
  CHECK(binom_half_upper(row.k, row.n) == Approx(row.want).epsilon(1e-12).margin(1e-300));
}

TEST_CASE("stats: two-sided exact binomial test against scipy.stats.binomtest", "[stats]") {
  struct Row { long k, n; double want; };
  const Row row = GENERATE(values<Row>({{12, 16, 0.076812744140625},
                                        {2, 10, 0.109375},
                                        {5, 10, 1.0},
                                        {0, 7, 0.015625},
                                        {40, 60, 0.01348929373119186},
                                        {3, 3, 0.25},
                                        {0, 0, 1.0}}));
  CAPTURE(row.k, row.n);
  CHECK(binom_half_two_sided(row.k, row.n) == Approx(row.want).epsilon(1e-12));
}

TEST_CASE("stats: summary against numpy.percentile, numpy.std and the t interval (mpmath)", "[stats]") {
  const std::vector<double> v = {62, 71, 55, 80, 90, 45, 77, 68, 100, 12};
  const Summary s = summarize(v, 0.95);
  CHECK(s.n == 10);
  CHECK(s.mean == Approx(66.0).epsilon(1e-15));
  CHECK(s.sd == Approx(24.88194347536203).epsilon(1e-13));
  CHECK(s.q1 == Approx(56.75).epsilon(1e-15));
  CHECK(s.median == Approx(69.5).epsilon(1e-15));
  CHECK(s.q3 == Approx(79.25).epsilon(1e-15));
  CHECK(s.ci_lo == Approx(48.200529900928045).epsilon(1e-12));  // t = 2.2621571627982055
  CHECK(s.ci_hi == Approx(83.799470099071955).epsilon(1e-12));
  CHECK(s.min == 12);
  CHECK(s.max == 100);
  // Tukey's fences (common practice, no source): IQR 22.5, so 12 < 56.75 − 33.75 = 23 is an
  // outlier and the lower whisker ends at 45; 100 <= 79.25 + 33.75 = 113 stays inside.
  CHECK(s.outliers == std::vector<double>{12});
  CHECK(s.whisker_lo == 45);
  CHECK(s.whisker_hi == 100);
  SECTION("one value: no spread, no interval") {
    const Summary one = summarize({7}, 0.95);
    CHECK(one.n == 1);
    CHECK(one.mean == 7);
    CHECK(one.median == 7);
    CHECK(std::isnan(one.sd));
    CHECK(std::isnan(one.ci_lo));
  }
  SECTION("no values") { CHECK(summarize({}, 0.95).n == 0); }
}
