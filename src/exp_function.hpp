#pragma once
// Internal to radmode_core: the exponential for the structure's hot loops (thousands of calls
// per model), std::exp's results without its error-reporting wrapper where the C library
// exports the function behind that wrapper.

namespace radmode::detail {

using ExpFunction = double (*)(double);

/// A function that returns std::exp(x), bit for bit, for every x. With GNU libc on x86-64 it
/// is the library's own exp kernel, which std::exp calls through a wrapper that only sets
/// errno on overflow and underflow (about half of the call's time in a track run); elsewhere,
/// or if that kernel is not found or disagrees with std::exp on a set of checks, a function
/// that calls std::exp. Resolved once; thread-safe.
ExpFunction exp_function();

} // namespace radmode::detail
