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
//   scipy.stats.wilcoxon                    signed_rank (see there)
// Each table row is its own section, so a failure names the row and every
// other row still runs.
#include <catch2/catch.hpp>

#include <cmath>
#include <cstdint>
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

// ---- Wilcoxon signed-rank test --------------------------------------------------------------
// Expected values: scipy.stats.wilcoxon 1.10.1 (zero_method='wilcox', the default), printed with
// repr(): method='exact' for the untied, zero-free rows, method='approx', correction=True for the
// others (docs/listening.md says why ties go to the normal approximation). Tolerance 1e-12
// relative: both sides count the exact distribution (scipy in floating point, we in integers) or
// evaluate erfc of the same z.

TEST_CASE("stats: Wilcoxon signed-rank test against scipy.stats.wilcoxon", "[stats][wilcoxon]") {
  struct Row {
    const char* name;
    std::vector<double> d;
    bool exact;
    double statistic, p, z;  // z: NaN for the exact rows
  };
  const double none = NAN;
  const Row row = GENERATE_COPY(values<Row>({
      {"exact n=10", {1.5, -2.25, 3.0, 4.75, -0.5, 6.0, 7.25, 8.0, -9.5, 10.0}, true, 13.0, 0.16015625, none},
      {"exact n=1", {3.0}, true, 0.0, 1.0, none},
      {"exact n=8, one sign", {1, 2, 3, 4, 5, 6, 7, 8.5}, true, 0.0, 0.0078125, none},
      {"exact n=20",
       {-3.1, -2.171, -1.216, -0.236, 0.771, 1.804, 2.863, 3.948, 5.058, 6.195, 7.358, 8.547, 9.761, 11.002, 12.269,
        13.562, 14.881, 16.225, 17.596, 18.993},
       true, 16.0, 0.0003223419189453125, none},
      {"exact n=50",
       {-40.0, -2.99, 34.02,  -29.97, 7.04,  44.05, -19.94, 17.07, 54.08,  -9.91,  27.1,  -36.89, 0.12,
        37.13, -26.86, 10.15, 47.16, -16.83, 20.18, 57.19, -6.8,  30.21,  -33.78, 3.23,  40.24, -23.75,
        13.26, 50.27, -13.72, 23.29, 60.3,  -3.69, 33.32, -30.67, 6.34,  43.35,  -20.64, 16.37, 53.38,
        -10.61, 26.4,  -37.59, -0.5800000000000001, 36.43, -27.56, 9.45, 46.46, -17.53, 19.48, 56.49},
       true, 413.0, 0.029727315082014982, none},
      {"ties n=9", {2, -2, 2, 5, 5, -1, 3, 3, 3}, false, 4.0, 0.03159532752069589, -2.149493162495516},
      {"zeros n=10", {0, 0, 1.5, -2, 3, 4, 5, -6, 7, 8}, false, 8.0, 0.18343061898217816, -1.3302660798266093},
      {"normal n=60",
       {-35.0,  18.001, -25.998, 27.003, -16.996, 36.005, -7.994, 45.007,  1.008,   54.009, 10.01,  -33.989,
        19.012, -24.987, 28.014, -15.985, 37.016, -6.983, 46.018, 2.019,   55.02,   11.021, -32.978, 20.023,
        -23.976, 29.025, -14.974, 38.027, -5.972, 47.029, 3.03,   56.031,  12.032,  -31.967, 21.034, -22.965,
        30.036, -13.963, 39.038, -4.961, 48.04,  4.041,  57.042,  13.043,  -30.956, 22.045, -21.954, 31.047,
        -12.952, 40.049, -3.95,  49.051, 5.052,  58.053, 14.054,  -29.945, 23.056,  -20.943, 32.058, -11.941},
       false, 568.0, 0.010747738761268074, -2.5507954400635855},
      {"ties and zeros n=30",
       {-4, 3, -1, 6, 2, -2, 5, 1, -3, 4, 0, -4, 3, -1, 6, 2, -2, 5, 1, -3, 4, 0, -4, 3, -1, 6, 2, -2, 5, 1},
       false, 129.0, 0.0929306323974395, -1.6801371596524308},
  }));
  CAPTURE(row.name);
  const SignedRank w = signed_rank(row.d);
  CHECK(w.exact == row.exact);
  CHECK(w.n == row.d.size());
  CHECK(w.statistic == row.statistic);  // rank sums are sums of halves: exact in double
  CHECK(w.w_plus + w.w_minus == double(w.used * (w.used + 1)) / 2);
  CHECK(w.p == Approx(row.p).epsilon(1e-12));
  if (row.exact)
    CHECK(std::isnan(w.z));
  else
    CHECK(w.z == Approx(row.z).epsilon(1e-12));
}

TEST_CASE("stats: Wilcoxon zero handling (zero_method='wilcox') and the empty case", "[stats][wilcoxon]") {
  // Zeros are dropped before ranking: the rank sums are those of the non-zero differences alone.
  const SignedRank with = signed_rank({0, 0, 1.5, -2, 3, 4, 5, -6, 7, 8});
  const SignedRank without = signed_rank({1.5, -2, 3, 4, 5, -6, 7, 8});
  CHECK(with.zeros == 2);
  CHECK(with.used == 8);
  CHECK(with.w_plus == without.w_plus);
  CHECK(with.w_minus == without.w_minus);
  CHECK_FALSE(with.exact);  // a zero sends the test to the normal approximation (as scipy's 'auto')
  CHECK(without.exact);
  // Nothing left to rank: no test (scipy raises ValueError for all-zero differences).
  const SignedRank zero = signed_rank({0, 0, 0});
  CHECK(zero.used == 0);
  CHECK(std::isnan(zero.p));
  CHECK(std::isnan(signed_rank({}).p));
}

TEST_CASE("stats: exact signed-rank tails against enumeration of every sign pattern", "[stats][wilcoxon]") {
  // The oracle: all 2^n sign patterns of the ranks 1..n, W+ summed directly (the null
  // distribution's definition, Wilcoxon 1945).
  for (size_t n = 1; n <= 14; ++n) {
    const long total = long(n * (n + 1) / 2);
    std::vector<double> count(size_t(total) + 1, 0);
    for (uint32_t m = 0; m < (1u << n); ++m) {
      long s = 0;
      for (size_t k = 0; k < n; ++k)
        if (m & (1u << k)) s += long(k + 1);
      count[size_t(s)] += 1;
    }
    for (long w = 0; w <= total; ++w) {
      double lo = 0, hi = 0;
      for (long s = 0; s <= total; ++s) {
        if (s <= w) lo += count[size_t(s)];
        if (s >= w) hi += count[size_t(s)];
      }
      double got_lo, got_hi;
      signed_rank_exact_tails(n, w, got_lo, got_hi);
      CAPTURE(n, w);
      CHECK(got_lo == lo / double(1u << n));
      CHECK(got_hi == hi / double(1u << n));
    }
  }
}
