//! Galaxy rows and the checks each row must pass before it is binned: a block of rows as read
//! from a catalogue ([`GalaxyBlock`]), the reasons a row is left out ([`RowProblem`]) and their
//! counts ([`ScreeningReport`]).
//!
//! The rules (ours, stated here once):
//! * every value (RA, Dec, e1, e2, weight) must be a finite number — a missing or non-numeric
//!   CSV field counts as not finite;
//! * Dec must lie in [−90°, +90°];
//! * the ellipticity must satisfy |e|² = e1² + e2² < 1 (both the (a−b)/(a+b) and the
//!   (a²−b²)/(a²+b²) definitions lie inside the unit disc; common practice);
//! * the weight must be ≥ 0; a zero weight carries no information and the row is counted apart
//!   (skipped, not an error);
//! * RA is an angle: any finite value is used, wrapped into [0°, 360°) with `rem_euclid`; the
//!   rows that needed wrapping are counted in the report, so RA given in another range shows.
//!
//! A row is counted under the first rule it breaks, in the order above.

use crate::error::compact;

/// A block of consecutive catalogue rows, column by column (RA and Dec in degrees).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct GalaxyBlock {
    /// 0-based catalogue row of the first galaxy of the block (fixes the noise rotation angles).
    pub first_row: u64,
    /// Right ascension in degrees.
    pub ra: Vec<f64>,
    /// Declination in degrees.
    pub dec: Vec<f64>,
    /// First ellipticity component.
    pub e1: Vec<f64>,
    /// Second ellipticity component.
    pub e2: Vec<f64>,
    /// Weight (1 for a catalogue without a weight column).
    pub weight: Vec<f64>,
}

impl GalaxyBlock {
    /// Number of rows.
    pub fn len(&self) -> usize {
        self.ra.len()
    }

    /// No rows?
    pub fn is_empty(&self) -> bool {
        self.ra.is_empty()
    }

    /// Empties the block, keeping its memory, and sets the row of its next first galaxy.
    pub fn clear(&mut self, first_row: u64) {
        self.first_row = first_row;
        self.ra.clear();
        self.dec.clear();
        self.e1.clear();
        self.e2.clear();
        self.weight.clear();
    }

    /// Appends one row.
    pub fn push(&mut self, ra: f64, dec: f64, e1: f64, e2: f64, weight: f64) {
        self.ra.push(ra);
        self.dec.push(dec);
        self.e1.push(e1);
        self.e2.push(e2);
        self.weight.push(weight);
    }
}

/// Why a row is not binned.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RowProblem {
    /// A value is NaN, infinite, missing or not a number.
    NotFinite,
    /// |Dec| > 90°.
    DeclinationOutOfRange,
    /// e1² + e2² ≥ 1.
    EllipticityTooLarge,
    /// weight < 0.
    NegativeWeight,
    /// weight = 0 (skipped: no information).
    ZeroWeight,
}

impl RowProblem {
    /// Every problem, in the order the rules are applied.
    pub const ALL: [RowProblem; 5] = [
        RowProblem::NotFinite,
        RowProblem::DeclinationOutOfRange,
        RowProblem::EllipticityTooLarge,
        RowProblem::NegativeWeight,
        RowProblem::ZeroWeight,
    ];

    /// Short description for reports.
    pub fn describe(self) -> &'static str {
        match self {
            RowProblem::NotFinite => "a missing, non-numeric or non-finite value",
            RowProblem::DeclinationOutOfRange => "Dec outside [-90, 90] degrees",
            RowProblem::EllipticityTooLarge => "|e| >= 1",
            RowProblem::NegativeWeight => "negative weight",
            RowProblem::ZeroWeight => "zero weight (skipped)",
        }
    }

    fn slot(self) -> usize {
        self as usize
    }
}

/// The first rule row (ra, dec, e1, e2, w) breaks, or `None` for a usable row.
///
/// # Examples
///
/// ```
/// use planisphere::catalogue::screening::{check_row, RowProblem};
/// assert_eq!(check_row(370.0, -30.0, 0.3, -0.4, 2.0), None); // RA wraps to 10°
/// assert_eq!(check_row(10.0, 91.0, 0.0, 0.0, 1.0), Some(RowProblem::DeclinationOutOfRange));
/// assert_eq!(check_row(10.0, 0.0, 0.6, 0.8, 1.0), Some(RowProblem::EllipticityTooLarge));
/// assert_eq!(check_row(f64::NAN, 0.0, 0.0, 0.0, 1.0), Some(RowProblem::NotFinite));
/// assert_eq!(check_row(10.0, 0.0, 0.0, 0.0, 0.0), Some(RowProblem::ZeroWeight));
/// ```
#[inline]
pub fn check_row(ra: f64, dec: f64, e1: f64, e2: f64, weight: f64) -> Option<RowProblem> {
    if !(ra.is_finite()
        && dec.is_finite()
        && e1.is_finite()
        && e2.is_finite()
        && weight.is_finite())
    {
        Some(RowProblem::NotFinite)
    } else if !(-90.0..=90.0).contains(&dec) {
        Some(RowProblem::DeclinationOutOfRange)
    } else if e1 * e1 + e2 * e2 >= 1.0 {
        Some(RowProblem::EllipticityTooLarge)
    } else if weight < 0.0 {
        Some(RowProblem::NegativeWeight)
    } else if weight == 0.0 {
        Some(RowProblem::ZeroWeight)
    } else {
        None
    }
}

/// Counts of the rows read, binned and left out (by reason), and of RA values wrapped.
#[derive(Debug, Clone, Default, PartialEq, serde::Serialize)]
pub struct ScreeningReport {
    /// Rows read.
    pub rows: u64,
    /// Rows binned.
    pub used: u64,
    /// Rows left out, by [`RowProblem`] in the order of [`RowProblem::ALL`].
    pub left_out: [u64; 5],
    /// Used rows whose RA lay outside [0°, 360°) and was wrapped.
    pub ra_wrapped: u64,
    /// The smallest and largest RA and Dec of the used rows (degrees, RA wrapped into
    /// [0, 360)).
    pub ra_range: Option<(f64, f64)>,
    /// See `ra_range`.
    pub dec_range: Option<(f64, f64)>,
}

impl ScreeningReport {
    /// Records one row's outcome.
    #[inline]
    pub fn record(&mut self, problem: Option<RowProblem>) {
        self.rows += 1;
        match problem {
            None => self.used += 1,
            Some(p) => self.left_out[p.slot()] += 1,
        }
    }

    /// Rows left out for `problem`.
    pub fn count(&self, problem: RowProblem) -> u64 {
        self.left_out[problem.slot()]
    }

    /// One line: rows read, used, and each reason with a non-zero count.
    pub fn summary(&self) -> String {
        let mut parts = vec![format!("{} rows read, {} used", self.rows, self.used)];
        for p in RowProblem::ALL {
            let n = self.count(p);
            if n > 0 {
                parts.push(format!("{n} left out for {}", p.describe()));
            }
        }
        if self.ra_wrapped > 0 {
            parts.push(format!(
                "{} RA values outside [0, 360) wrapped",
                self.ra_wrapped
            ));
        }
        parts.join(", ")
    }

    /// The error when no row is usable: names the commonest reason and the ranges seen.
    pub fn nothing_usable(&self, what: &str) -> crate::error::Error {
        if self.rows == 0 {
            return crate::error::Error::Data(format!("{what} has no galaxy rows"));
        }
        let (worst, n) = RowProblem::ALL
            .iter()
            .map(|&p| (p, self.count(p)))
            .max_by_key(|&(_, n)| n)
            .unwrap_or((RowProblem::NotFinite, 0));
        crate::error::Error::Data(format!(
            "{what}: none of its {} rows can be used ({n} with {}; {})",
            self.rows,
            worst.describe(),
            self.summary()
        ))
    }

    /// Adds the counts of `other` (rows that follow) and widens the ranges by its ranges: the
    /// same report as recording both sets of rows one by one.
    pub fn merge(&mut self, other: &ScreeningReport) {
        self.rows += other.rows;
        self.used += other.used;
        for (a, b) in self.left_out.iter_mut().zip(&other.left_out) {
            *a += b;
        }
        self.ra_wrapped += other.ra_wrapped;
        // the two ranges are set together, by the same used rows
        if let (Some((ra_lo, ra_hi)), Some((dec_lo, dec_hi))) = (other.ra_range, other.dec_range) {
            self.extend_ranges(ra_lo, dec_lo);
            self.extend_ranges(ra_hi, dec_hi);
        }
    }

    /// Widens the RA/Dec ranges with a used row.
    #[inline]
    pub(crate) fn extend_ranges(&mut self, ra: f64, dec: f64) {
        let widen = |r: &mut Option<(f64, f64)>, x: f64| {
            *r = Some(match *r {
                None => (x, x),
                Some((lo, hi)) => (lo.min(x), hi.max(x)),
            })
        };
        widen(&mut self.ra_range, ra);
        widen(&mut self.dec_range, dec);
    }

    /// A warning when at least 100 rows were used and all of them lie within RA [0, 2π],
    /// Dec [−π/2, π/2] "degrees": positions given in radians would look like this (a patch
    /// that small in degrees, 6°×3°, is possible, hence a warning, not an error).
    pub fn radians_warning(&self) -> Option<String> {
        let (r, d) = (self.ra_range?, self.dec_range?);
        let tau = 2.0 * std::f64::consts::PI;
        let half = std::f64::consts::FRAC_PI_2;
        (self.used >= 100 && r.1 <= tau && d.0 >= -half && d.1 <= half).then(|| {
            format!(
                "warning: every position lies within RA 0..{:.3}, Dec ±{:.3} degrees; if the catalogue is in radians, convert it to degrees",
                tau, half
            )
        })
    }

    /// The ranges as text, e.g. `RA 10..20, Dec -5..5 degrees`.
    pub fn ranges(&self) -> Option<String> {
        let (r, d) = (self.ra_range?, self.dec_range?);
        Some(format!(
            "RA {}..{}, Dec {}..{} degrees",
            compact(r.0),
            compact(r.1),
            compact(d.0),
            compact(d.1)
        ))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn positions_that_all_fit_in_radian_ranges_raise_a_warning() {
        let mut report = ScreeningReport::default();
        for k in 0..100 {
            report.record(None);
            report.extend_ranges(0.06 * k as f64, -1.5 + 0.03 * k as f64);
        }
        assert!(report.radians_warning().is_some());
        report.extend_ranges(40.0, 0.0);
        assert!(report.radians_warning().is_none());
    }

    #[test]
    fn merging_reports_of_consecutive_rows_equals_recording_them_one_by_one() {
        let rows: Vec<(Option<RowProblem>, f64, f64)> = (0..40)
            .map(|k| {
                let problem = (k % 7 == 3).then_some(RowProblem::ALL[k % 5]);
                (problem, (k * 37 % 360) as f64, -60.0 + (k * 13 % 50) as f64)
            })
            .collect();
        let record = |report: &mut ScreeningReport, rows: &[(Option<RowProblem>, f64, f64)]| {
            for &(problem, ra, dec) in rows {
                report.record(problem);
                if problem.is_none() {
                    report.extend_ranges(ra, dec);
                }
            }
        };
        let mut whole = ScreeningReport::default();
        record(&mut whole, &rows);
        for cut in [0, 1, 17, 40] {
            let (mut first, mut second) = (ScreeningReport::default(), ScreeningReport::default());
            record(&mut first, &rows[..cut]);
            record(&mut second, &rows[cut..]);
            first.merge(&second);
            assert_eq!(first, whole, "cut at {cut}");
        }
    }
}
