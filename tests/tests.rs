//! The integration test binary (one binary, themed modules; see DEVELOPERS.md).

mod util;

mod case_files;
mod cli;
mod corners;
mod forces;
mod mesh_props;
mod navier_stokes;
mod pipeline;
mod stokes;
mod study;
mod validation;
mod vtk_roundtrip;
