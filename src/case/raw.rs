//! The case-file schema as serde sees it: plain data mirroring the TOML tables, with spans.
//!
//! Takes TOML text (through `toml::from_str`) and returns a [`RawCase`], which `build` turns into
//! the validated [`Case`](super::Case). Unknown keys are rejected everywhere
//! (`deny_unknown_fields`); values that need a line number in later messages are `Spanned`.

use std::collections::BTreeMap;

use serde::Deserialize;
use toml::Spanned;

pub(super) type Sp<T> = Spanned<T>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawCase {
    pub name: Option<Sp<String>>,
    pub fluid: Sp<RawFluid>,
    pub domain: RawDomain,
    pub mesh: Sp<RawMesh>,
    #[serde(default)]
    pub conditions: BTreeMap<Sp<String>, Sp<RawCondition>>,
    #[serde(default)]
    pub model: RawModel,
    #[serde(default)]
    pub report: RawReport,
    pub exact: Option<Sp<RawExact>>,
    pub body_force: Option<Sp<RawBodyForce>>,
    #[serde(default)]
    pub output: RawOutput,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawFluid {
    pub density: Sp<f64>,
    pub kinematic_viscosity: Option<Sp<f64>>,
    pub dynamic_viscosity: Option<Sp<f64>>,
    pub reference_velocity: Sp<f64>,
    pub reference_length: Sp<f64>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawDomain {
    pub outer: Sp<RawOuter>,
    #[serde(default)]
    pub bodies: Vec<Sp<RawBody>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawOuter {
    pub rectangle: Option<Sp<[f64; 4]>>,
    pub sides: Option<RawSides>,
    pub points: Option<Sp<Vec<[f64; 2]>>>,
    pub edge_parts: Option<Sp<Vec<String>>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawSides {
    pub bottom: Option<String>,
    pub right: Option<String>,
    pub top: Option<String>,
    pub left: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawBody {
    pub name: Sp<String>,
    pub part: Option<String>,
    pub points: Option<Sp<Vec<[f64; 2]>>>,
    pub file: Option<Sp<String>>,
    pub naca: Option<Sp<RawNaca>>,
    pub polygon: Option<Sp<RawPolygon>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawNaca {
    pub digits: String,
    #[serde(default = "one")]
    pub chord: f64,
    #[serde(default)]
    pub incidence_deg: f64,
    #[serde(default)]
    pub leading_edge: [f64; 2],
    pub pivot: Option<[f64; 2]>,
    #[serde(default = "default_points_per_side")]
    pub points_per_side: i64,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawPolygon {
    pub center: [f64; 2],
    pub radius: f64,
    pub sides: i64,
    #[serde(default)]
    pub start_angle_deg: f64,
    #[serde(default)]
    pub circle: bool,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawMesh {
    pub size: Sp<f64>,
    pub min_angle: Option<Sp<f64>>,
    pub max_triangles: Option<Sp<i64>>,
    #[serde(default)]
    pub part_sizes: BTreeMap<Sp<String>, Sp<f64>>,
    #[serde(default)]
    pub grading: Vec<Sp<RawGrading>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawGrading {
    pub at: Option<[f64; 2]>,
    pub near: Option<[f64; 2]>,
    pub trailing_edge: Option<String>,
    pub h_min: Sp<f64>,
    pub growth: Option<Sp<f64>>,
}

#[derive(Deserialize, Clone, Copy, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub(super) enum RawKind {
    Velocity,
    NoSlip,
    Outflow,
    Slip,
}

/// An expression written as a TOML string or a plain number.
#[derive(Deserialize, Clone)]
#[serde(untagged)]
pub(super) enum RawExpr {
    Number(f64),
    Text(String),
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawCondition {
    pub kind: RawKind,
    pub ux: Option<Sp<RawExpr>>,
    pub uy: Option<Sp<RawExpr>>,
}

#[derive(Deserialize, Default, Clone, Copy)]
#[serde(rename_all = "kebab-case")]
pub(super) enum RawEquations {
    #[default]
    Stokes,
    NavierStokes,
}

#[derive(Deserialize, Default, Clone, Copy)]
#[serde(rename_all = "kebab-case")]
pub(super) enum RawViscousForm {
    #[default]
    Gradient,
    Symmetric,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub(super) struct RawModel {
    #[serde(default)]
    pub equations: RawEquations,
    #[serde(default)]
    pub viscous_form: RawViscousForm,
    pub time: Option<Sp<RawTime>>,
    pub nonlinear: Option<Sp<RawNonlinear>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawNonlinear {
    pub picard_steps: Option<Sp<i64>>,
    pub max_iterations: Option<Sp<i64>>,
    pub tolerance: Option<Sp<f64>>,
    pub continuation_steps: Option<Sp<i64>>,
    pub continuation_factor: Option<Sp<f64>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawTime {
    pub dt: Sp<f64>,
    pub t_end: Sp<f64>,
    pub write_every: Option<Sp<i64>>,
}

#[derive(Deserialize, Default)]
#[serde(deny_unknown_fields)]
pub(super) struct RawReport {
    pub forces: Option<Sp<Vec<String>>>,
    #[serde(default)]
    pub probes: Vec<Sp<RawProbe>>,
    pub pressure_difference: Option<Sp<[[f64; 2]; 2]>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawProbe {
    pub name: String,
    pub at: [f64; 2],
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawExact {
    pub u: Sp<RawExpr>,
    pub v: Sp<RawExpr>,
    pub p: Sp<RawExpr>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawBodyForce {
    pub fx: Sp<RawExpr>,
    pub fy: Sp<RawExpr>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields, default)]
pub(super) struct RawOutput {
    pub directory: String,
    pub mesh: bool,
    pub solution: bool,
    pub compress: bool,
}

impl Default for RawOutput {
    fn default() -> Self {
        RawOutput { directory: "output".into(), mesh: true, solution: true, compress: false }
    }
}

fn one() -> f64 {
    1.0
}

fn default_points_per_side() -> i64 {
    81
}
