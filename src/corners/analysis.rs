//! Per-corner analysis of a domain: takes a [`Domain`], the boundary condition of every part
//! (indexed by [`PartId`](crate::geometry::PartId)) and the viscous form, and returns a
//! [`CornerReport`] for every polygon vertex that is a corner or where the condition changes.
//!
//! For each reported vertex: the fluid-side angle `ω` (fluid on the left of every loop edge,
//! so the angle at vertex `i` between the incoming edge `i−1` and the outgoing edge `i`,
//! measured on the left), the two parts and their condition kinds, the first exponents of
//! the wedge ([`wedge_exponents`]), the leading singular exponent `λ₁` (smallest real part
//! among non-polynomial modes), the regularity it implies (velocity in `H^{1+s}`, pressure in
//! `H^s` for every `s < Re λ₁`; Dauge 1989), a [`Classification`], Moffatt-eddy ratios when
//! `λ₁` is complex, a flag for discontinuous prescribed velocity, and the grading exponent
//! `μ = min(1, Re λ₁ / k)`, `k = 2`: graded meshes with any grading parameter strictly below
//! it recover the optimal P2 rate `O(h²)` (Babuška 1970; Apel, Sändig & Whiteman 1996;
//! benchmarks.md §7.3).
//!
//! Polygons also approximate smooth curves, so a vertex whose angle is within
//! [`AnalysisParams::straight_tolerance_deg`] of 180° is treated as a point of a discretised
//! smooth curve: it is reported only if the condition changes there (and then analysed as a
//! 180° corner). Loops declared as circles have no geometric corners.

use std::collections::HashMap;
use std::f64::consts::PI;
use std::fmt::Write as _;

use crate::case::BoundaryCondition;
use crate::fem::ViscousForm;
use crate::geometry::{BoundaryLoop, Domain, Point};

use super::wedge::{
    Exponent, ExponentSearch, SideKind, WedgeError, WedgeSpectrum, wedge_exponents,
};

/// Controls of [`try_analyse_corners`].
#[derive(Clone, Debug, PartialEq)]
pub struct AnalysisParams {
    /// A polygon vertex this close to straight (in degrees) is treated as a discretised
    /// smooth curve. Default 15°.
    pub straight_tolerance_deg: f64,
    /// How many exponents each report lists (the leading one is always kept). Default 4.
    pub n_exponents: usize,
    /// Prescribed velocities at a corner differing by more than this (relative to
    /// `max(1, |u|)`) count as discontinuous. Default 1e-9.
    pub data_tolerance: f64,
    /// Times at which prescribed velocities are compared. Default `[0, 1]`.
    pub data_times: Vec<f64>,
    /// Exponent search box and root-finder controls.
    pub search: ExponentSearch,
}

impl Default for AnalysisParams {
    fn default() -> Self {
        AnalysisParams {
            straight_tolerance_deg: 15.0,
            n_exponents: 4,
            data_tolerance: 1e-9,
            data_times: vec![0.0, 1.0],
            search: ExponentSearch::default(),
        }
    }
}

/// One side of a corner: its part and condition.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct SideReport {
    pub part: String,
    /// Condition name (`no-slip`, `velocity`, `slip`, `outflow`).
    pub condition: String,
    /// The homogeneous operator the condition imposes at the corner.
    pub kind: SideKind,
}

/// What the leading exponent means for a Taylor–Hood P2–P1 solution.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[non_exhaustive]
pub enum Classification {
    /// `Re λ₁ < 1`: velocity gradient and pressure are unbounded at the corner
    /// (`∇u ~ r^{λ₁−1}`); wall stresses there are singular.
    SingularGradient,
    /// `1 ≤ Re λ₁ < 2`: bounded gradient, but `u ∉ H³` locally, so P2 velocity cannot
    /// converge at `h²` in the energy norm on quasi-uniform meshes (rate `h^{Re λ₁}`).
    LimitsQuadraticRate,
    /// `Re λ₁ ≥ 2` (or no non-polynomial mode): the corner does not limit the P2 rate.
    Smooth,
    /// Prescribed velocity jumps at the corner: `∇u ∉ L²` there, wall forces near the corner
    /// diverge; this overrides the exponent-based classes.
    DiscontinuousData,
    /// The vertex could not be analysed (see the report's notes); only from
    /// [`analyse_corners`], which does not return errors.
    NotAnalysed,
}

impl Classification {
    /// The class implied by the real part of the leading exponent (thresholds 1 and 2: the
    /// gradient `r^{λ−1}` is bounded iff `Re λ ≥ 1`; P2 needs `u ∈ H³`, i.e. `Re λ ≥ 2`).
    pub fn from_leading(re_lambda: Option<f64>) -> Self {
        match re_lambda {
            Some(re) if re < 1.0 => Classification::SingularGradient,
            Some(re) if re < 2.0 => Classification::LimitsQuadraticRate,
            _ => Classification::Smooth,
        }
    }

    fn label(self) -> &'static str {
        match self {
            Classification::SingularGradient => "singular-gradient",
            Classification::LimitsQuadraticRate => "limits-h2",
            Classification::Smooth => "smooth",
            Classification::DiscontinuousData => "discontinuous-data",
            Classification::NotAnalysed => "NOT ANALYSED",
        }
    }
}

/// Ratios between successive Moffatt eddies for a complex leading exponent `λ = p + iq`
/// (benchmarks.md §2.3; Moffatt 1964): eddy boundaries recur at radius ratio `e^{π/q}`.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct EddyRatios {
    /// Linear size ratio of successive eddies, `e^{π/q}`.
    pub size_ratio: f64,
    /// Ratio of successive stream-function extrema, `e^{π(p+1)/q}`.
    pub psi_ratio: f64,
    /// Ratio of successive velocity magnitudes, `e^{πp/q}`.
    pub velocity_ratio: f64,
}

impl EddyRatios {
    /// Ratios for `λ = p + iq` with `q > 0`; `None` for a real exponent.
    pub fn from_exponent(lambda: &Exponent) -> Option<Self> {
        if !lambda.is_complex() {
            return None;
        }
        let (p, q) = (lambda.re, lambda.im);
        Some(EddyRatios {
            size_ratio: (PI / q).exp(),
            psi_ratio: (PI * (p + 1.0) / q).exp(),
            velocity_ratio: (PI * p / q).exp(),
        })
    }
}

/// The analysis of one polygon vertex.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct CornerReport {
    pub loop_name: String,
    /// 0 for the outer loop, `k` for hole `k − 1`.
    pub loop_index: usize,
    pub vertex: usize,
    pub location: Point,
    /// Geometric fluid-side angle in degrees, in `(0, 360]`.
    pub angle_deg: f64,
    /// Angle used for the exponents (180° for a near-straight vertex or a circle loop).
    pub analysed_angle_deg: f64,
    /// Side along the incoming edge `i − 1`.
    pub incoming: SideReport,
    /// Side along the outgoing edge `i`.
    pub outgoing: SideReport,
    /// The first exponents (`im > 0` stands for the pair `re ± i·im`).
    pub exponents: Vec<Exponent>,
    /// Leading singular exponent; `None` if no non-polynomial mode has `Re λ` below the
    /// search cap.
    pub leading: Option<Exponent>,
    /// `Re λ₁`: velocity in `H^{1+s}` and pressure in `H^s` near the corner for every
    /// `s < regularity` (`None`: no limit found below the search cap).
    pub regularity: Option<f64>,
    pub classification: Classification,
    pub eddies: Option<EddyRatios>,
    /// Prescribed velocities of the two sides differ at the vertex.
    pub discontinuous_data: bool,
    /// `min(1, Re λ₁ / 2)`: grade with any parameter strictly below it (1: no grading).
    pub grading_exponent: f64,
    pub notes: Vec<String>,
}

/// All reports of a domain plus the vertex bookkeeping.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct CornerAnalysis {
    pub reports: Vec<CornerReport>,
    /// Polygon vertices examined (all loops).
    pub n_vertices: usize,
    /// Vertices treated as points of a smooth curve (not reported).
    pub n_smooth: usize,
}

impl CornerAnalysis {
    /// [`corner_table`] followed by a line counting the vertices treated as smooth.
    pub fn table(&self) -> String {
        let mut s = corner_table(&self.reports);
        let _ = writeln!(
            s,
            "{} corner(s) reported; {} of {} polygon vertices treated as a discretised smooth curve",
            self.reports.len(),
            self.n_smooth,
            self.n_vertices
        );
        s
    }
}

/// Why a domain could not be analysed.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum CornerError {
    #[error("loop `{loop_name}` has {n_points} points and {n_parts} edge parts (needs ≥ 3, equal)")]
    MalformedLoop { loop_name: String, n_points: usize, n_parts: usize },
    #[error(
        "loop `{loop_name}` is oriented the wrong way (signed area {signed_area:e}; the outer loop must be counter-clockwise, holes clockwise)"
    )]
    WrongOrientation { loop_name: String, signed_area: f64 },
    #[error(
        "loop `{loop_name}`, vertex {vertex}: an adjacent edge has zero length or a coordinate is not finite"
    )]
    DegenerateVertex { loop_name: String, vertex: usize },
    #[error("boundary part {part} (`{name}`) has no boundary condition ({n_conditions} given)")]
    MissingCondition { part: usize, name: String, n_conditions: usize },
    #[error("loop `{loop_name}`, vertex {vertex}: {source}")]
    Exponents { loop_name: String, vertex: usize, source: WedgeError },
}

/// Reports every corner of `domain` with the default [`AnalysisParams`].
///
/// `conditions[k]` is the condition of part `k`. This entry point never fails: a vertex that
/// cannot be analysed (part without a condition, repeated point, failed root search) is
/// still reported, with [`Classification::NotAnalysed`], the error message in `notes`, no
/// exponents and `leading = None`. Use [`try_analyse_corners`] for the typed error, custom
/// parameters and the count of vertices treated as smooth.
pub fn analyse_corners(
    domain: &Domain,
    conditions: &[BoundaryCondition],
    form: ViscousForm,
) -> Vec<CornerReport> {
    let params = AnalysisParams::default();
    let mut cache = HashMap::new();
    let mut reports = Vec::new();
    for (loop_index, lp) in domain.loops().enumerate() {
        let problem = loop_problem(lp, loop_index);
        for vertex in 0..lp.points.len() {
            let ctx =
                VertexContext { domain, conditions, form, params: &params, loop_index, lp, vertex };
            if let Some(e) = &problem {
                reports.push(ctx.failed(e.clone()));
                continue;
            }
            match ctx.analyse(&mut cache) {
                Ok(Some(r)) => reports.push(r),
                Ok(None) => {}
                Err(e) => reports.push(ctx.failed(e)),
            }
        }
    }
    reports
}

/// Analyses every vertex of every loop of `domain` (outer loop first, then holes).
///
/// # Errors
/// [`CornerError::MalformedLoop`], [`CornerError::WrongOrientation`],
/// [`CornerError::DegenerateVertex`] for bad geometry,
/// [`CornerError::MissingCondition`] when `conditions` has no entry for a part used by an
/// edge, [`CornerError::Exponents`] when the exponent search fails.
pub fn try_analyse_corners(
    domain: &Domain,
    conditions: &[BoundaryCondition],
    form: ViscousForm,
    params: &AnalysisParams,
) -> Result<CornerAnalysis, CornerError> {
    let mut cache = HashMap::new();
    let mut out = CornerAnalysis { reports: Vec::new(), n_vertices: 0, n_smooth: 0 };
    for (loop_index, lp) in domain.loops().enumerate() {
        if let Some(e) = loop_problem(lp, loop_index) {
            return Err(e);
        }
        for vertex in 0..lp.points.len() {
            let ctx = VertexContext { domain, conditions, form, params, loop_index, lp, vertex };
            out.n_vertices += 1;
            match ctx.analyse(&mut cache)? {
                Some(r) => out.reports.push(r),
                None => out.n_smooth += 1,
            }
        }
    }
    Ok(out)
}

/// Distance from corner `index` to the nearest other reported corner (any loop): the
/// natural scale for the outer fit radius ([`fit_radius_range`](super::fit_radius_range)).
/// `None` when `index` is out of range or there is no other corner.
pub fn nearest_corner_distance(reports: &[CornerReport], index: usize) -> Option<f64> {
    let p = reports.get(index)?.location;
    reports
        .iter()
        .enumerate()
        .filter(|&(j, _)| j != index)
        .map(|(_, r)| (r.location[0] - p[0]).hypot(r.location[1] - p[1]))
        .filter(|d| d.is_finite())
        .min_by(f64::total_cmp)
}

/// Shape errors of a whole loop: too few points, mismatched part list, wrong orientation.
fn loop_problem(lp: &BoundaryLoop, loop_index: usize) -> Option<CornerError> {
    let (n_points, n_parts) = (lp.points.len(), lp.edge_parts.len());
    if n_points < 3 || n_parts != n_points {
        return Some(CornerError::MalformedLoop { loop_name: lp.name.clone(), n_points, n_parts });
    }
    let signed_area = lp.signed_area();
    let expected_positive = loop_index == 0;
    if signed_area.is_finite() && (signed_area > 0.0) != expected_positive {
        return Some(CornerError::WrongOrientation { loop_name: lp.name.clone(), signed_area });
    }
    None
}

/// A plain-text table of the reports, one line per corner, columns aligned.
pub fn corner_table(reports: &[CornerReport]) -> String {
    let header = ["loop", "vertex", "x", "y", "angle°", "sides", "λ1", "class", "eddy ratio", "μ"];
    let rows: Vec<[String; 10]> = reports.iter().map(table_row).collect();
    let mut widths = header.map(|h| h.chars().count());
    for r in &rows {
        for (w, cell) in widths.iter_mut().zip(r.iter()) {
            *w = (*w).max(cell.chars().count());
        }
    }
    let mut s = String::new();
    let line = |cells: &[String], s: &mut String| {
        let padded: Vec<String> = cells
            .iter()
            .zip(widths.iter())
            .map(|(c, &w)| format!("{c}{}", " ".repeat(w - c.chars().count())))
            .collect();
        let _ = writeln!(s, "{}", padded.join("  ").trim_end());
    };
    line(&header.map(String::from), &mut s);
    for r in &rows {
        line(r, &mut s);
    }
    s
}

fn table_row(r: &CornerReport) -> [String; 10] {
    let side = |s: &SideReport| format!("{}({})", s.part, s.kind.letter());
    let lambda = match &r.leading {
        Some(e) if e.is_complex() => format!("{:.6}±{:.6}i", e.re, e.im),
        Some(e) => format!("{:.6}", e.re),
        None => "-".to_string(),
    };
    let eddy = r.eddies.map_or("-".to_string(), |e| format!("{:.4}", e.size_ratio));
    [
        r.loop_name.clone(),
        r.vertex.to_string(),
        format!("{:.6}", r.location[0]),
        format!("{:.6}", r.location[1]),
        format!("{:.3}", r.angle_deg),
        format!("{}/{}", side(&r.incoming), side(&r.outgoing)),
        lambda,
        r.classification.label().to_string(),
        eddy,
        format!("{:.4}", r.grading_exponent),
    ]
}

type SpectrumCache = HashMap<(SideKind, SideKind, i64), WedgeSpectrum>;

struct VertexContext<'a> {
    domain: &'a Domain,
    conditions: &'a [BoundaryCondition],
    form: ViscousForm,
    params: &'a AnalysisParams,
    loop_index: usize,
    lp: &'a BoundaryLoop,
    vertex: usize,
}

impl VertexContext<'_> {
    /// The report of this vertex, or `None` when it is a point of a smooth curve.
    fn analyse(&self, cache: &mut SpectrumCache) -> Result<Option<CornerReport>, CornerError> {
        let (angle, (part_in, part_out)) = (self.angle()?, self.parts()?);
        let (cond_in, cond_out) = (self.condition(part_in)?, self.condition(part_out)?);
        let (kind_in, kind_out) = (side_kind(cond_in, self.form), side_kind(cond_out, self.form));
        let mut notes = Vec::new();
        let discontinuous = self.data_jump(cond_in, cond_out, &mut notes);
        let near_straight = (angle - PI).abs() <= self.params.straight_tolerance_deg.to_radians();
        let straight = near_straight || self.lp.circle.is_some();
        if straight && kind_in == kind_out && !discontinuous {
            return Ok(None);
        }
        let omega = if straight { PI } else { angle };
        if straight && (angle - PI).abs() > 1e-12 {
            notes.push(format!(
                "angle {:.3}° treated as a discretised smooth curve: analysed as 180°",
                angle.to_degrees()
            ));
        }
        let spectrum = self.spectrum(kind_in, kind_out, omega, cache)?;
        notes.extend(spectrum.notes.iter().cloned());
        let side = |part: usize, cond: &BoundaryCondition, kind| SideReport {
            part: self.domain.part_names.get(part).cloned().unwrap_or_else(|| format!("#{part}")),
            condition: cond.kind_name().to_string(),
            kind,
        };
        let mut report = self.base_report(
            angle,
            omega,
            side(part_in, cond_in, kind_in),
            side(part_out, cond_out, kind_out),
        );
        fill_from_spectrum(&mut report, &spectrum, self.params.n_exponents);
        if discontinuous {
            report.classification = Classification::DiscontinuousData;
            notes.push(
                "prescribed velocity jumps here: ∇u ∉ L², wall forces near the corner diverge"
                    .into(),
            );
        }
        report.discontinuous_data = discontinuous;
        report.notes = notes;
        Ok(Some(report))
    }

    fn base_report(
        &self,
        angle: f64,
        omega: f64,
        incoming: SideReport,
        outgoing: SideReport,
    ) -> CornerReport {
        CornerReport {
            loop_name: self.lp.name.clone(),
            loop_index: self.loop_index,
            vertex: self.vertex,
            location: self.lp.points.get(self.vertex).copied().unwrap_or([f64::NAN; 2]),
            angle_deg: angle.to_degrees(),
            analysed_angle_deg: omega.to_degrees(),
            incoming,
            outgoing,
            exponents: Vec::new(),
            leading: None,
            regularity: None,
            classification: Classification::Smooth,
            eddies: None,
            discontinuous_data: false,
            grading_exponent: 1.0,
            notes: Vec::new(),
        }
    }

    /// A report that carries `error` for a vertex that could not be analysed.
    fn failed(&self, error: CornerError) -> CornerReport {
        let unknown = |kind| SideReport { part: "?".into(), condition: "?".into(), kind };
        let angle = self.angle().unwrap_or(f64::NAN);
        let mut r =
            self.base_report(angle, angle, unknown(SideKind::Wall), unknown(SideKind::Wall));
        r.grading_exponent = f64::NAN;
        r.classification = Classification::NotAnalysed;
        r.notes.push(format!("not analysed: {error}"));
        r
    }

    /// Fluid-side angle at the vertex in `(0, 2π]`: `π − (turn from incoming to outgoing
    /// edge)`; an exact reversal is the tip of a slit, angle 2π.
    fn angle(&self) -> Result<f64, CornerError> {
        let pts = &self.lp.points;
        let n = pts.len();
        if n < 3 || self.lp.edge_parts.len() != n {
            return Err(CornerError::MalformedLoop {
                loop_name: self.lp.name.clone(),
                n_points: n,
                n_parts: self.lp.edge_parts.len(),
            });
        }
        let (prev, p, next) =
            (pts[(self.vertex + n - 1) % n], pts[self.vertex], pts[(self.vertex + 1) % n]);
        let d_in = [p[0] - prev[0], p[1] - prev[1]];
        let d_out = [next[0] - p[0], next[1] - p[1]];
        let cross = d_in[0] * d_out[1] - d_in[1] * d_out[0];
        let dot = d_in[0] * d_out[0] + d_in[1] * d_out[1];
        let ok = |d: [f64; 2]| d.iter().all(|v| v.is_finite()) && (d[0] != 0.0 || d[1] != 0.0);
        if !ok(d_in) || !ok(d_out) {
            return Err(CornerError::DegenerateVertex {
                loop_name: self.lp.name.clone(),
                vertex: self.vertex,
            });
        }
        let angle = PI - cross.atan2(dot);
        Ok(if angle < 1e-12 { 2.0 * PI } else { angle })
    }

    /// Parts of the incoming and outgoing edges.
    fn parts(&self) -> Result<(usize, usize), CornerError> {
        let n = self.lp.edge_parts.len();
        Ok((self.lp.edge_parts[(self.vertex + n - 1) % n], self.lp.edge_parts[self.vertex]))
    }

    fn condition(&self, part: usize) -> Result<&BoundaryCondition, CornerError> {
        self.conditions.get(part).ok_or_else(|| CornerError::MissingCondition {
            part,
            name: self.domain.part_names.get(part).cloned().unwrap_or_else(|| format!("#{part}")),
            n_conditions: self.conditions.len(),
        })
    }

    /// Whether both sides prescribe a velocity and the values differ at the vertex.
    fn data_jump(
        &self,
        a: &BoundaryCondition,
        b: &BoundaryCondition,
        notes: &mut Vec<String>,
    ) -> bool {
        let p = self.lp.points[self.vertex];
        let mut jump = false;
        for &t in &self.params.data_times {
            let (Some(ua), Some(ub)) = (dirichlet_value(a, p, t), dirichlet_value(b, p, t)) else {
                return false;
            };
            if !(ua.iter().chain(ub.iter()).all(|v| v.is_finite())) {
                notes.push(format!("prescribed velocity is not finite at the corner at t = {t}"));
                continue;
            }
            let scale = ua.iter().chain(ub.iter()).fold(1.0_f64, |m, v| m.max(v.abs()));
            let diff = (ua[0] - ub[0]).abs().max((ua[1] - ub[1]).abs());
            jump |= diff > self.params.data_tolerance * scale;
        }
        jump
    }

    fn spectrum(
        &self,
        a: SideKind,
        b: SideKind,
        omega: f64,
        cache: &mut SpectrumCache,
    ) -> Result<WedgeSpectrum, CornerError> {
        // Angles equal to 1e-9 rad share a cache entry (far below any geometric tolerance).
        let key = (a.min(b), a.max(b), (omega * 1e9).round() as i64);
        if let Some(s) = cache.get(&key) {
            return Ok(s.clone());
        }
        let s = wedge_exponents(a, b, omega, &self.params.search).map_err(|source| {
            CornerError::Exponents { loop_name: self.lp.name.clone(), vertex: self.vertex, source }
        })?;
        cache.insert(key, s.clone());
        Ok(s)
    }
}

/// Fills exponents, leading exponent, regularity, class, eddies and grading.
fn fill_from_spectrum(report: &mut CornerReport, spectrum: &WedgeSpectrum, n_exponents: usize) {
    let leading = spectrum.leading();
    let mut listed: Vec<Exponent> = spectrum.exponents.iter().copied().take(n_exponents).collect();
    if let Some(l) = leading
        && !listed.contains(&l)
    {
        listed.push(l);
    }
    report.exponents = listed;
    report.leading = leading;
    report.regularity = leading.map(|l| l.re);
    report.classification = Classification::from_leading(report.regularity);
    report.eddies = leading.as_ref().and_then(EddyRatios::from_exponent);
    report.grading_exponent = leading.map_or(1.0, |l| (l.re / 2.0).min(1.0));
}

/// The homogeneous side operator of a condition (outflow depends on the viscous form).
pub fn side_kind(condition: &BoundaryCondition, form: ViscousForm) -> SideKind {
    match (condition, form) {
        (BoundaryCondition::Velocity { .. } | BoundaryCondition::NoSlip, _) => SideKind::Wall,
        (BoundaryCondition::Slip, _) => SideKind::Slip,
        (BoundaryCondition::Outflow, ViscousForm::Gradient) => SideKind::Outflow,
        (BoundaryCondition::Outflow, ViscousForm::Symmetric) => SideKind::Traction,
    }
}

/// Prescribed velocity of a Dirichlet condition at `p`, time `t`; `None` otherwise.
fn dirichlet_value(condition: &BoundaryCondition, p: Point, t: f64) -> Option<[f64; 2]> {
    match condition {
        BoundaryCondition::NoSlip => Some([0.0, 0.0]),
        BoundaryCondition::Velocity { ux, uy } => {
            Some([ux.eval(p[0], p[1], t), uy.eval(p[0], p[1], t)])
        }
        _ => None,
    }
}
