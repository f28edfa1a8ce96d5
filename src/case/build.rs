//! Turns case-file text into a validated [`Case`]: parse, check every value, build the domain.
//!
//! Takes the TOML text and the path it came from; returns a [`Case`] or the first
//! [`CaseError`], located by file, line, column and key path. The domain (outer boundary and
//! bodies, with coordinate files) is built in the `domain` submodule.

use std::collections::{BTreeMap, BTreeSet};
use std::ops::Range;
use std::path::{Path, PathBuf};

use super::error::{CaseError, Site};
use super::raw::*;
use super::{
    Body, BoundaryCondition, Case, Equations, ExactSolution, Fluid, Model, NonlinearControls,
    Output, PressureDifference, Probe, ScalarExpr, TimeStepping,
};
use crate::fem::ViscousForm;
use crate::geometry::{Domain, PartId, Point};
use crate::mesh::{Grading, MeshControls};

mod domain;

/// Default minimum angle (degrees) the mesher aims for.
pub const DEFAULT_MIN_ANGLE_DEG: f64 = 28.0;
/// Default cap on the estimated triangle count.
pub const DEFAULT_MAX_TRIANGLES: usize = 2_000_000;
/// Default size growth rate of a grading (size increase per unit distance). Common practice,
/// no source: rates of 0.2–0.3 keep neighbouring triangles within a factor of about 1.3.
pub const DEFAULT_GROWTH: f64 = 0.25;
/// Geometric tolerance relative to the outer boundary's bounding-box diagonal: points closer than
/// this are "the same point". Far above round-off (1e-16) and far below any meaningful feature.
pub const RELATIVE_TOLERANCE: f64 = 1e-10;

/// Parses and validates a case; see [`Case::parse`].
pub(super) fn build(text: &str, origin: &Path) -> Result<Case, CaseError> {
    let cx = Context::new(text, origin);
    let raw = cx.deserialize()?;
    let fluid = cx.fluid(raw.fluid)?;
    let (domain, bodies) = cx.domain(raw.domain)?;
    let conditions = cx.conditions(raw.conditions, &domain)?;
    let mesh = cx.mesh(raw.mesh, &domain, &bodies)?;
    let model = cx.model(raw.model)?;
    let default_name = origin.file_stem().map(|s| s.to_string_lossy().into_owned());
    Ok(Case {
        name: raw.name.map(|n| n.into_inner()).or(default_name).unwrap_or_else(|| "case".into()),
        source: origin.to_path_buf(),
        forces: cx.forces(raw.report.forces, &domain, &bodies)?,
        probes: cx.probes(raw.report.probes)?,
        pressure_difference: cx.pressure_difference(raw.report.pressure_difference)?,
        exact: raw.exact.map(|e| cx.exact(e)).transpose()?,
        body_force: raw.body_force.map(|f| cx.body_force(f)).transpose()?,
        output: cx.output(raw.output),
        fluid,
        domain,
        bodies,
        mesh,
        conditions,
        model,
    })
}

/// The file being read: its text (for line numbers), path and folder.
struct Context<'a> {
    text: &'a str,
    file: PathBuf,
    folder: PathBuf,
}

impl<'a> Context<'a> {
    fn new(text: &'a str, origin: &Path) -> Self {
        let folder = origin.parent().map(Path::to_path_buf).unwrap_or_default();
        Context { text, file: origin.to_path_buf(), folder }
    }

    /// The site of `key` at byte range `span` of the text.
    fn site(&self, key: impl Into<String>, span: Range<usize>) -> Box<Site> {
        let position = Some(self.line_col(span.start));
        Box::new(Site { file: self.file.clone(), position, key: key.into() })
    }

    /// 1-based line and column (in characters) of byte `offset`.
    fn line_col(&self, offset: usize) -> (usize, usize) {
        let offset = offset.min(self.text.len());
        let before = self.text.get(..offset).unwrap_or("");
        let line = before.matches('\n').count() + 1;
        let line_start = before.rfind('\n').map_or(0, |i| i + 1);
        (line, before[line_start..].chars().count() + 1)
    }

    /// The key path of the table in force at byte `offset`: the last `[table]` or
    /// `[[array]]` header (with the array index), then any inline tables `key = {` still open
    /// on the current line. Empty at the top level. A best-effort scan for messages only.
    fn table_at(&self, offset: usize) -> String {
        let before = self.text.get(..offset.min(self.text.len())).unwrap_or("");
        let mut path = String::new();
        if let Some(header) = before.lines().rev().map(str::trim).find(|l| is_header(l)) {
            let name = header.trim_matches(|c| c == '[' || c == ']').trim();
            path = name.to_string();
            if header.starts_with("[[") {
                let count = before.lines().filter(|l| l.trim() == header).count();
                path = format!("{name}[{}]", count.saturating_sub(1));
            }
        }
        let line = &before[before.rfind('\n').map_or(0, |i| i + 1)..];
        for key in open_inline_tables(line) {
            path = if path.is_empty() { key } else { format!("{path}.{key}") };
        }
        path
    }

    fn deserialize(&self) -> Result<RawCase, CaseError> {
        if let Err(e) = self.text.parse::<toml::Table>() {
            let at = self.error_site(e.span(), String::new());
            return Err(CaseError::Syntax { at, message: e.message().trim().to_string() });
        }
        toml::from_str::<RawCase>(self.text).map_err(|e| self.schema_error(&e))
    }

    fn schema_error(&self, e: &toml::de::Error) -> CaseError {
        let message = e.message().trim().to_string();
        let table = e.span().map(|s| self.table_at(s.start)).unwrap_or_default();
        if let Some(rest) = message.strip_prefix("unknown field `") {
            let name = rest.split('`').next().unwrap_or("").to_string();
            let key = if table.is_empty() { name.clone() } else { format!("{table}.{name}") };
            return CaseError::UnknownKey { at: self.error_site(e.span(), key), name };
        }
        let key = match e.span().and_then(|s| self.key_on_line(s.start)) {
            Some(k) if table.is_empty() => k,
            Some(k) => format!("{table}.{k}"),
            None => table,
        };
        CaseError::Schema { at: self.error_site(e.span(), key), message }
    }

    /// The key of the `key = value` pair (on its own line or in an inline table) whose value
    /// starts at byte `offset`; `None` when the value sits inside an array.
    fn key_on_line(&self, offset: usize) -> Option<String> {
        let before = self.text.get(..offset.min(self.text.len()))?;
        let prefix = &before[before.rfind('\n').map_or(0, |i| i + 1)..];
        let key = prefix.trim_end().strip_suffix('=')?;
        let key = key.rsplit([',', '{']).next().unwrap_or("").trim();
        let plain = !key.is_empty() && !key.contains(['[', '"', '\'']);
        plain.then(|| key.to_string())
    }

    fn error_site(&self, span: Option<Range<usize>>, key: String) -> Box<Site> {
        let position = span.map(|s| self.line_col(s.start));
        Box::new(Site { file: self.file.clone(), position, key })
    }

    fn positive(&self, key: &str, value: &Sp<f64>) -> Result<f64, CaseError> {
        let v = *value.get_ref();
        if v.is_finite() && v > 0.0 {
            Ok(v)
        } else {
            Err(CaseError::NotPositive { at: self.site(key, value.span()), value: v })
        }
    }

    fn fluid(&self, raw: Sp<RawFluid>) -> Result<Fluid, CaseError> {
        let span = raw.span();
        let f = raw.into_inner();
        let density = self.positive("fluid.density", &f.density)?;
        let nu = match (&f.kinematic_viscosity, &f.dynamic_viscosity) {
            (Some(nu), None) => self.positive("fluid.kinematic_viscosity", nu)?,
            (None, Some(mu)) => self.positive("fluid.dynamic_viscosity", mu)? / density,
            (Some(_), Some(_)) => {
                let at = self.site("fluid", span);
                return Err(CaseError::Viscosity { at, found: ", found both" });
            }
            (None, None) => {
                let at = self.site("fluid", span);
                return Err(CaseError::Viscosity { at, found: ", found neither" });
            }
        };
        Ok(Fluid {
            density,
            kinematic_viscosity: nu,
            reference_velocity: self.positive("fluid.reference_velocity", &f.reference_velocity)?,
            reference_length: self.positive("fluid.reference_length", &f.reference_length)?,
        })
    }

    fn conditions(
        &self,
        raw: BTreeMap<Sp<String>, Sp<RawCondition>>,
        domain: &Domain,
    ) -> Result<Vec<BoundaryCondition>, CaseError> {
        let mut out: Vec<Option<BoundaryCondition>> = vec![None; domain.part_names.len()];
        for (name, cond) in raw {
            let key = format!("conditions.{}", name.get_ref());
            let id = self.part_id(&key, &name, domain)?;
            out[id] = Some(self.condition(&key, cond)?);
        }
        out.into_iter()
            .enumerate()
            .map(|(id, c)| {
                c.ok_or_else(|| CaseError::MissingCondition {
                    at: Box::new(Site {
                        file: self.file.clone(),
                        position: None,
                        key: "conditions".into(),
                    }),
                    part: domain.part_names[id].clone(),
                })
            })
            .collect()
    }

    fn part_id(&self, key: &str, name: &Sp<String>, domain: &Domain) -> Result<PartId, CaseError> {
        domain.part_id(name.get_ref()).ok_or_else(|| CaseError::UnknownPart {
            at: self.site(key, name.span()),
            part: name.get_ref().clone(),
            known: domain.part_names.join(", "),
        })
    }

    fn condition(&self, key: &str, c: Sp<RawCondition>) -> Result<BoundaryCondition, CaseError> {
        let span = c.span();
        let c = c.into_inner();
        if c.kind != RawKind::Velocity && (c.ux.is_some() || c.uy.is_some()) {
            let message = "`ux`/`uy` are only allowed with kind = \"velocity\"".to_string();
            return Err(CaseError::Schema { at: self.site(key, span), message });
        }
        Ok(match c.kind {
            RawKind::NoSlip => BoundaryCondition::NoSlip,
            RawKind::Outflow => BoundaryCondition::Outflow,
            RawKind::Slip => BoundaryCondition::Slip,
            RawKind::Velocity => {
                let (Some(ux), Some(uy)) = (c.ux, c.uy) else {
                    let message = "kind = \"velocity\" needs both `ux` and `uy`".to_string();
                    return Err(CaseError::Schema { at: self.site(key, span), message });
                };
                BoundaryCondition::Velocity {
                    ux: self.expr(&format!("{key}.ux"), &ux)?,
                    uy: self.expr(&format!("{key}.uy"), &uy)?,
                }
            }
        })
    }

    fn expr(&self, key: &str, e: &Sp<RawExpr>) -> Result<ScalarExpr, CaseError> {
        match e.get_ref() {
            RawExpr::Number(v) if v.is_finite() => Ok(ScalarExpr::constant(*v)),
            RawExpr::Number(v) => Err(CaseError::Schema {
                at: self.site(key, e.span()),
                message: format!("value {v} is not finite"),
            }),
            RawExpr::Text(s) => ScalarExpr::parse(s)
                .map_err(|source| CaseError::Expression { at: self.site(key, e.span()), source }),
        }
    }

    fn mesh(
        &self,
        raw: Sp<RawMesh>,
        domain: &Domain,
        bodies: &[Body],
    ) -> Result<MeshControls, CaseError> {
        let m = raw.into_inner();
        let size = self.positive("mesh.size", &m.size)?;
        let mut part_sizes = vec![None; domain.part_names.len()];
        for (name, value) in &m.part_sizes {
            let key = format!("mesh.part_sizes.{}", name.get_ref());
            let id = self.part_id(&key, name, domain)?;
            part_sizes[id] = Some(self.positive(&key, value)?);
        }
        let grading = m
            .grading
            .iter()
            .enumerate()
            .map(|(i, g)| self.grading(&format!("mesh.grading[{i}]"), g, domain, bodies))
            .collect::<Result<Vec<_>, _>>()?;
        Ok(MeshControls {
            size,
            part_sizes,
            grading,
            min_angle_deg: self.min_angle(m.min_angle)?,
            max_triangles: self.max_triangles(m.max_triangles)?,
        })
    }

    fn min_angle(&self, raw: Option<Sp<f64>>) -> Result<f64, CaseError> {
        let Some(a) = raw else { return Ok(DEFAULT_MIN_ANGLE_DEG) };
        let v = *a.get_ref();
        if v > 0.0 && v <= 33.0 {
            Ok(v)
        } else {
            Err(CaseError::MinAngle { at: self.site("mesh.min_angle", a.span()), value: v })
        }
    }

    fn max_triangles(&self, raw: Option<Sp<i64>>) -> Result<usize, CaseError> {
        raw.map_or(Ok(DEFAULT_MAX_TRIANGLES), |n| self.at_least_one("mesh.max_triangles", &n))
    }

    /// An integer count that must be at least 1.
    fn at_least_one(&self, key: &str, n: &Sp<i64>) -> Result<usize, CaseError> {
        match usize::try_from(*n.get_ref()) {
            Ok(v) if v >= 1 => Ok(v),
            _ => Err(CaseError::Count {
                at: self.site(key, n.span()),
                count: *n.get_ref(),
                expected: "it must be at least 1",
            }),
        }
    }

    fn grading(
        &self,
        key: &str,
        g: &Sp<RawGrading>,
        domain: &Domain,
        bodies: &[Body],
    ) -> Result<Grading, CaseError> {
        let r = g.get_ref();
        let h_min = self.positive(&format!("{key}.h_min"), &r.h_min)?;
        let growth = match &r.growth {
            Some(v) => self.positive(&format!("{key}.growth"), v)?,
            None => DEFAULT_GROWTH,
        };
        let point = match (r.at, r.near, &r.trailing_edge) {
            (Some(p), None, None) => self.finite_point(&format!("{key}.at"), g.span(), p)?,
            (None, Some(p), None) => {
                nearest_vertex(domain, self.finite_point(&format!("{key}.near"), g.span(), p)?)
            }
            (None, None, Some(name)) => self.trailing_edge(key, g.span(), name, bodies)?,
            _ => {
                let message = "give exactly one of `at = [x, y]`, `near = [x, y]` or `trailing_edge = \"body\"`".into();
                return Err(CaseError::Schema { at: self.site(key, g.span()), message });
            }
        };
        Ok(Grading { point, h_min, growth })
    }

    fn trailing_edge(
        &self,
        key: &str,
        span: Range<usize>,
        name: &str,
        bodies: &[Body],
    ) -> Result<Point, CaseError> {
        let at = self.site(format!("{key}.trailing_edge"), span);
        let Some(body) = bodies.iter().find(|b| b.name == name) else {
            let known = bodies.iter().map(|b| b.name.as_str()).collect::<Vec<_>>().join(", ");
            return Err(CaseError::UnknownBody { at, body: name.to_string(), known });
        };
        body.trailing_edge.ok_or_else(|| CaseError::NoTrailingEdge { at, body: name.to_string() })
    }

    fn model(&self, raw: RawModel) -> Result<Model, CaseError> {
        let equations = match raw.equations {
            RawEquations::Stokes => Equations::Stokes,
            RawEquations::NavierStokes => Equations::NavierStokes,
        };
        let viscous_form = match raw.viscous_form {
            RawViscousForm::Gradient => ViscousForm::Gradient,
            RawViscousForm::Symmetric => ViscousForm::Symmetric,
        };
        let time = raw.time.map(|t| self.time(t.into_inner())).transpose()?;
        let nonlinear = match raw.nonlinear {
            Some(n) => self.nonlinear(n.into_inner())?,
            None => NonlinearControls::default(),
        };
        Ok(Model { equations, viscous_form, time, nonlinear })
    }

    fn nonlinear(&self, raw: RawNonlinear) -> Result<NonlinearControls, CaseError> {
        let mut out = NonlinearControls::default();
        if let Some(n) = &raw.picard_steps {
            out.picard_steps = self.non_negative_count("model.nonlinear.picard_steps", n)?;
        }
        if let Some(n) = &raw.max_iterations {
            out.max_iterations = self.at_least_one("model.nonlinear.max_iterations", n)?;
        }
        if let Some(v) = &raw.tolerance {
            out.tolerance = self.positive("model.nonlinear.tolerance", v)?;
        }
        if let Some(n) = &raw.continuation_steps {
            out.continuation_steps =
                self.non_negative_count("model.nonlinear.continuation_steps", n)?;
        }
        if let Some(v) = &raw.continuation_factor {
            let key = "model.nonlinear.continuation_factor";
            let factor = self.positive(key, v)?;
            if factor <= 1.0 {
                let message = format!("continuation factor {factor} must be greater than 1");
                return Err(CaseError::Schema { at: self.site(key, v.span()), message });
            }
            out.continuation_factor = factor;
        }
        Ok(out)
    }

    fn non_negative_count(&self, key: &str, n: &Sp<i64>) -> Result<usize, CaseError> {
        usize::try_from(*n.get_ref()).map_err(|_| CaseError::Count {
            at: self.site(key, n.span()),
            count: *n.get_ref(),
            expected: "it must be at least 0",
        })
    }

    fn time(&self, t: RawTime) -> Result<TimeStepping, CaseError> {
        let dt = self.positive("model.time.dt", &t.dt)?;
        let t_end = self.positive("model.time.t_end", &t.t_end)?;
        if dt > t_end {
            let message = format!("time step dt = {dt} is longer than t_end = {t_end}");
            return Err(CaseError::Schema { at: self.site("model.time.dt", t.dt.span()), message });
        }
        let write_every = match &t.write_every {
            None => 1,
            Some(w) => self.at_least_one("model.time.write_every", w)?,
        };
        Ok(TimeStepping { dt, t_end, write_every })
    }

    fn forces(
        &self,
        raw: Option<Sp<Vec<String>>>,
        domain: &Domain,
        bodies: &[Body],
    ) -> Result<Vec<PartId>, CaseError> {
        let Some(list) = raw else {
            let ids: BTreeSet<PartId> = bodies.iter().map(|b| b.part).collect();
            return Ok(ids.into_iter().collect());
        };
        let span = list.span();
        let mut ids = Vec::new();
        for name in list.get_ref() {
            let sp = Sp::new(span.clone(), name.clone());
            let id = self.part_id("report.forces", &sp, domain)?;
            if !ids.contains(&id) {
                ids.push(id);
            }
        }
        Ok(ids)
    }

    /// Rejects points with a non-finite coordinate (TOML allows `nan` and `inf`).
    fn finite_point(&self, key: &str, span: Range<usize>, p: Point) -> Result<Point, CaseError> {
        if p.iter().all(|v| v.is_finite()) {
            return Ok(p);
        }
        let message = format!("point {p:?} has a non-finite coordinate");
        Err(CaseError::Schema { at: self.site(key, span), message })
    }

    fn probes(&self, raw: Vec<Sp<RawProbe>>) -> Result<Vec<Probe>, CaseError> {
        raw.into_iter()
            .enumerate()
            .map(|(i, sp)| {
                let span = sp.span();
                let p = sp.into_inner();
                let point = self.finite_point(&format!("report.probes[{i}].at"), span, p.at)?;
                Ok(Probe { name: p.name, point })
            })
            .collect()
    }

    fn pressure_difference(
        &self,
        raw: Option<Sp<[[f64; 2]; 2]>>,
    ) -> Result<Option<PressureDifference>, CaseError> {
        let Some(sp) = raw else { return Ok(None) };
        let key = "report.pressure_difference";
        let [a, b] = *sp.get_ref();
        let first = self.finite_point(key, sp.span(), a)?;
        let second = self.finite_point(key, sp.span(), b)?;
        Ok(Some(PressureDifference { first, second }))
    }

    fn exact(&self, e: Sp<RawExact>) -> Result<ExactSolution, CaseError> {
        let e = e.into_inner();
        Ok(ExactSolution {
            u: self.expr("exact.u", &e.u)?,
            v: self.expr("exact.v", &e.v)?,
            p: self.expr("exact.p", &e.p)?,
        })
    }

    fn body_force(&self, f: Sp<RawBodyForce>) -> Result<[ScalarExpr; 2], CaseError> {
        let f = f.into_inner();
        Ok([self.expr("body_force.fx", &f.fx)?, self.expr("body_force.fy", &f.fy)?])
    }

    fn output(&self, o: RawOutput) -> Output {
        Output {
            directory: self.folder.join(o.directory),
            mesh: o.mesh,
            solution: o.solution,
            compress: o.compress,
        }
    }
}

/// True for a table header line such as `[mesh]` or `[[domain.bodies]]` (not an array row).
fn is_header(line: &str) -> bool {
    let line = line.split('#').next().unwrap_or("").trim();
    let name = line.trim_start_matches('[').trim_end_matches(']').trim();
    line.starts_with('[')
        && line.ends_with(']')
        && name.starts_with(|c: char| c.is_ascii_alphabetic() || c == '"' || c == '_')
        && name.chars().all(|c| c.is_ascii_alphanumeric() || "_-.\" ".contains(c))
}

/// Keys of the inline tables (`key = {`) still open at the end of `line`, outermost first.
fn open_inline_tables(line: &str) -> Vec<String> {
    let mut stack = Vec::new();
    let mut segment_start = 0;
    for (i, c) in line.char_indices() {
        match c {
            '{' => {
                let segment = &line[segment_start..i];
                let key = segment.rsplit_once('=').map_or("", |(k, _)| k);
                stack.push(key.trim().rsplit([',', '{']).next().unwrap_or("").trim().to_string());
                segment_start = i + 1;
            }
            '}' => {
                stack.pop();
                segment_start = i + 1;
            }
            ',' => segment_start = i + 1,
            _ => {}
        }
    }
    stack
}

/// The domain vertex (any loop) nearest to `p`.
fn nearest_vertex(domain: &Domain, p: Point) -> Point {
    let d2 = |q: &Point| (q[0] - p[0]).powi(2) + (q[1] - p[1]).powi(2);
    domain
        .loops()
        .flat_map(|l| l.points.iter())
        .min_by(|a, b| d2(a).total_cmp(&d2(b)))
        .copied()
        .unwrap_or(p)
}
