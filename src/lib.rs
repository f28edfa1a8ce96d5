//! cornerflow: a finite-element solver for 2D incompressible viscous flow (Stokes and
//! Navier–Stokes) on polygonal domains with sharp corners.
//!
//! The library is one module per pipeline stage; data flows strictly downwards:
//!
//! ```text
//! case -> geometry -> mesh -> fem (dofs, pattern, assembly) -> solver -> post -> output
//!                                                        corners (analysis of geometry + BCs)
//! ```
//!
//! Numerical kernels do no I/O; only [`output`] and the binary's CLI write files.
//! See `DEVELOPERS.md` for the architecture map and its invariants.
#![forbid(unsafe_code)]

pub mod case;
pub mod corners;
pub mod fem;
pub mod geometry;
pub mod mesh;
pub mod output;
pub mod post;
pub mod regression;
pub mod solver;
pub mod study;
pub mod validation;
