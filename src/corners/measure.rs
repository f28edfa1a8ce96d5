//! Measured local regularity: after a solve, the local exponent of every singular corner is
//! fitted from the finite-element solution and set beside the predicted one.
//!
//! For a corner singularity `u ~ r^λ`, the gradient energy in a disc of radius `r` around the
//! corner grows like `E(r) = ∫_{B_r} |∇u|² ~ r^{2λ}`; [`fit_local_exponent`] fits `λ` over
//! radii between a few local mesh sizes and a fraction of the distance to the next corner
//! ([`fit_radius_range`]). Takes the corner reports, the mesh and the field; returns one
//! [`MeasuredExponent`] per corner classified as singular. No I/O.

use super::analysis::{Classification, CornerReport, nearest_corner_distance};
use super::fit::{
    ExponentFit, FitError, FitRangeParams, fit_local_exponent, fit_radius_range, geometric_radii,
    try_gradient_energy_in_discs,
};
use crate::fem::FlowField;
use crate::geometry::{BoundaryLoop, Domain, Point};
use crate::mesh::Mesh;

/// Number of radii sampled per fit.
const N_RADII: usize = 10;

/// The predicted and the fitted exponent of one corner.
#[derive(Clone, Debug, serde::Serialize)]
pub struct MeasuredExponent {
    /// Index into the corner reports.
    pub corner: usize,
    pub location: Point,
    /// `Re λ₁` from the wedge eigenvalue problem.
    pub predicted: f64,
    /// The fit, or why there is none (e.g. a mesh too coarse near the corner).
    pub fit: Result<ExponentFit, String>,
    /// The predicted non-polynomial exponent (real part, either symmetry family) closest to the
    /// fitted one. When it is not the leading one, the leading mode is weak or absent at this
    /// corner (e.g. by symmetry of the flow) and the next mode dominates the resolved range.
    pub closest_predicted: Option<f64>,
}

/// Fits the local exponent at every corner classified [`Classification::SingularGradient`].
///
/// The outer fit radius is limited by the distance to the next corner and by the diameter of
/// the corner's own loop (a body's far side carries its own flow features).
pub fn measure_singular_corners(
    domain: &Domain,
    mesh: &Mesh,
    field: &FlowField,
    reports: &[CornerReport],
) -> Vec<MeasuredExponent> {
    reports
        .iter()
        .enumerate()
        .filter(|(_, r)| r.classification == Classification::SingularGradient)
        .filter_map(|(index, r)| {
            let predicted = r.leading.as_ref()?.re;
            let loop_size = domain.loops().nth(r.loop_index).map_or(f64::INFINITY, loop_diameter);
            let fit = fit_corner(mesh, field, reports, index, loop_size).map_err(|e| e.to_string());
            let closest_predicted = fit.as_ref().ok().and_then(|f| closest_exponent(r, f.lambda));
            Some(MeasuredExponent {
                corner: index,
                location: r.location,
                predicted,
                fit,
                closest_predicted,
            })
        })
        .collect()
}

fn fit_corner(
    mesh: &Mesh,
    field: &FlowField,
    reports: &[CornerReport],
    index: usize,
    loop_size: f64,
) -> Result<ExponentFit, FitError> {
    let center = reports[index].location;
    let h_local = local_mesh_size(mesh, center);
    let next = nearest_corner_distance(reports, index).unwrap_or(f64::INFINITY);
    let far = next.min(loop_size).min(domain_diameter(mesh));
    let (r_min, r_max) = fit_radius_range(h_local, far, &FitRangeParams::default())?;
    let radii = geometric_radii(r_min, r_max, N_RADII);
    let energies = try_gradient_energy_in_discs(mesh, field, center, &radii)?;
    fit_local_exponent(&radii, &energies)
}

fn closest_exponent(report: &CornerReport, fitted: f64) -> Option<f64> {
    report
        .exponents
        .iter()
        .filter(|e| !e.polynomial)
        .map(|e| e.re)
        .min_by(|a, b| (a - fitted).abs().total_cmp(&(b - fitted).abs()))
}

/// Mean edge length of the triangles that touch the vertex nearest to `point`.
pub fn local_mesh_size(mesh: &Mesh, point: Point) -> f64 {
    let dist2 = |p: Point| (p[0] - point[0]).powi(2) + (p[1] - point[1]).powi(2);
    let Some(vertex) =
        (0..mesh.n_vertices).min_by(|&a, &b| dist2(mesh.nodes[a]).total_cmp(&dist2(mesh.nodes[b])))
    else {
        return f64::NAN;
    };
    let (mut total, mut count) = (0.0, 0usize);
    for cell in mesh.cells.iter().filter(|c| c[..3].contains(&vertex)) {
        for k in 0..3 {
            let (a, b) = (mesh.nodes[cell[k]], mesh.nodes[cell[(k + 1) % 3]]);
            total += ((b[0] - a[0]).powi(2) + (b[1] - a[1]).powi(2)).sqrt();
            count += 1;
        }
    }
    total / count as f64
}

/// Diagonal of the bounding box of the mesh vertices.
pub(super) fn domain_diameter(mesh: &Mesh) -> f64 {
    bounding_diagonal(&mesh.nodes[..mesh.n_vertices])
}

fn loop_diameter(lp: &BoundaryLoop) -> f64 {
    bounding_diagonal(&lp.points)
}

/// Diagonal of the bounding box of `points`.
fn bounding_diagonal(points: &[Point]) -> f64 {
    let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
    for p in points {
        for k in 0..2 {
            lo[k] = lo[k].min(p[k]);
            hi[k] = hi[k].max(p[k]);
        }
    }
    ((hi[0] - lo[0]).powi(2) + (hi[1] - lo[1]).powi(2)).sqrt()
}
