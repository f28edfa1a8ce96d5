//! Scalar expressions in `x`, `y` and `t` (prescribed velocities, exact solutions, body forces),
//! parsed and evaluated by the `exmex` crate.

use exmex::prelude::*;

/// The variables an expression may use.
pub const EXPRESSION_VARIABLES: [&str; 3] = ["x", "y", "t"];

/// A parsed scalar expression `f(x, y, t)`.
#[derive(Clone, Debug)]
pub struct ScalarExpr {
    source: String,
    // Boxed: exmex keeps its operator tables inline (tens of kB per expression).
    compiled: Option<Box<exmex::FlatEx<f64>>>,
    /// For each variable of `compiled` (exmex sorts them by name), its slot in `[x, y, t]`.
    slots: Vec<usize>,
    constant: f64,
}

/// Why an expression was rejected.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[non_exhaustive]
pub enum ExprError {
    #[error("expression `{source_text}` does not parse: {reason}")]
    Syntax { source_text: String, reason: String },
    #[error("expression `{source_text}` uses unknown variable `{variable}` (allowed: x, y, t)")]
    UnknownVariable { source_text: String, variable: String },
    #[error(
        "expression `{source_text}`: the minus sign in `{fragment}` is ambiguous (it would be read as (-a)^b); write -(a^b) or (-a)^b"
    )]
    AmbiguousMinus { source_text: String, fragment: String },
}

impl ScalarExpr {
    /// Parses `source`; only the variables `x`, `y` and `t` are allowed.
    ///
    /// # Errors
    /// [`ExprError::Syntax`] when the text does not parse, [`ExprError::UnknownVariable`] when
    /// it names another variable.
    pub fn parse(source: &str) -> Result<Self, ExprError> {
        check_unary_minus_before_power(source)?;
        let expanded = expand_exponent_literals(source);
        let compiled = exmex::parse::<f64>(&expanded).map_err(|e| ExprError::Syntax {
            source_text: source.to_string(),
            reason: e.to_string(),
        })?;
        let mut slots = Vec::new();
        for name in compiled.var_names() {
            match EXPRESSION_VARIABLES.iter().position(|v| v == name) {
                Some(slot) => slots.push(slot),
                None => {
                    return Err(ExprError::UnknownVariable {
                        source_text: source.to_string(),
                        variable: name.clone(),
                    });
                }
            }
        }
        let constant = if slots.is_empty() { compiled.eval(&[]).unwrap_or(f64::NAN) } else { 0.0 };
        Ok(ScalarExpr {
            source: source.to_string(),
            compiled: Some(Box::new(compiled)),
            slots,
            constant,
        })
    }

    /// A constant expression.
    pub fn constant(value: f64) -> Self {
        ScalarExpr {
            source: format!("{value}"),
            compiled: None,
            slots: Vec::new(),
            constant: value,
        }
    }

    /// The text the expression was parsed from.
    pub fn source(&self) -> &str {
        &self.source
    }

    /// True when the expression uses `t`.
    pub fn depends_on_time(&self) -> bool {
        self.slots.contains(&2)
    }

    /// Evaluates at `(x, y, t)`. An evaluation error (e.g. a domain error) gives NaN, which the
    /// solvers reject as a non-finite boundary value.
    pub fn eval(&self, x: f64, y: f64, t: f64) -> f64 {
        let Some(compiled) = &self.compiled else { return self.constant };
        if self.slots.is_empty() {
            return self.constant;
        }
        let all = [x, y, t];
        let mut vars = [0.0; 3];
        for (k, &slot) in self.slots.iter().enumerate() {
            vars[k] = all[slot];
        }
        compiled.eval(&vars[..self.slots.len()]).unwrap_or(f64::NAN)
    }
}

/// Rewrites number literals with an exponent (`1e-3`, `2.5E+4`) as plain decimals, which is
/// what exmex reads (it would take `1e-3` for `1e` minus 3 and fail); other text is unchanged.
fn expand_exponent_literals(source: &str) -> String {
    let chars: Vec<char> = source.chars().collect();
    let mut out = String::with_capacity(source.len());
    let mut i = 0;
    while i < chars.len() {
        let starts_number = (chars[i].is_ascii_digit() || chars[i] == '.')
            && (i == 0 || !(chars[i - 1].is_alphanumeric() || chars[i - 1] == '_'));
        if starts_number {
            let mut j = i;
            while j < chars.len() && (chars[j].is_ascii_digit() || chars[j] == '.') {
                j += 1;
            }
            let mut k = j;
            if k < chars.len() && (chars[k] == 'e' || chars[k] == 'E') {
                k += 1;
                if k < chars.len() && (chars[k] == '+' || chars[k] == '-') {
                    k += 1;
                }
                let digits = k;
                while k < chars.len() && chars[k].is_ascii_digit() {
                    k += 1;
                }
                let literal: String = chars[i..k].iter().collect();
                if k > digits
                    && let Ok(value) = literal.parse::<f64>()
                {
                    // Display of f64 never uses an exponent and round-trips the value.
                    out.push_str(&format!("{value}"));
                    i = k;
                    continue;
                }
            }
            out.extend(&chars[i..j]);
            i = j;
            continue;
        }
        out.push(chars[i]);
        i += 1;
    }
    out
}

/// Refuses a unary minus whose operand is raised to a power (`-x^2`, `exp(-(t/2)^2)`): exmex
/// binds the unary minus tighter than `^`, unlike the usual mathematical convention, so such
/// an expression would silently mean `(-x)^2`. Binary minus (`2 - x^2`) is unaffected.
fn check_unary_minus_before_power(source: &str) -> Result<(), ExprError> {
    let chars: Vec<char> = source.chars().collect();
    let mut previous: Option<char> = None;
    for (i, &c) in chars.iter().enumerate() {
        if c.is_whitespace() {
            continue;
        }
        let unary = c == '-' && previous.is_none_or(|p| "(,+-*/^".contains(p));
        if unary {
            let start = skip_spaces(&chars, i + 1);
            let end = operand_end(&chars, start);
            let next = skip_spaces(&chars, end);
            if end > start && chars.get(next) == Some(&'^') {
                let power_end = operand_end(&chars, skip_spaces(&chars, next + 1));
                let fragment: String = chars[i..power_end.max(next + 1)].iter().collect();
                return Err(ExprError::AmbiguousMinus {
                    source_text: source.to_string(),
                    fragment: fragment.trim().to_string(),
                });
            }
        }
        previous = Some(c);
    }
    Ok(())
}

fn skip_spaces(chars: &[char], mut i: usize) -> usize {
    while chars.get(i).is_some_and(|c| c.is_whitespace()) {
        i += 1;
    }
    i
}

/// End (exclusive) of the primary operand starting at `start`: a number, a name, a name
/// followed by a parenthesised argument list, or a parenthesised group.
fn operand_end(chars: &[char], start: usize) -> usize {
    let mut i = start;
    let word = |c: &char| c.is_alphanumeric() || *c == '_' || *c == '.';
    while chars.get(i).is_some_and(word) {
        i += 1;
    }
    let j = skip_spaces(chars, i);
    if chars.get(j) == Some(&'(') {
        let mut depth = 0usize;
        for (k, &c) in chars.iter().enumerate().skip(j) {
            match c {
                '(' => depth += 1,
                ')' => {
                    depth -= 1;
                    if depth == 0 {
                        return k + 1;
                    }
                }
                _ => {}
            }
        }
        return chars.len();
    }
    i
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn evaluates_variables_in_any_order() {
        let e = ScalarExpr::parse("y*10 + x - t^2").unwrap();
        assert_eq!(e.eval(1.0, 2.0, 3.0), 20.0 + 1.0 - 9.0);
        assert!(e.depends_on_time());
    }

    #[test]
    fn rejects_unknown_variable_and_bad_syntax() {
        assert!(matches!(ScalarExpr::parse("x + z"), Err(ExprError::UnknownVariable { .. })));
        assert!(matches!(ScalarExpr::parse("x + *"), Err(ExprError::Syntax { .. })));
    }

    #[test]
    fn expressions_can_be_shared_across_threads() {
        fn assert_send_sync<T: Send + Sync>() {}
        assert_send_sync::<ScalarExpr>();
    }

    #[test]
    fn a_unary_minus_before_a_power_is_refused_and_binary_minus_is_not() {
        // exmex reads `-x^2` as `(-x)^2` (measured: 9 at x = 3), so it must be refused.
        for bad in ["-x^2", "exp(-((t - 0.25) / 0.1)^2)", "2 * (-y ^ 2)", "1 + -sin(x)^2"] {
            assert!(
                matches!(ScalarExpr::parse(bad), Err(ExprError::AmbiguousMinus { .. })),
                "{bad} accepted"
            );
        }
        let ok = ScalarExpr::parse("2 - x^2").unwrap();
        assert_eq!(ok.eval(3.0, 0.0, 0.0), -7.0);
        assert_eq!(ScalarExpr::parse("-(x^2)").unwrap().eval(3.0, 0.0, 0.0), -9.0);
        assert_eq!(ScalarExpr::parse("(-x)^2").unwrap().eval(3.0, 0.0, 0.0), 9.0);
        assert_eq!(ScalarExpr::parse("-x * 2").unwrap().eval(3.0, 0.0, 0.0), -6.0);
        assert_eq!(ScalarExpr::parse("exp(-(x^2))").unwrap().eval(0.0, 0.0, 0.0), 1.0);
    }

    #[test]
    fn numbers_with_an_exponent_are_read_as_numbers() {
        // exmex alone fails on `1e-3 + x`; the literal is expanded first.
        let e = ScalarExpr::parse("1e-3 + x * 2.5E+1").unwrap();
        assert_eq!(e.eval(2.0, 0.0, 0.0), 0.001 + 50.0);
        assert_eq!(ScalarExpr::parse("exp(x) * 1e2").unwrap().eval(0.0, 0.0, 0.0), 100.0);
        assert!(
            (ScalarExpr::parse("signum(x + 1e-300)").unwrap().eval(0.0, 0.0, 0.0) - 1.0).abs()
                == 0.0
        );
        assert_eq!(expand_exponent_literals("x2e3 + 3"), "x2e3 + 3");
    }

    #[test]
    fn constants_evaluate_without_variables() {
        assert_eq!(ScalarExpr::parse("2*3").unwrap().eval(5.0, 5.0, 5.0), 6.0);
        assert_eq!(ScalarExpr::constant(1.5).eval(0.0, 0.0, 0.0), 1.5);
    }
}
