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
