//! Regression checks: the quantities of a run compared with a stored baseline, each with its
//! own tolerance.
//!
//! Takes the current [`Quantity`] list and a [`Baseline`]; returns one [`CheckRow`] per
//! baseline entry (and one per new quantity the baseline does not know, reported but not
//! failing). A baseline is JSON: `{ "case": "...", "quantities": [ { "name": "...", "value":
//! 1.23, "tolerance": { "relative": 1e-4 } }, ... ] }` with `relative` or `absolute`
//! tolerances; [`Baseline::from_current`] writes one with the default tolerances of
//! [`default_tolerance`], for the user to edit.
//!
//! **Invariant:** no I/O; the CLI reads and writes the files and prints the table.

/// A named scalar result of a run (e.g. `force.body.drag_volume`, `corner.1.fitted`).
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Quantity {
    pub name: String,
    pub value: f64,
}

/// How far a value may move from its baseline.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum CheckTolerance {
    /// `|current − baseline| ≤ tol · |baseline|`.
    Relative(f64),
    /// `|current − baseline| ≤ tol`.
    Absolute(f64),
}

impl CheckTolerance {
    fn holds(self, current: f64, baseline: f64) -> bool {
        match self {
            CheckTolerance::Relative(t) => (current - baseline).abs() <= t * baseline.abs(),
            CheckTolerance::Absolute(t) => (current - baseline).abs() <= t,
        }
    }

    /// Short text for a table.
    pub fn describe(self) -> String {
        match self {
            CheckTolerance::Relative(t) => format!("rel {t:e}"),
            CheckTolerance::Absolute(t) => format!("abs {t:e}"),
        }
    }
}

/// One stored quantity.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct BaselineEntry {
    pub name: String,
    pub value: f64,
    pub tolerance: CheckTolerance,
}

/// A stored set of quantities.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Baseline {
    pub case: String,
    pub quantities: Vec<BaselineEntry>,
}

/// The outcome for one quantity.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct CheckRow {
    pub name: String,
    pub baseline: Option<f64>,
    pub current: Option<f64>,
    pub tolerance: Option<CheckTolerance>,
    pub status: CheckStatus,
}

/// Whether a quantity holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
pub enum CheckStatus {
    Pass,
    /// Outside the tolerance (or not finite).
    Regressed,
    /// In the baseline but not produced by the run.
    Missing,
    /// Produced by the run but not in the baseline (reported, not a failure).
    New,
}

/// Default tolerances by kind of quantity (common practice, no source): observed study rates
/// `0.05` absolute; predicted exponents are computed to 1e-10, so `1e-8` absolute; fitted
/// exponents depend on the fit window, `0.01` absolute; everything else (forces, Strouhal numbers, pressure
/// differences) `1e-4` relative, far above run-to-run round-off and far below a real change.
pub fn default_tolerance(name: &str) -> CheckTolerance {
    if name.starts_with("study.rate.")
        || matches!(name, "study.sobolev_index" | "study.besov_index" | "study.adaptive_rate_in_n")
    {
        // Observed rates move with the fit window, like fitted exponents.
        CheckTolerance::Absolute(0.05)
    } else if name.ends_with(".predicted") {
        CheckTolerance::Absolute(1e-8)
    } else if name.ends_with(".fitted") {
        CheckTolerance::Absolute(0.01)
    } else {
        CheckTolerance::Relative(1e-4)
    }
}

impl Baseline {
    /// A baseline holding `current` with the default tolerances.
    pub fn from_current(case: &str, current: &[Quantity]) -> Self {
        Baseline {
            case: case.to_string(),
            quantities: current
                .iter()
                .map(|q| BaselineEntry {
                    name: q.name.clone(),
                    value: q.value,
                    tolerance: default_tolerance(&q.name),
                })
                .collect(),
        }
    }

    /// Compares `current` with the baseline.
    pub fn compare(&self, current: &[Quantity]) -> Vec<CheckRow> {
        let find = |name: &str| current.iter().find(|q| q.name == name).map(|q| q.value);
        let mut rows: Vec<CheckRow> = self
            .quantities
            .iter()
            .map(|entry| {
                let value = find(&entry.name);
                let status = match value {
                    None => CheckStatus::Missing,
                    Some(v) if v.is_finite() && entry.tolerance.holds(v, entry.value) => {
                        CheckStatus::Pass
                    }
                    Some(_) => CheckStatus::Regressed,
                };
                CheckRow {
                    name: entry.name.clone(),
                    baseline: Some(entry.value),
                    current: value,
                    tolerance: Some(entry.tolerance),
                    status,
                }
            })
            .collect();
        for q in current {
            if !self.quantities.iter().any(|e| e.name == q.name) {
                rows.push(CheckRow {
                    name: q.name.clone(),
                    baseline: None,
                    current: Some(q.value),
                    tolerance: None,
                    status: CheckStatus::New,
                });
            }
        }
        rows
    }
}

/// True when no row regressed or went missing.
pub fn all_hold(rows: &[CheckRow]) -> bool {
    rows.iter().all(|r| matches!(r.status, CheckStatus::Pass | CheckStatus::New))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn q(name: &str, value: f64) -> Quantity {
        Quantity { name: name.into(), value }
    }

    #[test]
    fn compare_flags_regressions_missing_and_new_quantities() {
        let base = Baseline::from_current(
            "c",
            &[
                q("force.body.drag_volume", 2.0),
                q("corner.1.predicted", 0.5444837),
                q("corner.1.fitted", 0.55),
            ],
        );
        let rows = base.compare(&[
            q("force.body.drag_volume", 2.0001), // 5e-5 relative: within 1e-4
            q("corner.1.fitted", 0.57),          // 0.02 away: regressed
            q("probe.dp", 1.0),                  // new
        ]);
        let status: Vec<CheckStatus> = rows.iter().map(|r| r.status).collect();
        assert_eq!(
            status,
            vec![CheckStatus::Pass, CheckStatus::Missing, CheckStatus::Regressed, CheckStatus::New]
        );
        assert!(!all_hold(&rows));
        assert!(all_hold(&base.compare(&[
            q("force.body.drag_volume", 2.0),
            q("corner.1.predicted", 0.5444837),
            q("corner.1.fitted", 0.555),
        ])));
    }

    #[test]
    fn study_rates_get_an_absolute_tolerance_of_a_twentieth() {
        assert_eq!(default_tolerance("study.rate.u_h1"), CheckTolerance::Absolute(0.05));
        assert_eq!(default_tolerance("study.sobolev_index"), CheckTolerance::Absolute(0.05));
        let drag = "study.body.drag_extrapolated";
        assert_eq!(default_tolerance(drag), CheckTolerance::Relative(1e-4));
    }

    #[test]
    fn baselines_round_trip_through_json_and_a_nan_never_passes() {
        let base = Baseline::from_current("c", &[q("x.predicted", 1.0)]);
        let text = serde_json::to_string(&base).unwrap();
        assert!(text.contains("\"absolute\":1e-8"));
        let back: Baseline = serde_json::from_str(&text).unwrap();
        assert_eq!(back, base);
        assert_eq!(back.compare(&[q("x.predicted", f64::NAN)])[0].status, CheckStatus::Regressed);
    }
}
