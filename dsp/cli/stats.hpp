// Statistics behind `earshot tally` (native only; libm is used freely): the
// regularized incomplete beta function, Student's t, exact binomial tests for
// p = 1/2, a five-number summary with a t-based confidence interval, and the
// Wilcoxon signed-rank test of paired differences.
// tests/native/stats_test.cpp checks each against SciPy reference values.
#pragma once
#include <cmath>
#include <cstddef>
#include <vector>

namespace earshot {
namespace stats {

// I_x(a, b), the regularized incomplete beta function; a, b > 0, 0 <= x <= 1.
double beta_inc(double a, double b, double x);

// P(T > t) for Student's t with nu degrees of freedom, t >= 0.
double t_upper(double t, double nu);

// The p-quantile of Student's t, 0.5 < p < 1.
double t_quantile(double p, double nu);

// P(X >= k), X ~ Binomial(n, 1/2): the one-tailed exact test.
double binom_half_upper(long k, long n);

// Two-sided exact test for p = 1/2: the probability of an outcome at least as
// unlikely as k, 2·P(X <= min(k, n−k)) capped at 1.
double binom_half_two_sided(long k, long n);

struct Summary {
  size_t n = 0;
  double mean = NAN, sd = NAN, ci_lo = NAN, ci_hi = NAN;
  double median = NAN, q1 = NAN, q3 = NAN, min = NAN, max = NAN;
  double whisker_lo = NAN, whisker_hi = NAN;  // Tukey: furthest data within 1.5·IQR of the box
  std::vector<double> outliers;
};

// Linear interpolation between order statistics (Hyndman & Fan 1996, type 7);
// v sorted ascending, not empty, 0 <= p <= 1.
double quantile_sorted(const std::vector<double>& v, double p);

// n, mean, sample standard deviation, the two-sided `confidence` interval of
// the mean from Student's t (n >= 2), quartiles (type 7), min, max, Tukey
// whiskers and outliers.
Summary summarize(std::vector<double> v, double confidence);

// The Wilcoxon signed-rank test of paired differences d = x − y against a
// distribution symmetric about 0, two-sided (Wilcoxon 1945, "Individual
// comparisons by ranking methods", Biometrics Bulletin 1(6):80–83). Zero
// differences are dropped before ranking (Wilcoxon's own treatment;
// scipy.stats.wilcoxon's default zero_method='wilcox'); |d| gets average ranks
// over ties.
//   exact:  no zero, no tie and at most kSignedRankExactMax differences: the
//           exact null distribution of W+ (every sign pattern equally likely),
//           p = min(1, 2·min(P(W+ <= w), P(W+ >= w))) — as
//           scipy.stats.wilcoxon(method='exact');
//   normal: otherwise, the normal approximation with the tie correction of the
//           variance and a continuity correction of ½ towards the mean — as
//           scipy.stats.wilcoxon(method='approx', correction=True).
struct SignedRank {
  size_t n = 0;      // differences given
  size_t zeros = 0;  // of them zero, dropped
  size_t used = 0;   // ranked: n − zeros
  bool ties = false;  // equal |d| among those ranked
  bool exact = false;
  double w_plus = NAN, w_minus = NAN;  // rank sums of the positive and the negative differences
  double statistic = NAN;              // min(W+, W−), the two-sided statistic scipy reports
  double z = NAN;                      // normal approximation only
  double p = NAN;                      // two-sided; NaN when nothing is left to rank
};
constexpr size_t kSignedRankExactMax = 50;  // scipy.stats.wilcoxon's limit for method='auto'

SignedRank signed_rank(const std::vector<double>& d);

// P(W+ <= w) and P(W+ >= w) under the null hypothesis for n untied, non-zero
// differences, 1 <= n <= kSignedRankExactMax, w whole.
void signed_rank_exact_tails(size_t n, long w, double& lower, double& upper);

}  // namespace stats
}  // namespace earshot
