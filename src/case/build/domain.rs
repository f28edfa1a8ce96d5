//! The domain part of case building: the outer boundary and the bodies, checked and oriented.
//!
//! Takes the raw `[domain]` tables; returns a [`Domain`] (outer loop counter-clockwise, holes
//! clockwise, part ids in order of first appearance) and the [`Body`] list, or the first
//! [`CaseError`]. Reads body coordinate files relative to the case file's folder.

use std::ops::Range;

use super::super::raw::*;
use super::{CaseError, Context, RELATIVE_TOLERANCE};
use crate::case::Body;
use crate::case::coords::parse_coordinates;
use crate::geometry::naca::{NacaProfile, parse_designation};
use crate::geometry::shapes::{Orientation, orient, rectangle, regular_polygon};
use crate::geometry::validate::{Arrangement, check_disjoint, check_inside, check_loop};
use crate::geometry::{BoundaryLoop, Circle, Domain, PartId, Point};

/// Boundary parts in order of first appearance.
#[derive(Default)]
struct Parts {
    names: Vec<String>,
}

impl Parts {
    fn id(&mut self, name: &str) -> PartId {
        match self.names.iter().position(|n| n == name) {
            Some(id) => id,
            None => {
                self.names.push(name.to_string());
                self.names.len() - 1
            }
        }
    }
}

/// A body outline before checking: its points, circle and trailing edge, and the key path and
/// span of the shape key it came from.
struct Outline {
    points: Vec<Point>,
    circle: Option<Circle>,
    trailing_edge: Option<Point>,
    key: String,
    span: Range<usize>,
}

impl Context<'_> {
    pub(super) fn domain(&self, raw: RawDomain) -> Result<(Domain, Vec<Body>), CaseError> {
        let mut parts = Parts::default();
        let outer = self.outer(raw.outer, &mut parts)?;
        let tol = RELATIVE_TOLERANCE * diagonal(&outer.points);
        let mut holes: Vec<BoundaryLoop> = Vec::new();
        let mut bodies: Vec<Body> = Vec::new();
        for (i, sp) in raw.bodies.into_iter().enumerate() {
            let key = format!("domain.bodies[{i}]");
            let span = sp.span();
            let (hole, body) =
                self.body(&key, sp.into_inner(), (&outer, &bodies), &mut parts, tol)?;
            self.check_placement(&key, span, &outer, &holes, &hole, tol)?;
            holes.push(hole);
            bodies.push(body);
        }
        Ok((Domain { outer, holes, part_names: parts.names }, bodies))
    }

    fn check_polygon(
        &self,
        key: &str,
        pts: &[Point],
        tol: f64,
        span: Range<usize>,
    ) -> Result<(), CaseError> {
        check_loop(pts, tol)
            .map_err(|defect| CaseError::Polygon { at: self.site(key, span), defect })
    }

    fn check_placement(
        &self,
        key: &str,
        span: Range<usize>,
        outer: &BoundaryLoop,
        holes: &[BoundaryLoop],
        hole: &BoundaryLoop,
        tol: f64,
    ) -> Result<(), CaseError> {
        let at = self.site(key, span);
        let body = hole.name.clone();
        match check_inside(&outer.points, &hole.points, tol) {
            Err(Arrangement::Touching) => return Err(CaseError::BodyTouchesOuter { at, body }),
            Err(Arrangement::Containing) => return Err(CaseError::BodyOutside { at, body }),
            Ok(()) => {}
        }
        for other in holes {
            if check_disjoint(&other.points, &hole.points, tol).is_err() {
                let first = other.name.clone();
                return Err(CaseError::BodiesOverlap { at, first, second: body });
            }
        }
        Ok(())
    }

    fn outer(&self, raw: Sp<RawOuter>, parts: &mut Parts) -> Result<BoundaryLoop, CaseError> {
        let span = raw.span();
        let o = raw.into_inner();
        let misplaced = match (&o.rectangle, &o.points) {
            (Some(_), _) if o.edge_parts.is_some() => Some("`edge_parts` goes with `points`"),
            (_, Some(_)) if o.sides.is_some() => Some("`sides` goes with `rectangle`"),
            _ => None,
        };
        if let Some(what) = misplaced {
            let message = format!("{what}, not with the other outer shape");
            return Err(CaseError::Schema { at: self.site("domain.outer", span), message });
        }
        let (points, names) = match (o.rectangle, o.points) {
            (Some(r), None) => self.rectangle_outer(r, o.sides)?,
            (None, Some(p)) => {
                let pspan = p.span();
                let points = drop_closing_point(p.into_inner());
                let tol = RELATIVE_TOLERANCE * diagonal(&points);
                self.check_polygon("domain.outer.points", &points, tol, pspan)?;
                let names = self.edge_names(o.edge_parts, points.len())?;
                (points, names)
            }
            _ => return Err(CaseError::OuterShape { at: self.site("domain.outer", span) }),
        };
        let edge_parts = names.iter().map(|n| parts.id(n)).collect();
        let mut lp = BoundaryLoop { name: "outer".into(), points, edge_parts, circle: None };
        orient(&mut lp, Orientation::CounterClockwise);
        Ok(lp)
    }

    fn rectangle_outer(
        &self,
        r: Sp<[f64; 4]>,
        sides: Option<RawSides>,
    ) -> Result<(Vec<Point>, Vec<String>), CaseError> {
        let [x0, y0, x1, y1] = *r.get_ref();
        let ok = [x0, y0, x1, y1].iter().all(|v| v.is_finite()) && x1 > x0 && y1 > y0;
        if !ok {
            let at = self.site("domain.outer.rectangle", r.span());
            return Err(CaseError::Rectangle { at, value: [x0, y0, x1, y1] });
        }
        let s = sides.unwrap_or(RawSides { bottom: None, right: None, top: None, left: None });
        let name = |v: Option<String>, d: &str| v.unwrap_or_else(|| d.to_string());
        let names = vec![
            name(s.bottom, "bottom"),
            name(s.right, "right"),
            name(s.top, "top"),
            name(s.left, "left"),
        ];
        Ok((rectangle(x0, y0, x1, y1), names))
    }

    fn edge_names(
        &self,
        raw: Option<Sp<Vec<String>>>,
        edges: usize,
    ) -> Result<Vec<String>, CaseError> {
        let Some(names) = raw else { return Ok(vec!["outer".to_string(); edges]) };
        if names.get_ref().len() != edges {
            let at = self.site("domain.outer.edge_parts", names.span());
            return Err(CaseError::PartCount { at, given: names.get_ref().len(), edges });
        }
        Ok(names.into_inner())
    }

    fn body(
        &self,
        key: &str,
        b: RawBody,
        (outer, seen): (&BoundaryLoop, &[Body]),
        parts: &mut Parts,
        tol: f64,
    ) -> Result<(BoundaryLoop, Body), CaseError> {
        let name = b.name.get_ref().clone();
        if seen.iter().any(|s| s.name == name) {
            let at = self.site(format!("{key}.name"), b.name.span());
            return Err(CaseError::DuplicateBody { at, name });
        }
        let part_name = b.part.as_deref().unwrap_or(&name);
        if outer.edge_parts.iter().any(|&id| parts.names[id] == part_name) {
            let field = if b.part.is_some() { "part" } else { "name" };
            let at = self.site(format!("{key}.{field}"), b.name.span());
            return Err(CaseError::BodyPartOnOuter { at, part: part_name.to_string() });
        }
        let shape = self.body_shape(key, &b)?;
        let points = drop_closing_point(shape.points);
        self.check_polygon(&shape.key, &points, tol, shape.span)?;
        let part = parts.id(part_name);
        let edge_parts = vec![part; points.len()];
        let mut hole =
            BoundaryLoop { name: name.clone(), points, edge_parts, circle: shape.circle };
        orient(&mut hole, Orientation::Clockwise);
        Ok((hole, Body { name, part, trailing_edge: shape.trailing_edge }))
    }

    /// The body outline from whichever single shape key is present.
    fn body_shape(&self, key: &str, b: &RawBody) -> Result<Outline, CaseError> {
        let outline = |points, circle, trailing_edge, shape: &str, span| Outline {
            points,
            circle,
            trailing_edge,
            key: format!("{key}.{shape}"),
            span,
        };
        match (&b.points, &b.file, &b.naca, &b.polygon) {
            (Some(p), None, None, None) => {
                Ok(outline(p.get_ref().clone(), None, None, "points", p.span()))
            }
            (None, Some(f), None, None) => {
                let points = self.coordinate_file(&format!("{key}.file"), f)?;
                Ok(outline(points, None, None, "file", f.span()))
            }
            (None, None, Some(n), None) => {
                let (points, te) = self.naca(&format!("{key}.naca"), n)?;
                Ok(outline(points, None, Some(te), "naca", n.span()))
            }
            (None, None, None, Some(p)) => {
                let (points, circle) = self.polygon(&format!("{key}.polygon"), p)?;
                Ok(outline(points, circle, None, "polygon", p.span()))
            }
            _ => Err(CaseError::BodyShape {
                at: self.site(key, b.name.span()),
                found: shape_keys(b),
            }),
        }
    }

    fn coordinate_file(&self, key: &str, f: &Sp<String>) -> Result<Vec<Point>, CaseError> {
        let path = self.folder.join(f.get_ref());
        let text = std::fs::read_to_string(&path).map_err(|source| CaseError::CoordinateFile {
            at: self.site(key, f.span()),
            path: path.clone(),
            source,
        })?;
        parse_coordinates(&text).map_err(|bad| CaseError::CoordinateLine {
            path,
            line: bad.line,
            content: bad.content,
            reason: bad.reason,
        })
    }

    fn naca(&self, key: &str, n: &Sp<RawNaca>) -> Result<(Vec<Point>, Point), CaseError> {
        let r = n.get_ref();
        let at = || self.site(key, n.span());
        let (m, p, t) =
            parse_designation(&r.digits).map_err(|source| CaseError::Naca { at: at(), source })?;
        self.positive(&format!("{key}.chord"), &Sp::new(n.span(), r.chord))?;
        let count = usize::try_from(r.points_per_side).unwrap_or(0);
        let le = r.leading_edge;
        let profile = NacaProfile {
            max_camber: m,
            camber_position: p,
            thickness: t,
            chord: r.chord,
            incidence_deg: r.incidence_deg,
            leading_edge: le,
            pivot: r.pivot.unwrap_or([le[0] + 0.25 * r.chord, le[1]]),
            points_per_side: count,
        };
        let pts = profile.points().map_err(|source| CaseError::Naca { at: at(), source })?;
        Ok((pts, profile.trailing_edge()))
    }

    fn polygon(
        &self,
        key: &str,
        p: &Sp<RawPolygon>,
    ) -> Result<(Vec<Point>, Option<Circle>), CaseError> {
        let r = p.get_ref();
        self.positive(&format!("{key}.radius"), &Sp::new(p.span(), r.radius))?;
        if !(3..=100_000).contains(&r.sides) {
            let at = self.site(format!("{key}.sides"), p.span());
            return Err(CaseError::Count {
                at,
                count: r.sides,
                expected: "a polygon has 3 to 100000 sides",
            });
        }
        let pts = regular_polygon(r.center, r.radius, r.sides as usize, r.start_angle_deg);
        let circle = r.circle.then_some(Circle { center: r.center, radius: r.radius });
        Ok((pts, circle))
    }
}

/// Drops a last point that repeats the first one exactly (the loop closes itself).
fn drop_closing_point(mut points: Vec<Point>) -> Vec<Point> {
    if points.len() > 3 && points.first() == points.last() {
        points.pop();
    }
    points
}

/// Diagonal of the bounding box of `points`.
fn diagonal(points: &[Point]) -> f64 {
    let (mut lo, mut hi) = ([f64::INFINITY; 2], [f64::NEG_INFINITY; 2]);
    for p in points {
        for k in 0..2 {
            lo[k] = lo[k].min(p[k]);
            hi[k] = hi[k].max(p[k]);
        }
    }
    (hi[0] - lo[0]).hypot(hi[1] - lo[1])
}

/// ", found …" listing the shape keys a body gives (for the exactly-one error).
fn shape_keys(b: &RawBody) -> String {
    let given: Vec<&str> = [
        b.points.as_ref().map(|_| "points"),
        b.file.as_ref().map(|_| "file"),
        b.naca.as_ref().map(|_| "naca"),
        b.polygon.as_ref().map(|_| "polygon"),
    ]
    .into_iter()
    .flatten()
    .collect();
    if given.is_empty() {
        ", found none".into()
    } else {
        format!(", found {}", given.join(" and "))
    }
}
