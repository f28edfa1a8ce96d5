//! Two-column coordinate files (`x y` per line) for body outlines.
//!
//! Takes the file's text and returns its points in file order. `#` starts a comment that runs to
//! the end of the line; blank lines are skipped; the two numbers are separated by blanks, tabs
//! or a comma. A final point equal to the first is allowed (the loop closes itself anyway).

use crate::geometry::Point;

/// A line of a coordinate file that is not a point.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct BadLine {
    /// 1-based line number.
    pub line: usize,
    pub content: String,
    pub reason: String,
}

/// Parses coordinate-file text into points.
///
/// # Errors
/// The first line that does not hold exactly two finite numbers.
pub fn parse_coordinates(text: &str) -> Result<Vec<Point>, BadLine> {
    let mut points = Vec::new();
    for (index, raw_line) in text.lines().enumerate() {
        let data = raw_line.split('#').next().unwrap_or("").trim();
        if data.is_empty() {
            continue;
        }
        let bad = |reason: String| BadLine {
            line: index + 1,
            content: raw_line.trim().to_string(),
            reason,
        };
        let fields: Vec<&str> =
            data.split(|c: char| c.is_whitespace() || c == ',').filter(|f| !f.is_empty()).collect();
        if fields.len() != 2 {
            return Err(bad(format!("found {} fields", fields.len())));
        }
        let mut xy = [0.0; 2];
        for (slot, field) in xy.iter_mut().zip(&fields) {
            *slot = field.parse::<f64>().map_err(|_| bad(format!("`{field}` is not a number")))?;
            if !slot.is_finite() {
                return Err(bad(format!("`{field}` is not finite")));
            }
        }
        points.push(xy);
    }
    Ok(points)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn skips_comments_and_blank_lines() {
        let text = "# plate\n\n0 0  # leading corner\n1.5, -0.25\n\t2e-1\t3\n";
        assert_eq!(parse_coordinates(text).unwrap(), vec![[0.0, 0.0], [1.5, -0.25], [0.2, 3.0]]);
    }

    #[test]
    fn reports_the_line_number_of_a_bad_line() {
        let err = parse_coordinates("0 0\n1 1\n# c\n1 x\n").unwrap_err();
        assert_eq!(err.line, 4);
        assert!(err.reason.contains("`x`"));
        assert_eq!(parse_coordinates("1 2 3").unwrap_err().line, 1);
        assert!(parse_coordinates("nan 1").is_err());
    }
}
