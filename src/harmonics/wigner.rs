//! Wigner 3j symbols with zero magnetic numbers, (ℓ1 ℓ2 ℓ3; 0 0 0), for every ℓ3 at once.
//!
//! For fixed ℓ1, ℓ2 the symbols f(ℓ3) = (ℓ1 ℓ2 ℓ3; m1 m2 m3) obey the three-term recursion in ℓ3
//! of Schulten & Gordon 1975 (J. Math. Phys. 16, 1961, eq. 3):
//!
//! ℓ3 A(ℓ3+1) f(ℓ3+1) + B(ℓ3) f(ℓ3) + (ℓ3+1) A(ℓ3) f(ℓ3−1) = 0,
//!
//! A(ℓ3) = √[(ℓ3² − (ℓ1−ℓ2)²) ((ℓ1+ℓ2+1)² − ℓ3²) (ℓ3² − m3²)],
//! B(ℓ3) = −(2ℓ3+1) [ℓ2(ℓ2+1) m3 − ℓ1(ℓ1+1) m3 − ℓ3(ℓ3+1)(m2 − m1)].
//!
//! With m1 = m2 = m3 = 0 the middle term vanishes and A(ℓ3) = ℓ3 S(ℓ3) with
//! S(ℓ)² = (ℓ² − (ℓ1−ℓ2)²)((ℓ1+ℓ2+1)² − ℓ²), so the recursion becomes a two-term one in steps of 2:
//!
//! f(ℓ3+2) = −[S(ℓ3+1) / S(ℓ3+2)] f(ℓ3),   ℓ3 = |ℓ1−ℓ2|, |ℓ1−ℓ2|+2, …, ℓ1+ℓ2,
//!
//! and f = 0 when ℓ1+ℓ2+ℓ3 is odd. Every step multiplies by a ratio of order one, so the recursion
//! is stable at any ℓ (no over- or underflow: for m = 0 every ℓ3 of the range is classically
//! allowed). As in Schulten & Gordon, the start value is fixed afterwards by the normalisation
//! Σ_{ℓ3} (2ℓ3+1) f(ℓ3)² = 1 (orthogonality of the 3j symbols, Edmonds 1957, Angular Momentum in Quantum Mechanics, §3.7) and the
//! sign (−1)^{(ℓ1+ℓ2+ℓ3)/2} of the closed form (Edmonds 1957 §3.7), which at
//! ℓ3 = |ℓ1−ℓ2| is (−1)^{max(ℓ1, ℓ2)}.

/// The symbols (ℓ1 ℓ2 ℓ3; 0 0 0) for ℓ3 = |ℓ1−ℓ2| ..= ℓ1+ℓ2 (zero at odd ℓ1+ℓ2+ℓ3), by the
/// m = 0 form of the Schulten & Gordon 1975 recursion (module documentation).
///
/// Returns (ℓ3 of the first value, values).
///
/// ```
/// use planisphere::harmonics::wigner::wigner_3j_zero_m;
/// // (2 2 ℓ3; 0 0 0) for ℓ3 = 0..=4 is 1/√5, 0, −√(2/35), 0, √(2/35) (Edmonds 1957 §3.7)
/// let (first, f) = wigner_3j_zero_m(2, 2);
/// assert_eq!(first, 0);
/// assert!((f[0] - 1.0 / 5f64.sqrt()).abs() < 1e-15);
/// assert_eq!(f[1], 0.0);
/// assert!((f[2] + (2.0f64 / 35.0).sqrt()).abs() < 1e-15); // −0.2390457218668787
/// assert!((f[4] - (2.0f64 / 35.0).sqrt()).abs() < 1e-15);
/// ```
pub fn wigner_3j_zero_m(l1: usize, l2: usize) -> (usize, Vec<f64>) {
    let mut squares = Vec::new();
    let first = wigner_3j_squared_zero_m(l1, l2, &mut squares);
    let mut sign = if l1.max(l2).is_multiple_of(2) {
        1.0
    } else {
        -1.0
    };
    let values = squares
        .iter()
        .enumerate()
        .map(|(k, &s)| {
            if k % 2 == 1 {
                0.0
            } else {
                let v = sign * s.sqrt();
                sign = -sign;
                v
            }
        })
        .collect();
    (first, values)
}

/// The squares (ℓ1 ℓ2 ℓ3; 0 0 0)² for ℓ3 = |ℓ1−ℓ2| ..= ℓ1+ℓ2, written into `out` (resized);
/// returns the first ℓ3. Same recursion as [`wigner_3j_zero_m`] on the squares,
///
/// f(ℓ3+2)² = f(ℓ3)² · (ℓ3+1−d)(ℓ3+1+d)(s−ℓ3)(s+ℓ3+2) / [(ℓ3+2−d)(ℓ3+2+d)(s−ℓ3−1)(s+ℓ3+3)],
///
/// d = |ℓ1−ℓ2|, s = ℓ1+ℓ2, then Σ (2ℓ3+1) f² = 1. No square roots: this is the form the
/// mode-coupling sums need.
pub fn wigner_3j_squared_zero_m(l1: usize, l2: usize, out: &mut Vec<f64>) -> usize {
    let d = l1.abs_diff(l2);
    let s = l1 + l2;
    let n = s - d + 1;
    out.clear();
    out.resize(n, 0.0);
    out[0] = 1.0;
    let mut norm = (2 * d + 1) as f64;
    let (df, sf) = (d as f64, s as f64);
    let mut k = 0;
    while k + 2 < n {
        let l = (d + k) as f64;
        let num = (l + 1.0 - df) * (l + 1.0 + df) * (sf - l) * (sf + l + 2.0);
        let den = (l + 2.0 - df) * (l + 2.0 + df) * (sf - l - 1.0) * (sf + l + 3.0);
        out[k + 2] = out[k] * (num / den);
        norm += (2.0 * (l + 2.0) + 1.0) * out[k + 2];
        k += 2;
    }
    let scale = 1.0 / norm;
    for v in out.iter_mut().step_by(2) {
        *v *= scale;
    }
    d
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn symbols_with_a_zero_are_the_closed_form() {
        // (ℓ ℓ 0; 0 0 0) = (−1)^ℓ / √(2ℓ+1) (Edmonds 1957 §3.7)
        for l in [0usize, 1, 5, 40, 777] {
            let (first, f) = wigner_3j_zero_m(l, l);
            assert_eq!(first, 0);
            let expected = if l % 2 == 0 { 1.0 } else { -1.0 } / ((2 * l + 1) as f64).sqrt();
            assert!((f[0] - expected).abs() < 1e-14 * expected.abs(), "ℓ {l}");
        }
    }
}
