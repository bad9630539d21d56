// FFTW plan cache: one plan per length, made under a mutex, executed on new arrays.
#include "dsp/fft_plan.hpp"

#include <fftw3.h>

#include <cassert>
#include <cstring>
#include <map>
#include <memory>
#include <mutex>

namespace periodfit::dsp {
namespace {

struct FftwFree {
  void operator()(void* p) const { fftw_free(p); }
};

template <class T>
std::unique_ptr<T[], FftwFree> fftw_array(std::size_t n) {
  auto* p = static_cast<T*>(fftw_malloc(sizeof(T) * (n == 0 ? 1 : n)));
  if (p == nullptr) throw std::bad_alloc();
  return std::unique_ptr<T[], FftwFree>(p);
}

struct PlanCache {
  std::mutex mutex;
  std::map<int, fftw_plan> plans;  // never destroyed: plans live as long as the process
};

PlanCache& cache() {
  static PlanCache* instance = [] {
    // libfftw3_threads: makes every later planner call in the process thread-safe.
    fftw_make_planner_thread_safe();
    return new PlanCache;
  }();
  return *instance;
}

fftw_plan plan_for(int n) {
  PlanCache& c = cache();
  std::lock_guard<std::mutex> lock(c.mutex);
  auto it = c.plans.find(n);
  if (it != c.plans.end()) return it->second;
  // Planned on fftw_malloc'd arrays, so executing on any array with FFTW's alignment is legal.
  auto in = fftw_array<double>(static_cast<std::size_t>(n));
  auto out = fftw_array<fftw_complex>(static_cast<std::size_t>(n / 2 + 1));
  fftw_plan plan = fftw_plan_dft_r2c_1d(n, in.get(), out.get(), FFTW_ESTIMATE | FFTW_PRESERVE_INPUT);
  if (plan == nullptr) throw std::bad_alloc();
  c.plans.emplace(n, plan);
  return plan;
}

}  // namespace

void real_dft(std::span<const double> in, std::span<std::complex<double>> out) {
  const int n = static_cast<int>(in.size());
  assert(n >= 1 && out.size() == in.size() / 2 + 1);
  const fftw_plan plan = plan_for(n);
  // std::complex<double> is layout-compatible with fftw_complex (C++ [complex.numbers]/4).
  auto* out_ptr = reinterpret_cast<fftw_complex*>(out.data());
  auto* in_ptr = const_cast<double*>(in.data());  // FFTW_PRESERVE_INPUT: not written
  const bool aligned = fftw_alignment_of(in_ptr) == 0 &&
                       fftw_alignment_of(reinterpret_cast<double*>(out_ptr)) == 0;
  if (aligned) {
    fftw_execute_dft_r2c(plan, in_ptr, out_ptr);
    return;
  }
  auto in_copy = fftw_array<double>(in.size());
  auto out_copy = fftw_array<fftw_complex>(out.size());
  std::memcpy(in_copy.get(), in.data(), sizeof(double) * in.size());
  fftw_execute_dft_r2c(plan, in_copy.get(), out_copy.get());
  std::memcpy(static_cast<void*>(out.data()), out_copy.get(), sizeof(fftw_complex) * out.size());
}

int fft_friendly_size(int at_least) {
  for (int m = at_least < 1 ? 1 : at_least;; ++m) {
    int r = m;
    for (int p : {2, 3, 5, 7})
      while (r % p == 0) r /= p;
    if (r == 1) return m;
  }
}

}  // namespace periodfit::dsp
