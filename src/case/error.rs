//! Errors from reading and validating a case file.
//!
//! Takes nothing; defines [`CaseError`] (one variant per kind of bad input) and [`Site`], the
//! "file:line:column: key" prefix every message starts with. Every `CaseError` is bad input:
//! the CLI maps all of them to exit code 2.

use std::fmt;
use std::path::PathBuf;

use crate::case::expr::ExprError;
use crate::geometry::naca::NacaError;
use crate::geometry::validate::LoopDefect;

/// Where in the input a problem was found: the file, the 1-based line and column when known,
/// and the key path (e.g. `domain.bodies[1].points`).
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Site {
    pub file: PathBuf,
    /// 1-based `(line, column)` of the offending value or key, when known.
    pub position: Option<(usize, usize)>,
    /// Dotted key path; empty for file-level problems.
    pub key: String,
}

impl fmt::Display for Site {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.file.display())?;
        if let Some((line, col)) = self.position {
            write!(f, ":{line}:{col}")?;
        }
        if !self.key.is_empty() {
            write!(f, ": `{}`", self.key)?;
        }
        Ok(())
    }
}

/// Everything that can be wrong with a case file. All variants are bad input.
///
/// The [`Site`] is boxed to keep `Result<_, CaseError>` small on the success path.
#[derive(Debug, thiserror::Error)]
#[non_exhaustive]
pub enum CaseError {
    #[error("{}: cannot read the case file: {source}", path.display())]
    Read { path: PathBuf, source: std::io::Error },
    #[error("{at}: TOML syntax error: {message}")]
    Syntax { at: Box<Site>, message: String },
    #[error(
        "{at}: unknown key `{name}` (check the spelling; see docs/case-format.md for the valid keys)"
    )]
    UnknownKey { at: Box<Site>, name: String },
    #[error("{at}: {message}")]
    Schema { at: Box<Site>, message: String },
    #[error("{at}: must be positive and finite, got {value}")]
    NotPositive { at: Box<Site>, value: f64 },
    #[error(
        "{at}: give exactly one of `kinematic_viscosity` (ν, m²/s) or `dynamic_viscosity` (μ = ρν, Pa·s){found}"
    )]
    Viscosity { at: Box<Site>, found: &'static str },
    #[error("{at}: min_angle {value}° is out of range; it must be in (0, 33] degrees")]
    MinAngle { at: Box<Site>, value: f64 },
    #[error("{at}: {count} is out of range; {expected}")]
    Count { at: Box<Site>, count: i64, expected: &'static str },
    #[error("{at}: {source}")]
    Expression { at: Box<Site>, source: ExprError },
    #[error("{at}: cannot read coordinate file {}: {source}", path.display())]
    CoordinateFile { at: Box<Site>, path: PathBuf, source: std::io::Error },
    #[error("{}:{line}: bad coordinate line `{content}`: {reason} (expected two numbers `x y`)", path.display())]
    CoordinateLine { path: PathBuf, line: usize, content: String, reason: String },
    #[error("{at}: polygon {defect}")]
    Polygon { at: Box<Site>, defect: LoopDefect },
    #[error("{at}: {source}")]
    Naca { at: Box<Site>, source: NacaError },
    #[error(
        "{at}: the body needs exactly one shape key: `points`, `file`, `naca` or `polygon`{found}"
    )]
    BodyShape { at: Box<Site>, found: String },
    #[error("{at}: the outer boundary needs exactly one of `rectangle` or `points`")]
    OuterShape { at: Box<Site> },
    #[error("{at}: rectangle [x0, y0, x1, y1] needs x1 > x0 and y1 > y0, got {value:?}")]
    Rectangle { at: Box<Site>, value: [f64; 4] },
    #[error(
        "{at}: {given} part names for {edges} edges; give one name per edge (edge i runs from point i to point i+1)"
    )]
    PartCount { at: Box<Site>, given: usize, edges: usize },
    #[error("{at}: a second body is called `{name}`; body names must be unique")]
    DuplicateBody { at: Box<Site>, name: String },
    #[error(
        "{at}: part `{part}` belongs to the outer boundary; a body needs a part of its own (set `part = \"…\"`)"
    )]
    BodyPartOnOuter { at: Box<Site>, part: String },
    #[error("{at}: body `{body}` lies (partly) outside the outer boundary")]
    BodyOutside { at: Box<Site>, body: String },
    #[error(
        "{at}: body `{body}` touches or crosses the outer boundary; bodies must lie strictly inside"
    )]
    BodyTouchesOuter { at: Box<Site>, body: String },
    #[error("{at}: bodies `{first}` and `{second}` overlap or touch; bodies must be disjoint")]
    BodiesOverlap { at: Box<Site>, first: String, second: String },
    #[error(
        "{at}: boundary part `{part}` has no condition; add `[conditions.{part}]` with kind = \"no-slip\", \"slip\", \"velocity\" or \"outflow\""
    )]
    MissingCondition { at: Box<Site>, part: String },
    #[error("{at}: `{part}` is not a boundary part; known parts: {known}")]
    UnknownPart { at: Box<Site>, part: String, known: String },
    #[error("{at}: unknown body `{body}`; known bodies: {known}")]
    UnknownBody { at: Box<Site>, body: String, known: String },
    #[error(
        "{at}: body `{body}` has no trailing edge (only `naca` bodies have one); use `near = [x, y]` instead"
    )]
    NoTrailingEdge { at: Box<Site>, body: String },
}

impl CaseError {
    /// The site of the error, when it has one.
    pub fn site(&self) -> Option<&Site> {
        use CaseError::*;
        let at: &Site = match self {
            Read { .. } | CoordinateLine { .. } => return None,
            Syntax { at, .. } | UnknownKey { at, .. } | Schema { at, .. } => at,
            NotPositive { at, .. } | Viscosity { at, .. } | MinAngle { at, .. } => at,
            Count { at, .. } | Expression { at, .. } | CoordinateFile { at, .. } => at,
            Polygon { at, .. } | Naca { at, .. } | BodyShape { at, .. } => at,
            OuterShape { at } | Rectangle { at, .. } | PartCount { at, .. } => at,
            DuplicateBody { at, .. }
            | BodyPartOnOuter { at, .. }
            | BodyOutside { at, .. }
            | BodyTouchesOuter { at, .. } => at,
            BodiesOverlap { at, .. } | MissingCondition { at, .. } | UnknownPart { at, .. } => at,
            UnknownBody { at, .. } | NoTrailingEdge { at, .. } => at,
        };
        Some(at)
    }
}
