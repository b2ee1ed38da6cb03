// Statistics behind `earshot tally` (stats.hpp).
#include "stats.hpp"

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <utility>
#include <vector>

namespace earshot {
namespace stats {

// Continued fraction of the regularized incomplete beta function,
// I_x(a,b) = x^a (1−x)^b / (a·B(a,b)) · 1/(1+ d1/(1+ d2/(1+ …))) with
//   d_{2m+1} = −(a+m)(a+b+m)x / ((a+2m)(a+2m+1)),  d_{2m} = m(b−m)x / ((a+2m−1)(a+2m))
// (DLMF 8.17.22), evaluated by the modified Lentz method (Thompson & Barnett,
// J. Comput. Phys. 64, 1986). Converges quickly for x < (a+1)/(a+b+2).
namespace {

double beta_cf(double a, double b, double x) {
  const double tiny = 1e-300;
  double c = 1, d = 1 - (a + b) * x / (a + 1);
  if (std::abs(d) < tiny) d = tiny;
  d = 1 / d;
  double h = d;
  for (int m = 1; m <= 1000; ++m) {
    const double m2 = 2.0 * m;
    double aa = m * (b - m) * x / ((a + m2 - 1) * (a + m2));
    d = 1 + aa * d;
    if (std::abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (std::abs(c) < tiny) c = tiny;
    d = 1 / d;
    h *= d * c;
    aa = -(a + m) * (a + b + m) * x / ((a + m2) * (a + m2 + 1));
    d = 1 + aa * d;
    if (std::abs(d) < tiny) d = tiny;
    c = 1 + aa / c;
    if (std::abs(c) < tiny) c = tiny;
    d = 1 / d;
    const double del = d * c;
    h *= del;
    if (std::abs(del - 1) < 1e-16) break;
  }
  return h;
}

// Binomial(n, ½) probability of exactly k, through log-gamma.
double binom_half_pmf(long k, long n) {
  return std::exp(std::lgamma(n + 1.0) - std::lgamma(k + 1.0) - std::lgamma(n - k + 1.0) - n * std::log(2.0));
}

}  // namespace

// I_x(a, b), a, b > 0, 0 <= x <= 1.
double beta_inc(double a, double b, double x) {
  if (x <= 0) return 0;
  if (x >= 1) return 1;
  const double ln_front = a * std::log(x) + b * std::log1p(-x) - (std::lgamma(a) + std::lgamma(b) - std::lgamma(a + b));
  if (x < (a + 1) / (a + b + 2)) return std::exp(ln_front) * beta_cf(a, b, x) / a;
  return 1 - std::exp(ln_front) * beta_cf(b, a, 1 - x) / b;  // I_x(a,b) = 1 − I_{1−x}(b,a)
}

// P(T > t) for Student's t with nu degrees of freedom, t >= 0:
// ½·I_{ν/(ν+t²)}(ν/2, ½) (Abramowitz & Stegun 26.7.1 with 26.5.27).
double t_upper(double t, double nu) { return 0.5 * beta_inc(nu / 2, 0.5, nu / (nu + t * t)); }

// The p-quantile of Student's t, 0.5 < p < 1, by bisection on t_upper.
double t_quantile(double p, double nu) {
  const double q = 1 - p;
  double lo = 0, hi = 1;
  while (t_upper(hi, nu) > q) hi *= 2;
  for (int i = 0; i < 2000 && hi - lo > 1e-15 * hi; ++i) {
    const double mid = 0.5 * (lo + hi);
    if (t_upper(mid, nu) > q)
      lo = mid;
    else
      hi = mid;
  }
  return 0.5 * (lo + hi);
}

// P(X >= k), X ~ Binomial(n, ½): the one-tailed exact test.
double binom_half_upper(long k, long n) {
  if (k <= 0) return 1;
  if (k > n) return 0;
  double s = 0;
  for (long i = n; i >= k; --i) s += binom_half_pmf(i, n);  // small terms first
  return std::min(1.0, s);
}

// Two-sided exact test for p = ½: the probability of an outcome at least as
// unlikely as k, which by symmetry is 2·P(X <= min(k, n−k)), capped at 1.
double binom_half_two_sided(long k, long n) {
  if (n == 0) return 1;
  const long m = std::min(k, n - k);
  return std::min(1.0, 2 * binom_half_upper(n - m, n));
}

// Linear interpolation between order statistics (Hyndman & Fan 1996, type 7).
double quantile_sorted(const std::vector<double>& v, double p) {
  const double h = (double(v.size()) - 1) * p;
  const size_t lo = size_t(std::floor(h));
  if (lo + 1 >= v.size()) return v.back();
  return v[lo] + (h - double(lo)) * (v[lo + 1] - v[lo]);
}

Summary summarize(std::vector<double> v, double confidence) {
  Summary s;
  s.n = v.size();
  if (v.empty()) return s;
  std::sort(v.begin(), v.end());
  double sum = 0;
  for (double x : v) sum += x;
  s.mean = sum / double(v.size());
  s.min = v.front();
  s.max = v.back();
  s.median = quantile_sorted(v, 0.5);
  s.q1 = quantile_sorted(v, 0.25);
  s.q3 = quantile_sorted(v, 0.75);
  if (v.size() >= 2) {
    double ss = 0;
    for (double x : v) ss += (x - s.mean) * (x - s.mean);
    s.sd = std::sqrt(ss / double(v.size() - 1));
    const double half = t_quantile(0.5 + confidence / 2, double(v.size() - 1)) * s.sd / std::sqrt(double(v.size()));
    s.ci_lo = s.mean - half;
    s.ci_hi = s.mean + half;
  }
  const double iqr = s.q3 - s.q1;
  s.whisker_lo = s.q1;
  s.whisker_hi = s.q3;
  for (double x : v) {
    if (x >= s.q1 - 1.5 * iqr) s.whisker_lo = std::min(s.whisker_lo, x);
    if (x <= s.q3 + 1.5 * iqr) s.whisker_hi = std::max(s.whisker_hi, x);
    if (x < s.q1 - 1.5 * iqr || x > s.q3 + 1.5 * iqr) s.outliers.push_back(x);
  }
  return s;
}

// ---- Wilcoxon signed-rank test ---------------------------------------------------
// Method: Wilcoxon (1945), "Individual comparisons by ranking methods",
// Biometrics Bulletin 1(6):80–83. The large-sample approximation with the tie
// correction follows Hollander & Wolfe, Nonparametric Statistical Methods
// (2nd ed. 1999, chapter 3, the signed rank procedure; chapter and edition
// recalled from memory): under H0, E[W+] = n(n+1)/4 and
// Var[W+] = n(n+1)(2n+1)/24 − Σ_j (t_j³ − t_j)/48 over the groups of t_j tied |d|.

// The null distribution of W+ for n untied ranks: each of the 2^n sign
// patterns is equally likely, so P(W+ = s) = c_n(s) / 2^n where c_n(s) counts
// the subsets of {1..n} summing to s (c_k(s) = c_{k−1}(s) + c_{k−1}(s − k)).
// For n <= 50 every count is below C(50, 25) < 2^47 and every tail sum below
// 2^50: exact in 64-bit integers, then one rounding in the division.
void signed_rank_exact_tails(size_t n, long w, double& lower, double& upper) {
  const long total = long(n * (n + 1) / 2);
  std::vector<uint64_t> c(size_t(total) + 1, 0);
  c[0] = 1;
  for (long k = 1; k <= long(n); ++k)
    for (long s = k * (k + 1) / 2; s >= k; --s) c[size_t(s)] += c[size_t(s - k)];
  uint64_t lo = 0, hi = 0;
  for (long s = 0; s <= total; ++s) {
    if (s <= w) lo += c[size_t(s)];
    if (s >= w) hi += c[size_t(s)];
  }
  const double all = std::ldexp(1.0, int(n));
  lower = double(lo) / all;
  upper = double(hi) / all;
}

SignedRank signed_rank(const std::vector<double>& d) {
  SignedRank r;
  r.n = d.size();
  std::vector<std::pair<double, bool>> a;  // (|d|, d > 0)
  for (double x : d) {
    if (x == 0) {
      ++r.zeros;
      continue;
    }
    a.push_back({std::abs(x), x > 0});
  }
  r.used = a.size();
  if (a.empty()) return r;
  std::sort(a.begin(), a.end(), [](const std::pair<double, bool>& u, const std::pair<double, bool>& v) {
    return u.first < v.first;
  });
  // Average ranks over runs of equal |d|; each run of t adds t³ − t to the tie term.
  double w_plus = 0, w_minus = 0, tie_term = 0;
  for (size_t i = 0; i < a.size();) {
    size_t j = i;
    while (j < a.size() && a[j].first == a[i].first) ++j;
    const double t = double(j - i), rank = (double(i + 1) + double(j)) / 2;
    if (j - i > 1) {
      r.ties = true;
      tie_term += t * t * t - t;
    }
    for (size_t k = i; k < j; ++k) (a[k].second ? w_plus : w_minus) += rank;
    i = j;
  }
  r.w_plus = w_plus;
  r.w_minus = w_minus;
  r.statistic = std::min(w_plus, w_minus);
  const double n = double(r.used);
  if (r.zeros == 0 && !r.ties && r.used <= kSignedRankExactMax) {
    // Untied: W+ is a whole number. Two-sided: twice the smaller tail, capped at 1.
    r.exact = true;
    double lower, upper;
    signed_rank_exact_tails(r.used, long(w_plus), lower, upper);
    r.p = std::min(1.0, 2 * std::min(lower, upper));
    return r;
  }
  const double mean = n * (n + 1) / 4;
  const double sd = std::sqrt((n * (n + 1) * (2 * n + 1) - tie_term / 2) / 24);
  const double t = r.statistic;
  const double cc = t > mean ? 0.5 : t < mean ? -0.5 : 0.0;  // continuity correction towards the mean
  r.z = (t - mean - cc) / sd;
  r.p = std::min(1.0, std::erfc(std::abs(r.z) / std::sqrt(2.0)));  // 2·(1 − Φ(|z|))
  return r;
}

}  // namespace stats
}  // namespace earshot
