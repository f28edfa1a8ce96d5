//! Resetting the vector-register state after faer's dense kernels.
//!
//! faer's dense kernels (the hand-written AVX-512 microkernels of its matrix-product crate)
//! return with the upper halves of the vector registers still in use: they end without
//! `vzeroupper`. Until the thread next executes `vzeroupper`, each legacy-SSE instruction of
//! code compiled for the baseline x86-64 target (all of ours, and the standard library's)
//! carries a dependency on those upper halves, and the processor runs it far slower.
//!
//! Measured on this machine (docs/performance.md): the IMEX right-hand-side kernel took
//! 286–358 ns per cell on rayon's two workers after a faer matrix product had run there,
//! against 93–125 ns once each worker had executed `vzeroupper`.
//!
//! [`reset_after_faer`] executes `vzeroupper` on the calling thread and on every worker of
//! rayon's current pool; [`reset_current_thread`] on the calling thread only (for faer work
//! done on one thread while the pool may be busy). The solver calls them after each
//! factorisation and each faer solve, so the kernels that follow run at full speed on every
//! thread. A call costs a few microseconds; it is a no-op without AVX or off x86-64.
//!
//! # References
//! Intel, *Intel 64 and IA-32 Architectures Optimization Reference Manual*, section
//! "Mixing AVX code with SSE code" (the transition penalty and `vzeroupper`; from memory).

/// Executes `vzeroupper` here and on every thread of rayon's current pool (module docs).
pub fn reset_after_faer() {
    reset_current_thread();
    if rayon::current_num_threads() > 1 {
        rayon::broadcast(|_| reset_current_thread());
    }
}

/// Executes `vzeroupper` on the calling thread only (module docs).
#[cfg(target_arch = "x86_64")]
pub fn reset_current_thread() {
    if let Some(avx) = pulp::core_arch::x86::Avx::try_new() {
        avx._mm256_zeroupper();
    }
}

/// Nothing to reset off x86-64.
#[cfg(not(target_arch = "x86_64"))]
pub fn reset_current_thread() {}
