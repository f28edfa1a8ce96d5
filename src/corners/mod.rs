//! Corner-singularity analysis: takes a [`Domain`](crate::geometry::Domain) and its boundary
//! conditions and returns, per polygon corner, the exponents of the Stokes operator, the
//! predicted regularity, a classification, Moffatt-eddy ratios, a flag for discontinuous
//! velocity data and the mesh-grading exponent that restores the optimal P2 rate.
//!
//! * [`roots`]: argument-principle complex root finder (pure numerics).
//! * [`wedge`]: eigenvalue equations of the Stokes wedge for every pair of side conditions.
//! * [`analysis`]: per-corner reports ([`analyse_corners`]) and the terminal table.
//! * [`fit`]: local exponent fit from gradient energies in discs around a corner.
//! * [`eddies`]: Moffatt eddies measured on the corner bisector after a solve.
//!
//! **Invariant:** this module reads geometry and boundary-condition kinds (and, for the
//! discontinuity flag, the prescribed velocity at the corner point); it never meshes or
//! solves, and only [`fit::gradient_energy_in_discs`] looks at a mesh and a flow field.

pub mod analysis;
pub mod eddies;
pub mod fit;
pub mod measure;
pub mod roots;
pub mod wedge;

pub use analysis::{
    AnalysisParams, Classification, CornerAnalysis, CornerError, CornerReport, EddyRatios,
    SideReport, analyse_corners, corner_table, nearest_corner_distance, side_kind,
    try_analyse_corners,
};
pub use eddies::{
    Eddy, EddyError, EddyParams, EddySequence, ProfileSample, corner_bisector, detect_eddies,
    measure_eddies,
};
pub use fit::{
    ExponentFit, FitError, FitRangeParams, fit_local_exponent, fit_radius_range, geometric_radii,
    gradient_energy_in_discs, try_gradient_energy_in_discs,
};
pub use measure::{MeasuredExponent, local_mesh_size, measure_singular_corners};
pub use wedge::{Exponent, ExponentSearch, Family, SideKind, WedgeSpectrum, wedge_exponents};
