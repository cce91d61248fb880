//! Coefficient labels, the full labelled set of scattering coefficients and the compact,
//! interpretable summary derived from it.
//!
//! # Compact set
//!
//! Computed from the full set of J scales and L orientations (L even):
//!
//! * `mean`, `variance` — order 0, the weighted mean and variance of the field.
//! * `amplitude_scale_{j}` — ⟨S1(j,l)⟩_l, the orientation-averaged first-order coefficient; it
//!   grows like the square root of the power in the band of scale j (J values).
//! * `sparsity_scales_{j1}_{j2}` — ⟨S2(j1,l1,j2,l2) / S1(j1,l1)⟩_{l1,l2}: how strongly the
//!   envelope of the scale-j1 response fluctuates at scale j2, relative to its mean. Small for
//!   Gaussian fields, larger for intermittent fields with isolated peaks or voids
//!   (J(J−1)/2 values).
//! * `shape_anisotropy_scales_{j1}_{j2}` — Σ_{l1} S2(j1,l1,j2,l1) / Σ_{l1} S2(j1,l1,j2,l1+L/2):
//!   second-order response with the second wavelet parallel to the first, over the response with
//!   it perpendicular. Structures elongated along their wave fronts (filaments) have envelopes
//!   that vary along the first wavelet's direction and raise the ratio; round structures
//!   (bubbles, blobs) bring it towards 1 (J(J−1)/2 values).
//!
//! For J = 6 this gives 2 + 6 + 15 + 15 = 38 numbers. A compact item is trusted when every
//! coefficient it is built from is trusted.

use crate::{Error, Result};
use serde::Serialize;

/// What a coefficient measures.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum CoefficientKind {
    /// Weighted mean of the field (order 0).
    Mean,
    /// Weighted variance of the field (order 0).
    Variance,
    /// S1(j,l) = ⟨|I∗ψ_{j,l}|⟩.
    FirstOrder,
    /// P(j,l) = ⟨|I∗ψ_{j,l}|²⟩.
    BandPower,
    /// S2(j1,l1,j2,l2) = ⟨||I∗ψ_{j1,l1}|∗ψ_{j2,l2}|⟩.
    SecondOrder,
}

/// Label of one coefficient: its kind, order and the scales/orientations it involves.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
pub struct CoefficientLabel {
    /// What is measured.
    pub kind: CoefficientKind,
    /// Number of wavelets applied (0, 1 or 2).
    pub order: u8,
    /// Scale of the first wavelet.
    pub j1: Option<usize>,
    /// Orientation of the first wavelet.
    pub l1: Option<usize>,
    /// Scale of the second wavelet.
    pub j2: Option<usize>,
    /// Orientation of the second wavelet.
    pub l2: Option<usize>,
}

impl CoefficientLabel {
    /// An order-0 label (mean or variance).
    pub fn order_zero(kind: CoefficientKind) -> Self {
        Self {
            kind,
            order: 0,
            j1: None,
            l1: None,
            j2: None,
            l2: None,
        }
    }

    /// An order-1 label (first order or band power) at scale j, orientation l.
    pub fn order_one(kind: CoefficientKind, j: usize, l: usize) -> Self {
        Self {
            kind,
            order: 1,
            j1: Some(j),
            l1: Some(l),
            j2: None,
            l2: None,
        }
    }

    /// An order-2 label.
    pub fn order_two(j1: usize, l1: usize, j2: usize, l2: usize) -> Self {
        Self {
            kind: CoefficientKind::SecondOrder,
            order: 2,
            j1: Some(j1),
            l1: Some(l1),
            j2: Some(j2),
            l2: Some(l2),
        }
    }
}

/// The labels of the full set for J scales and L orientations, in the transform's order: mean,
/// variance, S1(j,l), band powers P(j,l), then S2(j1,l1,j2,l2) nested as j1, l1, j2 > j1, l2.
pub fn coefficient_labels(scale_count: usize, orientation_count: usize) -> Vec<CoefficientLabel> {
    let mut labels = vec![
        CoefficientLabel::order_zero(CoefficientKind::Mean),
        CoefficientLabel::order_zero(CoefficientKind::Variance),
    ];
    for kind in [CoefficientKind::FirstOrder, CoefficientKind::BandPower] {
        for j in 0..scale_count {
            for l in 0..orientation_count {
                labels.push(CoefficientLabel::order_one(kind, j, l));
            }
        }
    }
    for j1 in 0..scale_count {
        for l1 in 0..orientation_count {
            for j2 in (j1 + 1)..scale_count {
                for l2 in 0..orientation_count {
                    labels.push(CoefficientLabel::order_two(j1, l1, j2, l2));
                }
            }
        }
    }
    labels
}

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

/// One named item of the compact set.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct CompactStatistic {
    /// Self-explanatory name (see the module documentation).
    pub name: String,
    /// Value.
    pub value: f64,
    /// True when every coefficient it is built from is trusted.
    pub trusted: bool,
}

impl CoefficientSet {
    /// The coefficient with this label, if present.
    pub fn get(&self, label: &CoefficientLabel) -> Option<&Coefficient> {
        self.coefficients.iter().find(|c| &c.label == label)
    }

    fn index_first(&self, j: usize, l: usize) -> usize {
        2 + j * self.orientation_count + l
    }

    /// S1(j,l). Panics if j ≥ J or l ≥ L (use [`Self::get`] for a checked look-up).
    pub fn first_order(&self, j: usize, l: usize) -> &Coefficient {
        &self.coefficients[self.index_first(j, l)]
    }

    /// P(j,l). Panics if j ≥ J or l ≥ L.
    pub fn band_power(&self, j: usize, l: usize) -> &Coefficient {
        &self.coefficients[self.index_first(j, l) + self.scale_count * self.orientation_count]
    }

    /// S2(j1,l1,j2,l2) for j1 < j2 < J. Panics outside that range.
    pub fn second_order(&self, j1: usize, l1: usize, j2: usize, l2: usize) -> &Coefficient {
        let (jn, ln) = (self.scale_count, self.orientation_count);
        let mut idx = 2 + 2 * jn * ln;
        // Layout: for j1 { for l1 { for j2 > j1 { for l2 } } }
        for a in 0..j1 {
            idx += ln * (jn - a - 1) * ln;
        }
        idx += l1 * (jn - j1 - 1) * ln + (j2 - j1 - 1) * ln + l2;
        &self.coefficients[idx]
    }

    /// Weighted mean (order 0).
    pub fn mean(&self) -> &Coefficient {
        &self.coefficients[0]
    }

    /// Weighted variance (order 0).
    pub fn variance(&self) -> &Coefficient {
        &self.coefficients[1]
    }

    /// The compact interpretable set (module documentation). Needs an even number of
    /// orientations for the parallel/perpendicular ratio.
    pub fn compact(&self) -> Result<Vec<CompactStatistic>> {
        let (jn, ln) = (self.scale_count, self.orientation_count);
        if ln % 2 != 0 {
            return Err(Error::Setting(format!(
                "the compact set needs an even number of orientations L to pair perpendicular wavelets, got L = {ln}"
            )));
        }
        let mut out = vec![
            CompactStatistic {
                name: "mean".into(),
                value: self.mean().value,
                trusted: self.mean().trusted,
            },
            CompactStatistic {
                name: "variance".into(),
                value: self.variance().value,
                trusted: self.variance().trusted,
            },
        ];
        for j in 0..jn {
            let mut sum = 0.0;
            let mut trusted = true;
            for l in 0..ln {
                let c = self.first_order(j, l);
                sum += c.value;
                trusted &= c.trusted;
            }
            out.push(CompactStatistic {
                name: format!("amplitude_scale_{j}"),
                value: sum / ln as f64,
                trusted,
            });
        }
        for j1 in 0..jn {
            for j2 in (j1 + 1)..jn {
                let mut sum = 0.0;
                let mut trusted = true;
                for l1 in 0..ln {
                    let s1 = self.first_order(j1, l1);
                    trusted &= s1.trusted;
                    for l2 in 0..ln {
                        let s2 = self.second_order(j1, l1, j2, l2);
                        sum += s2.value / s1.value;
                        trusted &= s2.trusted;
                    }
                }
                out.push(CompactStatistic {
                    name: format!("sparsity_scales_{j1}_{j2}"),
                    value: sum / (ln * ln) as f64,
                    trusted,
                });
            }
        }
        for j1 in 0..jn {
            for j2 in (j1 + 1)..jn {
                let mut parallel = 0.0;
                let mut perpendicular = 0.0;
                let mut trusted = true;
                for l1 in 0..ln {
                    let a = self.second_order(j1, l1, j2, l1);
                    let b = self.second_order(j1, l1, j2, (l1 + ln / 2) % ln);
                    parallel += a.value;
                    perpendicular += b.value;
                    trusted &= a.trusted && b.trusted;
                }
                out.push(CompactStatistic {
                    name: format!("shape_anisotropy_scales_{j1}_{j2}"),
                    value: parallel / perpendicular,
                    trusted,
                });
            }
        }
        Ok(out)
    }
}

/// What a cross coefficient of two maps A and B measures (definitions and formulas in
/// [`crate::transform`], section "Cross statistics of two maps").
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
    /// Scale of the first wavelet.
    pub j1: usize,
    /// Orientation of the first wavelet.
    pub l1: usize,
    /// Scale of the second wavelet (order 2 only).
    pub j2: Option<usize>,
    /// Orientation of the second wavelet (order 2 only).
    pub l2: Option<usize>,
}

impl CrossLabel {
    /// The column name of this coefficient, e.g. `cross_bandpower_ab_j2_l0`,
    /// `cross_envelope1_a_on_b_j2_l0`, `cross_envelope2_b_on_a_j1_l0_j2_l3`.
    pub fn name(&self) -> String {
        let tag = self.direction.tag();
        match self.kind {
            CrossKind::CrossBandPower => format!("cross_bandpower_{tag}_j{}_l{}", self.j1, self.l1),
            CrossKind::EnvelopeFirstOrder => {
                format!("cross_envelope1_{tag}_j{}_l{}", self.j1, self.l1)
            }
            CrossKind::EnvelopeSecondOrder => format!(
                "cross_envelope2_{tag}_j{}_l{}_j{}_l{}",
                self.j1,
                self.l1,
                self.j2.unwrap_or(0),
                self.l2.unwrap_or(0)
            ),
        }
    }
}

/// The labels of the cross set for J scales and L orientations, in the transform's order:
/// P_AB(j,l); X1 A←B (j,l); X1 B←A (j,l); X2 A←B (j1,l1,j2,l2); X2 B←A (j1,l1,j2,l2), with
/// (j,l) nested as j, l and order 2 nested as j1, l1, j2 > j1, l2 (as in [`coefficient_labels`]).
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
                    j1: j,
                    l1: l,
                    j2: None,
                    l2: None,
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
                            j1,
                            l1,
                            j2: Some(j2),
                            l2: Some(l2),
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
        let jl = self.scale_count * self.orientation_count;
        &self.coefficients[block * jl + j * self.orientation_count + l]
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
        let (jn, ln) = (self.scale_count, self.orientation_count);
        let second_count = ln * ln * jn * jn.saturating_sub(1) / 2;
        let block = match direction {
            CrossDirection::FirstAgainstSecondModulus => 0,
            CrossDirection::SecondAgainstFirstModulus => 1,
            CrossDirection::Both => panic!("X2 has a direction: A against B or B against A"),
        };
        let mut idx = 3 * jn * ln + block * second_count;
        for a in 0..j1 {
            idx += ln * (jn - a - 1) * ln;
        }
        idx += l1 * (jn - j1 - 1) * ln + (j2 - j1 - 1) * ln + l2;
        &self.coefficients[idx]
    }
}
