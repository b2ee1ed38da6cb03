// Streaming rational resampler: filter design (detmath, set-up time) and the
// polyphase stream. See resampler.hpp for the design and its measured figures.
#include "resampler.hpp"

#include <climits>
#include <cstring>

#include "detmath.hpp"

namespace earshot {
namespace {

int gcd_int(int a, int b) {
  while (b != 0) {
    const int t = a % b;
    a = b;
    b = t;
  }
  return a;
}

// Half-length K (in input samples) of the prototype for factors L/M.
// Kaiser's length formula with Δω = (stop − pass edge)·π/max(L, M) rad/sample
// at the up-rate, N − 1 = 2·K·L rounded up.
int design_half_length(int L, int M) {
  const int D = L > M ? L : M;
  const double dw = (Resampler::kStopbandEdge - Resampler::kPassbandEdge) * detmath::kPi / D;
  const double n_minus_1 = (Resampler::kDesignStopbandDb - 8.0) / (2.285 * dw);
  const double k = n_minus_1 / (2.0 * L);
  int K = static_cast<int>(k);  // k > 0: truncation, then round up
  if (static_cast<double>(K) < k) ++K;
  return K;
}

// Prototype FIR, N = 2KL+1 taps, at L·from_rate, DC gain L.
//   h[n] = sinc(r)·w(m),  m = n − K·L,  r = 2·fc·m with 2·fc = 0.95/max(L, M)
//   w(m) = I0(β·√(1 − (m/c)²)) / I0(β),  c = K·L
std::vector<float> design_prototype(int L, int M, int K) {
  const long long D = L > M ? L : M;
  const long long c = static_cast<long long>(K) * L;
  const long long N = 2 * c + 1;
  const double A = Resampler::kDesignStopbandDb;
  const double beta = 0.1102 * (A - 8.7);
  const double beta2 = beta * beta;
  const double i0_beta = detmath::bessel_i0_of_square(beta2);
  // 2·fc·m = (pass + stop)/2 · m / D = 19·m / (20·D), exactly representable
  // numerator and denominator, so r is correctly rounded.
  const long long num_scale = 19, den = 20 * D;
  std::vector<double> h(static_cast<size_t>(N));
  double sum = 0.0;
  for (long long n = 0; n < N; ++n) {
    const long long m = n - c;
    double s = 1.0;
    if (m != 0) {
      const double r = static_cast<double>(num_scale * m) / static_cast<double>(den);
      s = detmath::sin_pi(r) / (detmath::kPi * r);
    }
    // 1 − (m/c)² = (c − m)(c + m) / c², both products exact in double (c < 2^26).
    const double t = static_cast<double>((c - m) * (c + m)) / static_cast<double>(c * c);
    const double w = detmath::bessel_i0_of_square(beta2 * t) / i0_beta;
    h[static_cast<size_t>(n)] = s * w;
    sum += s * w;
  }
  const double scale = static_cast<double>(L) / sum;
  std::vector<float> out(static_cast<size_t>(N));
  for (long long n = 0; n < N; ++n) {
    float v = static_cast<float>(h[static_cast<size_t>(n)] * scale);
    if (v < Resampler::kTapFloor && v > -Resampler::kTapFloor) v = 0.0f;
    out[static_cast<size_t>(n)] = v;
  }
  return out;
}

}  // namespace

void Resampler::bytes_needed(int from_rate, int to_rate, double& held, double& design) {
  held = design = 0;
  if (from_rate < kRateMin || from_rate > kRateMax || to_rate < kRateMin || to_rate > kRateMax) return;
  const int g = gcd_int(from_rate, to_rate);
  const int L = to_rate / g;
  const int M = from_rate / g;
  if (L > kMaxFactor || M > kMaxFactor) return;
  if (L == 1 && M == 1) {
    held = 4.0 * sizeof(float);
    return;
  }
  const double K = design_half_length(L, M);
  const double taps = 2 * K + 1;
  const double N = 2 * K * L + 1;
  held = sizeof(float) * (N + double(L) * taps + 2 * taps);  // prototype, bank [L][taps], history
  design = (sizeof(double) + sizeof(float)) * N;              // window values and the float copy
}

bool Resampler::init(int from_rate, int to_rate, std::string& error) {
  if (from_rate < kRateMin || from_rate > kRateMax) {
    error = "resampler: input rate " + std::to_string(from_rate) + " Hz is outside " +
            std::to_string(kRateMin) + " .. " + std::to_string(kRateMax) + " Hz (converting " +
            std::to_string(from_rate) + " Hz to " + std::to_string(to_rate) + " Hz)";
    return false;
  }
  if (to_rate < kRateMin || to_rate > kRateMax) {
    error = "resampler: output rate " + std::to_string(to_rate) + " Hz is outside " +
            std::to_string(kRateMin) + " .. " + std::to_string(kRateMax) + " Hz (converting " +
            std::to_string(from_rate) + " Hz to " + std::to_string(to_rate) + " Hz)";
    return false;
  }
  const int g = gcd_int(from_rate, to_rate);
  const int L = to_rate / g;
  const int M = from_rate / g;
  if (L > kMaxFactor || M > kMaxFactor) {
    error = "resampler: converting " + std::to_string(from_rate) + " Hz to " +
            std::to_string(to_rate) + " Hz reduces to up " + std::to_string(L) + " / down " +
            std::to_string(M) + " (gcd " + std::to_string(g) + "); at most " +
            std::to_string(kMaxFactor) + " each is supported";
    return false;
  }

  from_rate_ = from_rate;
  to_rate_ = to_rate;
  up_ = L;
  down_ = M;
  identity_ = (L == 1 && M == 1);
  if (identity_) {
    half_ = 0;
    taps_ = 1;
    prototype_.assign(1, 1.0f);
    bank_.assign(1, 1.0f);
    history_.assign(2, 0.0f);
    reset();
    return true;
  }

  half_ = design_half_length(L, M);
  taps_ = 2 * half_ + 1;
  prototype_ = design_prototype(L, M, half_);
  const size_t N = prototype_.size();
  bank_.assign(static_cast<size_t>(L) * taps_, 0.0f);
  for (int p = 0; p < L; ++p) {
    for (int j = 0; j < taps_; ++j) {
      const size_t src = static_cast<size_t>(p) + static_cast<size_t>(taps_ - 1 - j) * L;
      if (src < N) bank_[static_cast<size_t>(p) * taps_ + j] = prototype_[src];
    }
  }
  history_.assign(2 * static_cast<size_t>(taps_), 0.0f);
  reset();
  return true;
}

int Resampler::max_output(int n_in) const {
  if (up_ <= 0 || n_in <= 0) return 0;
  const long long n = (static_cast<long long>(n_in) * up_ + down_ - 1) / down_;
  return n > INT_MAX ? INT_MAX : static_cast<int>(n);
}

void Resampler::reset() {
  for (float& v : history_) v = 0.0f;
  pos_ = 0;
  phase_ = 0;
}

double Resampler::delay_in_input_samples() const { return static_cast<double>(half_); }

int Resampler::process(const float* in, int n, float* out) {
  if (up_ <= 0 || in == nullptr || out == nullptr || n <= 0) return 0;
  if (identity_) {
    if (in != out) std::memmove(out, in, static_cast<size_t>(n) * sizeof(float));
    return n;
  }
  const int T = taps_;
  const int L = up_;
  const int M = down_;
  float* const hist = history_.data();
  const float* const bank = bank_.data();
  int produced = 0;
  for (int i = 0; i < n; ++i) {
    float v = in[i];
    if (v < kHistoryFloor && v > -kHistoryFloor) v = 0.0f;
    hist[pos_] = v;
    hist[pos_ + T] = v;
    pos_ = (pos_ + 1 == T) ? 0 : pos_ + 1;
    const float* const x = hist + pos_;  // oldest … newest
    while (phase_ < L) {
      const float* const c = bank + static_cast<size_t>(phase_) * T;
      float acc = 0.0f;
      for (int j = 0; j < T; ++j) acc += c[j] * x[j];
      out[produced++] = acc;
      phase_ += M;
    }
    phase_ -= L;
  }
  return produced;
}

}  // namespace earshot
