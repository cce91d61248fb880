//! Coefficient labels, the full labelled set of scattering coefficients and the
//! orientation-harmonic summary derived from it.
//!
//! # Orientation-harmonic summary
//!
//! A short description of the full set that does not depend on how the map is turned. The
//! orientations l = 0 … L−1 sample θ_l = πl/L, and the modulus of a real field filtered by a
//! Morlet wavelet turned by π equals that of the unturned one (ψ_{θ+π} = ψ̄_θ), so S1(j,l) and
//! S2(j1,l1,j2,l2) are periodic in l with period L and a rotation of the map by π/L shifts
//! every orientation index by one. Harmonics in l are therefore the natural coordinates: the
//! m = 0 harmonic of S1 and every harmonic in the *relative* orientation Δ = l2 − l1 of S2 are
//! unchanged by the shift, and the modulus of any harmonic is. With
//!
//! * h_m(j) = Σ_l S1(j,l) e^{−2πi m l/L} (orientation harmonics of order 1),
//! * T(j1,j2,Δ) = Σ_{l1} S2(j1, l1, j2, (l1 + Δ) mod L) (order 2 at relative orientation Δ),
//!
//! the items are, for J scales and any L ≥ 2:
//!
//! | name | formula | meaning | units |
//! |---|---|---|---|
//! | `mean` | c_0 | weighted mean of the field | field |
//! | `rms` | √(weighted variance) | overall fluctuation | field |
//! | `modulus_j{j}` | h_0(j)/L | mean wavelet modulus at scale j: grows like the square root of the power in the band of j | field |
//! | `modulus_anisotropy_j{j}` | \|h_1(j)\| / h_0(j) | fractional orientation dependence of order 1 at scale j; a check of statistical isotropy (0 for an isotropic field apart from the estimator's noise) | 1 |
//! | `intermittency_j{j1}_j{j2}` | Σ_Δ T(j1,j2,Δ) / (L h_0(j1)) | mean second-order modulus over mean first-order modulus: how strongly the envelope of the scale-j1 response varies on scale j2 relative to its mean; grows when the power at j1 is concentrated in few places | 1 |
//! | `alignment_j{j1}_j{j2}` | Σ_Δ T(j1,j2,Δ) cos(2πΔ/L) / Σ_Δ T(j1,j2,Δ) | first harmonic in the relative orientation: > 0 when the envelope at j1 varies mostly *along* the first wavelet's wave vector (structures elongated along the wave fronts: lines and edges), < 0 when it varies mostly *across* it | 1 |
//!
//! pairs j1 < j2, in the order mean, rms, moduli, anisotropies, intermittencies (nested j1, j2),
//! alignments: 2 + 2J + J(J−1) numbers (22 for J = 4, 44 for J = 6).
//!
//! Choices and why:
//!
//! * **Ratios of sums, not sums of ratios.** The intermittency divides the orientation sum of
//!   S2 by the orientation sum of S1: each pooled sum is a low-noise estimate, and no single
//!   weakly-responding orientation can dominate, as it can in a mean of per-orientation ratios.
//!   For a statistically isotropic field every S1(j1,l) has the same expectation, so both
//!   forms estimate the same number.
//! * **No logarithms.** The dimensionless items are O(0.01–1) with small fractional scatter, so
//!   a logarithm would change neither their information (a Fisher matrix is invariant under an
//!   invertible smooth re-parametrisation of the data to first order) nor their readability;
//!   linear items keep the formulas and their adjoint short.
//! * **Dimensions.** Only `mean`, `rms` and `modulus_j*` scale with the field (×a for a field
//!   times a > 0; the modulus is homogeneous of degree 1); every other item is a ratio of two
//!   quantities of the same degree and does not change. Adding a constant changes only `mean`.
//! * **Only m = 1.** Orientation is π-periodic, so m = 1 (period π in θ) is the lowest harmonic
//!   that separates parallel from perpendicular; higher m resolve angular detail finer than the
//!   wavelets' own angular width and, at L = 4, m = 2 is just the alternation of neighbours.
//!   The anisotropy is a modulus because a signed order-1 harmonic would depend on where l = 0
//!   points.
//! * **Trust.** An item is trusted when every coefficient it is built from is trusted: an
//!   untrusted coefficient enters each item with a weight of order 1, so a partly trusted
//!   combination would carry an unknown bias.
//!
//! The Gaussian expectations of `intermittency` and `alignment` are not 0: they are set by the
//! wavelets' geometry (e.g. Rayleigh statistics of the envelope for m = 0); for white noise they
//! are checked against an independent numpy implementation (`tests/summary_laws.rs`,
//! `reference-values/summary_reference.py`). The adjoint used by synthesis is
//! [`OrientationSummary::adjoint`].

use crate::{Error, Result};
use serde::Serialize;

pub use super::layout::{
    CoefficientKind, CoefficientLabel, CoefficientLayout, CoefficientSpelling, WaveletPath,
};

/// One pooled coefficient with its label.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Coefficient {
    /// Which coefficient this is (serialised as the fields kind, order, j1, l1, j2, l2).
    #[serde(flatten)]
    pub label: CoefficientLabel,
    /// Pooled value (NaN, serialised as null, when no pooling weight remained).
    pub value: f64,
    /// True when the kept pooling weight is at least the trusted fraction of the footprint.
    pub trusted: bool,
    /// Kept pooling weight over footprint weight.
    pub kept_weight_fraction: f64,
}

/// The full labelled set of coefficients of a map or footprint.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CoefficientSet {
    /// Number of scales J.
    pub scale_count: usize,
    /// Number of orientations L.
    pub orientation_count: usize,
    /// Coefficients in the engine's label order.
    pub coefficients: Vec<Coefficient>,
}

/// One named item of the orientation-harmonic summary (module documentation).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SummaryStatistic {
    /// Self-explanatory name (see the module documentation).
    pub name: String,
    /// Value (NaN, serialised as null, when a coefficient it needs is undefined).
    pub value: f64,
    /// True when every coefficient it is built from is trusted.
    pub trusted: bool,
}

/// What a summary item measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SummaryKind {
    /// Weighted mean of the field (amplitude).
    Mean,
    /// Square root of the weighted variance (amplitude).
    Rms,
    /// Orientation mean of S1 at one scale (amplitude).
    Modulus,
    /// Modulus of the first orientation harmonic of S1 over its mean (dimensionless).
    ModulusAnisotropy,
    /// Orientation mean of S2 over orientation mean of S1 for a scale pair (dimensionless).
    Intermittency,
    /// First harmonic in the relative orientation of S2 over its mean (dimensionless).
    Alignment,
}

impl SummaryKind {
    /// Prefix of the item names of this kind.
    pub fn prefix(self) -> &'static str {
        match self {
            SummaryKind::Mean => "mean",
            SummaryKind::Rms => "rms",
            SummaryKind::Modulus => "modulus",
            SummaryKind::ModulusAnisotropy => "modulus_anisotropy",
            SummaryKind::Intermittency => "intermittency",
            SummaryKind::Alignment => "alignment",
        }
    }

    /// The scale of a distance between two values of this kind near `value`: |value| for the
    /// amplitudes and the intermittency (positive, so a relative distance is meaningful), and
    /// max(|value|, 0.1) for the alignment and the modulus anisotropy, which sit at or cross
    /// 0 (0.1 is the size that separates textures from Gaussian fields: ±0.05–0.2 for lines
    /// and disks against ≤ 0.02 for Gaussian fields, tests/summary_*.rs).
    pub fn distance_scale(self, value: f64) -> f64 {
        match self {
            SummaryKind::Alignment | SummaryKind::ModulusAnisotropy => value.abs().max(0.1),
            _ => value.abs(),
        }
    }

    /// True for the amplitudes (items that scale like the field); the others are dimensionless.
    pub fn is_amplitude(self) -> bool {
        matches!(
            self,
            SummaryKind::Mean | SummaryKind::Rms | SummaryKind::Modulus
        )
    }
}

/// Label of one summary item: its kind and scales.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct SummaryLabel {
    /// What is measured.
    pub kind: SummaryKind,
    /// Scale (per-scale items) or first scale (scale-pair items).
    pub j1: Option<usize>,
    /// Second scale (scale-pair items).
    pub j2: Option<usize>,
}

impl SummaryLabel {
    /// The item's name, e.g. `rms`, `modulus_j3`, `intermittency_j1_j4`.
    pub fn name(&self) -> String {
        let mut s = self.kind.prefix().to_string();
        for j in [self.j1, self.j2].into_iter().flatten() {
            s.push_str(&format!("_j{j}"));
        }
        s
    }
}

/// The orientation-harmonic summary of a full set of J scales and L ≥ 2 orientations: its
/// labels, values from the full coefficient values, trust flags and the adjoint (formulas in
/// the module documentation).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct OrientationSummary {
    scale_count: usize,
    orientation_count: usize,
}

impl OrientationSummary {
    /// The summary for J scales and L orientations; L must be at least 2.
    pub fn new(scale_count: usize, orientation_count: usize) -> Result<Self> {
        if orientation_count < 2 {
            return Err(Error::Setting(format!(
                "the orientation-harmonic summary needs at least 2 orientations L, got L = {orientation_count}"
            )));
        }
        Ok(Self {
            scale_count,
            orientation_count,
        })
    }

    /// Item labels in order: mean, rms, modulus (J), modulus anisotropy (J), intermittency
    /// (J(J−1)/2, pairs j1 < j2 nested as j1, j2), alignment (same pairs).
    pub fn labels(&self) -> Vec<SummaryLabel> {
        let jn = self.scale_count;
        let one = |kind| SummaryLabel {
            kind,
            j1: None,
            j2: None,
        };
        let mut out = vec![one(SummaryKind::Mean), one(SummaryKind::Rms)];
        for kind in [SummaryKind::Modulus, SummaryKind::ModulusAnisotropy] {
            out.extend((0..jn).map(|j| SummaryLabel {
                kind,
                j1: Some(j),
                j2: None,
            }));
        }
        for kind in [SummaryKind::Intermittency, SummaryKind::Alignment] {
            for j1 in 0..jn {
                for j2 in (j1 + 1)..jn {
                    out.push(SummaryLabel {
                        kind,
                        j1: Some(j1),
                        j2: Some(j2),
                    });
                }
            }
        }
        out
    }

    /// The named items from the full coefficient values and trust flags (in label order):
    /// [`Self::values`] with [`Self::trusted`].
    pub fn statistics(&self, values: &[f64], trusted: &[bool]) -> Vec<SummaryStatistic> {
        self.names()
            .into_iter()
            .zip(self.values(values))
            .zip(self.trusted(trusted))
            .map(|((name, value), trusted)| SummaryStatistic {
                name,
                value,
                trusted,
            })
            .collect()
    }

    /// Item names in order (see [`Self::labels`]).
    pub fn names(&self) -> Vec<String> {
        self.labels().iter().map(SummaryLabel::name).collect()
    }

    /// Number of items, 2 + 2J + J(J−1).
    pub fn len(&self) -> usize {
        let jn = self.scale_count;
        2 + 2 * jn + jn * jn.saturating_sub(1)
    }

    /// Always false (the summary has at least mean and rms).
    pub fn is_empty(&self) -> bool {
        false
    }

    fn cos_sin(&self, k: usize) -> (f64, f64) {
        let t = 2.0 * std::f64::consts::PI * (k % self.orientation_count) as f64
            / self.orientation_count as f64;
        (t.cos(), t.sin())
    }

    fn s1(&self, j: usize, l: usize) -> usize {
        CoefficientLayout::new(self.scale_count, self.orientation_count).first_order(j, l)
    }

    fn s2(&self, j1: usize, l1: usize, j2: usize, l2: usize) -> usize {
        CoefficientLayout::new(self.scale_count, self.orientation_count)
            .second_order(j1, l1, j2, l2)
    }

    /// The indices into the full set that the item with this label is built from.
    pub fn sources(&self, label: &SummaryLabel) -> Vec<usize> {
        let ln = self.orientation_count;
        match (label.kind, label.j1, label.j2) {
            (SummaryKind::Mean, _, _) => vec![CoefficientLayout::MEAN],
            (SummaryKind::Rms, _, _) => vec![CoefficientLayout::VARIANCE],
            (SummaryKind::Modulus | SummaryKind::ModulusAnisotropy, Some(j), _) => {
                (0..ln).map(|l| self.s1(j, l)).collect()
            }
            (SummaryKind::Intermittency, Some(j1), Some(j2)) => {
                let mut v: Vec<usize> = (0..ln).map(|l| self.s1(j1, l)).collect();
                for l1 in 0..ln {
                    v.extend((0..ln).map(|l2| self.s2(j1, l1, j2, l2)));
                }
                v
            }
            (SummaryKind::Alignment, Some(j1), Some(j2)) => {
                let mut v = Vec::new();
                for l1 in 0..ln {
                    v.extend((0..ln).map(|l2| self.s2(j1, l1, j2, l2)));
                }
                v
            }
            _ => Vec::new(),
        }
    }

    /// Σ_l S1(j,l) e^{−2πi l/L} as (h0, Re h1, Im h1).
    fn first_order_harmonics(&self, c: &[f64], j: usize) -> (f64, f64, f64) {
        let (mut h0, mut re, mut im) = (0.0, 0.0, 0.0);
        for l in 0..self.orientation_count {
            let v = c[self.s1(j, l)];
            let (cs, sn) = self.cos_sin(l);
            h0 += v;
            re += v * cs;
            im -= v * sn;
        }
        (h0, re, im)
    }

    /// Σ_{l1,l2} S2 and Σ_{l1,l2} S2 cos(2π(l2 − l1)/L) for one scale pair.
    fn second_order_harmonics(&self, c: &[f64], j1: usize, j2: usize) -> (f64, f64) {
        let ln = self.orientation_count;
        let (mut t0, mut t1) = (0.0, 0.0);
        for delta in 0..ln {
            let mut t = 0.0;
            for l1 in 0..ln {
                t += c[self.s2(j1, l1, j2, (l1 + delta) % ln)];
            }
            t0 += t;
            t1 += t * self.cos_sin(delta).0;
        }
        (t0, t1)
    }

    /// The items from the full coefficient values `c` (layout of [`CoefficientLayout`]).
    pub fn values(&self, c: &[f64]) -> Vec<f64> {
        let ln = self.orientation_count as f64;
        self.labels()
            .iter()
            .map(|label| match (label.kind, label.j1, label.j2) {
                (SummaryKind::Mean, _, _) => c[CoefficientLayout::MEAN],
                (SummaryKind::Rms, _, _) => c[CoefficientLayout::VARIANCE].max(0.0).sqrt(),
                (SummaryKind::Modulus, Some(j), _) => self.first_order_harmonics(c, j).0 / ln,
                (SummaryKind::ModulusAnisotropy, Some(j), _) => {
                    let (h0, re, im) = self.first_order_harmonics(c, j);
                    re.hypot(im) / h0
                }
                (SummaryKind::Intermittency, Some(j1), Some(j2)) => {
                    let h0 = self.first_order_harmonics(c, j1).0;
                    self.second_order_harmonics(c, j1, j2).0 / (ln * h0)
                }
                (SummaryKind::Alignment, Some(j1), Some(j2)) => {
                    let (t0, t1) = self.second_order_harmonics(c, j1, j2);
                    t1 / t0
                }
                _ => f64::NAN,
            })
            .collect()
    }

    /// Trust flag of each item: every coefficient it is built from is trusted.
    pub fn trusted(&self, trusted: &[bool]) -> Vec<bool> {
        self.labels()
            .iter()
            .map(|label| self.sources(label).iter().all(|&i| trusted[i]))
            .collect()
    }

    /// Adjoint of [`Self::values`] at `c`: given ∂L/∂v for every item, returns ∂L/∂c (same
    /// length as `c`). Where an item is not differentiable (rms at zero variance, a vanishing
    /// first harmonic) the one-sided derivative of the smooth part is used.
    pub fn adjoint(&self, c: &[f64], dv: &[f64]) -> Vec<f64> {
        let ln = self.orientation_count;
        let lf = ln as f64;
        let mut dc = vec![0.0; c.len()];
        for (label, &g) in self.labels().iter().zip(dv) {
            if g == 0.0 {
                continue;
            }
            match (label.kind, label.j1, label.j2) {
                (SummaryKind::Mean, _, _) => dc[CoefficientLayout::MEAN] += g,
                (SummaryKind::Rms, _, _) => {
                    let r = c[CoefficientLayout::VARIANCE].max(0.0).sqrt();
                    if r > 0.0 {
                        dc[CoefficientLayout::VARIANCE] += g / (2.0 * r);
                    }
                }
                (SummaryKind::Modulus, Some(j), _) => {
                    for l in 0..ln {
                        dc[self.s1(j, l)] += g / lf;
                    }
                }
                (SummaryKind::ModulusAnisotropy, Some(j), _) => {
                    // r = |h1|/h0: ∂r/∂S1_l = (Re h1 cos θ_l − Im h1 sin θ_l)/(|h1| h0) − r/h0
                    let (h0, re, im) = self.first_order_harmonics(c, j);
                    let a = re.hypot(im);
                    let r = a / h0;
                    for l in 0..ln {
                        let (cs, sn) = self.cos_sin(l);
                        let da = if a > 0.0 {
                            (re * cs - im * sn) / a
                        } else {
                            0.0
                        };
                        dc[self.s1(j, l)] += g * (da / h0 - r / h0);
                    }
                }
                (SummaryKind::Intermittency, Some(j1), Some(j2)) => {
                    // q = T0/(L h0): ∂q/∂S2 = 1/(L h0), ∂q/∂S1_l = −q/h0
                    let h0 = self.first_order_harmonics(c, j1).0;
                    let t0 = self.second_order_harmonics(c, j1, j2).0;
                    let q = t0 / (lf * h0);
                    for l1 in 0..ln {
                        dc[self.s1(j1, l1)] -= g * q / h0;
                        for l2 in 0..ln {
                            dc[self.s2(j1, l1, j2, l2)] += g / (lf * h0);
                        }
                    }
                }
                (SummaryKind::Alignment, Some(j1), Some(j2)) => {
                    // α = T1/T0: ∂α/∂S2(l1,l2) = (cos(2π(l2 − l1)/L) − α)/T0
                    let (t0, t1) = self.second_order_harmonics(c, j1, j2);
                    let alpha = t1 / t0;
                    for l1 in 0..ln {
                        for l2 in 0..ln {
                            let cs = self.cos_sin(l2 + ln - l1).0;
                            dc[self.s2(j1, l1, j2, l2)] += g * (cs - alpha) / t0;
                        }
                    }
                }
                _ => {}
            }
        }
        dc
    }
}

impl CoefficientSet {
    /// The coefficient with this label, if present.
    pub fn get(&self, label: &CoefficientLabel) -> Option<&Coefficient> {
        self.coefficients.iter().find(|c| &c.label == label)
    }

    /// The layout of this set's J and L.
    pub fn layout(&self) -> CoefficientLayout {
        CoefficientLayout::new(self.scale_count, self.orientation_count)
    }

    /// S1(j,l). Panics if j ≥ J or l ≥ L (use [`Self::get`] for a checked look-up).
    pub fn first_order(&self, j: usize, l: usize) -> &Coefficient {
        &self.coefficients[self.layout().first_order(j, l)]
    }

    /// P(j,l). Panics if j ≥ J or l ≥ L.
    pub fn band_power(&self, j: usize, l: usize) -> &Coefficient {
        &self.coefficients[self.layout().band_power(j, l)]
    }

    /// S2(j1,l1,j2,l2) for j1 < j2 < J. Panics outside that range.
    pub fn second_order(&self, j1: usize, l1: usize, j2: usize, l2: usize) -> &Coefficient {
        &self.coefficients[self.layout().second_order(j1, l1, j2, l2)]
    }

    /// Weighted mean (order 0).
    pub fn mean(&self) -> &Coefficient {
        &self.coefficients[CoefficientLayout::MEAN]
    }

    /// Weighted variance (order 0).
    pub fn variance(&self) -> &Coefficient {
        &self.coefficients[CoefficientLayout::VARIANCE]
    }

    /// The orientation-harmonic summary (module documentation); needs L ≥ 2.
    pub fn summary(&self) -> Result<Vec<SummaryStatistic>> {
        let layout = OrientationSummary::new(self.scale_count, self.orientation_count)?;
        let values: Vec<f64> = self.coefficients.iter().map(|c| c.value).collect();
        let trusted: Vec<bool> = self.coefficients.iter().map(|c| c.trusted).collect();
        Ok(layout.statistics(&values, &trusted))
    }
}

/// What a cross coefficient of two maps A and B measures (definitions and formulas in
/// [`crate::scattering::transform`], section "Cross statistics of two maps").
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CrossKind {
    /// P_AB(j,l) = ⟨Re[g_A g_B*] / N_j⟩, g = I∗ψ_{j,l}: the cross band power.
    CrossBandPower,
    /// X1(j,l) = ⟨I_field · (U^envelope_{j,l} − μ)⟩: one map against the other's modulus.
    EnvelopeFirstOrder,
    /// X2(j1,l1,j2,l2) = ⟨Re[(I_field∗ψ_{j2,l2}) · conj(Ĩ^envelope_{j1,l1}∗ψ_{j2,l2})] / N_{j2}⟩.
    EnvelopeSecondOrder,
}

/// Which map of the pair plays which role in a cross coefficient.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CrossDirection {
    /// Symmetric in the two maps (the cross band power).
    Both,
    /// The first map's field against the second map's wavelet modulus (A ← B).
    FirstAgainstSecondModulus,
    /// The second map's field against the first map's wavelet modulus (B ← A).
    SecondAgainstFirstModulus,
}

impl CrossDirection {
    /// Short tag used in names: `ab` (both), `a_on_b`, `b_on_a`.
    pub fn tag(self) -> &'static str {
        match self {
            CrossDirection::Both => "ab",
            CrossDirection::FirstAgainstSecondModulus => "a_on_b",
            CrossDirection::SecondAgainstFirstModulus => "b_on_a",
        }
    }
}

/// Label of one cross coefficient.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
pub struct CrossLabel {
    /// What is measured.
    pub kind: CrossKind,
    /// Which map is the field and which the modulus.
    pub direction: CrossDirection,
    /// Number of wavelets applied to the modulus side (1 or 2).
    pub order: u8,
    /// The wavelets applied (first always; second for order 2 only), serialised as the
    /// fields j1, l1, j2, l2.
    #[serde(flatten)]
    pub path: WaveletPath,
}

impl CrossLabel {
    /// The column name of this coefficient, e.g. `cross_bandpower_ab_j2_l0`,
    /// `cross_envelope1_a_on_b_j2_l0`, `cross_envelope2_b_on_a_j1_l0_j2_l3`.
    pub fn name(&self) -> String {
        let (stem, wavelets) = match self.kind {
            CrossKind::CrossBandPower => ("cross_bandpower", 1),
            CrossKind::EnvelopeFirstOrder => ("cross_envelope1", 1),
            CrossKind::EnvelopeSecondOrder => ("cross_envelope2", 2),
        };
        let tag = self.direction.tag();
        format!("{stem}_{tag}{}", self.path.suffix(wavelets))
    }
}

/// The labels of the cross set for J scales and L orientations, in the transform's order:
/// P_AB(j,l); X1 A←B (j,l); X1 B←A (j,l); X2 A←B (j1,l1,j2,l2); X2 B←A (j1,l1,j2,l2), with
/// (j,l) nested as j, l and order 2 nested as j1, l1, j2 > j1, l2 (as in [`CoefficientLayout`]).
pub fn cross_labels(scale_count: usize, orientation_count: usize) -> Vec<CrossLabel> {
    let mut labels = Vec::new();
    let first = [
        (CrossKind::CrossBandPower, CrossDirection::Both),
        (
            CrossKind::EnvelopeFirstOrder,
            CrossDirection::FirstAgainstSecondModulus,
        ),
        (
            CrossKind::EnvelopeFirstOrder,
            CrossDirection::SecondAgainstFirstModulus,
        ),
    ];
    for (kind, direction) in first {
        for j in 0..scale_count {
            for l in 0..orientation_count {
                labels.push(CrossLabel {
                    kind,
                    direction,
                    order: 1,
                    path: WaveletPath::first(j, l),
                });
            }
        }
    }
    for direction in [
        CrossDirection::FirstAgainstSecondModulus,
        CrossDirection::SecondAgainstFirstModulus,
    ] {
        for j1 in 0..scale_count {
            for l1 in 0..orientation_count {
                for j2 in (j1 + 1)..scale_count {
                    for l2 in 0..orientation_count {
                        labels.push(CrossLabel {
                            kind: CrossKind::EnvelopeSecondOrder,
                            direction,
                            order: 2,
                            path: WaveletPath::second(j1, l1, j2, l2),
                        });
                    }
                }
            }
        }
    }
    labels
}

/// One pooled cross coefficient with its label.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct CrossCoefficient {
    /// Which coefficient this is.
    #[serde(flatten)]
    pub label: CrossLabel,
    /// Pooled value (NaN, serialised as null, when no pooling weight remained).
    pub value: f64,
    /// True when the kept pooling weight is at least the trusted fraction of the footprint.
    pub trusted: bool,
    /// Kept pooling weight over footprint weight.
    pub kept_weight_fraction: f64,
}

/// The cross coefficients of two maps on their common footprint.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CrossCoefficientSet {
    /// Number of scales J.
    pub scale_count: usize,
    /// Number of orientations L.
    pub orientation_count: usize,
    /// Coefficients in the order of [`cross_labels`].
    pub coefficients: Vec<CrossCoefficient>,
}

impl CrossCoefficientSet {
    /// The coefficient with this label, if present.
    pub fn get(&self, label: &CrossLabel) -> Option<&CrossCoefficient> {
        self.coefficients.iter().find(|c| &c.label == label)
    }

    fn first_block(&self, block: usize, j: usize, l: usize) -> &CrossCoefficient {
        let layout = CoefficientLayout::new(self.scale_count, self.orientation_count);
        &self.coefficients[block * layout.first_order_count() + layout.pair_offset(j, l)]
    }

    /// P_AB(j,l). Panics if j ≥ J or l ≥ L.
    pub fn band_power(&self, j: usize, l: usize) -> &CrossCoefficient {
        self.first_block(0, j, l)
    }

    /// X1(j,l) in the given direction (`Both` is not an X1 direction and panics).
    /// Panics if j ≥ J or l ≥ L.
    pub fn envelope_first_order(
        &self,
        direction: CrossDirection,
        j: usize,
        l: usize,
    ) -> &CrossCoefficient {
        match direction {
            CrossDirection::FirstAgainstSecondModulus => self.first_block(1, j, l),
            CrossDirection::SecondAgainstFirstModulus => self.first_block(2, j, l),
            CrossDirection::Both => panic!("X1 has a direction: A against B or B against A"),
        }
    }

    /// X2(j1,l1,j2,l2) in the given direction, for j1 < j2 < J. Panics outside that range or
    /// for `Both`.
    pub fn envelope_second_order(
        &self,
        direction: CrossDirection,
        j1: usize,
        l1: usize,
        j2: usize,
        l2: usize,
    ) -> &CrossCoefficient {
        let layout = CoefficientLayout::new(self.scale_count, self.orientation_count);
        let block = match direction {
            CrossDirection::FirstAgainstSecondModulus => 0,
            CrossDirection::SecondAgainstFirstModulus => 1,
            CrossDirection::Both => panic!("X2 has a direction: A against B or B against A"),
        };
        let idx = 3 * layout.first_order_count()
            + block * layout.second_order_count()
            + layout.second_order_offset(j1, l1, j2, l2);
        &self.coefficients[idx]
    }
}
