//! The one layout of the full coefficient set: which coefficient sits at which position, and
//! the names a coefficient goes by.
//!
//! For J scales and L orientations the full set holds, in this order:
//!
//! | positions | coefficients | nesting |
//! |---|---|---|
//! | 0, 1 | mean, variance (order 0) | |
//! | 2 … 2 + JL − 1 | S1(j,l) | j, l |
//! | 2 + JL … 2 + 2JL − 1 | band powers P(j,l) | j, l |
//! | 2 + 2JL … | S2(j1,l1,j2,l2), j1 < j2 | j1, l1, j2 > j1, l2 |
//!
//! 2 + 2JL + L²J(J−1)/2 coefficients in all. Every reader and writer of the full set (the
//! engine, pooling, the summary, synthesis, the measurement file, the ensemble's columns) asks
//! [`CoefficientLayout`] for positions and [`CoefficientLabel::name`] for names.
//!
//! A coefficient has two spellings ([`CoefficientSpelling`]): the short one of table columns
//! and per-tile statistics (`S1_j0_l1`, `bandpower_j0_l1`, `S2_j0_l1_j2_l3`) and the spelled-out
//! one of synthesis targets (`first_order_j0_l1`, `band_power_j0_l1`,
//! `second_order_j0_l1_j2_l3`); order 0 is `mean` and `variance` in both.

use serde::{Deserialize, Serialize};

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

/// The two spellings of a coefficient name (module documentation).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CoefficientSpelling {
    /// `S1_j0_l1`, `bandpower_j0_l1`, `S2_j0_l1_j2_l3`: table columns, per-tile statistics.
    Short,
    /// `first_order_j0_l1`, `band_power_j0_l1`, `second_order_j0_l1_j2_l3`: synthesis.
    SpelledOut,
}

impl CoefficientKind {
    /// The name of an order-0 kind, or the stem of the names of the other kinds in a spelling
    /// (`S1`, `bandpower`, `S2` short; `first_order`, `band_power`, `second_order` spelled out).
    pub fn stem(self, spelling: CoefficientSpelling) -> &'static str {
        use CoefficientSpelling::{Short, SpelledOut};
        match (self, spelling) {
            (CoefficientKind::Mean, _) => "mean",
            (CoefficientKind::Variance, _) => "variance",
            (CoefficientKind::FirstOrder, Short) => "S1",
            (CoefficientKind::FirstOrder, SpelledOut) => "first_order",
            (CoefficientKind::BandPower, Short) => "bandpower",
            (CoefficientKind::BandPower, SpelledOut) => "band_power",
            (CoefficientKind::SecondOrder, Short) => "S2",
            (CoefficientKind::SecondOrder, SpelledOut) => "second_order",
        }
    }
}

/// The wavelets a coefficient went through: scale j and orientation l of the first wavelet
/// and of the second. An index is `None` where no such wavelet was applied (order 0, and the
/// second wavelet of order 1) or, in a selection ([`Self::selects`]), where any value will do.
/// Serialised (flattened into its owner) as the fields `j1`, `l1`, `j2`, `l2`; read back, an
/// absent or null field is `None`.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub struct WaveletPath {
    /// Scale of the first wavelet.
    pub j1: Option<usize>,
    /// Orientation of the first wavelet.
    pub l1: Option<usize>,
    /// Scale of the second wavelet.
    pub j2: Option<usize>,
    /// Orientation of the second wavelet.
    pub l2: Option<usize>,
}

impl WaveletPath {
    /// No wavelet (order 0).
    pub const NONE: Self = Self {
        j1: None,
        l1: None,
        j2: None,
        l2: None,
    };

    /// One wavelet of scale j, orientation l (order 1).
    pub fn first(j: usize, l: usize) -> Self {
        Self {
            j1: Some(j),
            l1: Some(l),
            ..Self::NONE
        }
    }

    /// Two wavelets, (j1, l1) then (j2, l2) (order 2).
    pub fn second(j1: usize, l1: usize, j2: usize, l2: usize) -> Self {
        Self {
            j1: Some(j1),
            l1: Some(l1),
            j2: Some(j2),
            l2: Some(l2),
        }
    }

    /// True when neither index of the second wavelet is given.
    pub fn has_no_second(&self) -> bool {
        self.j2.is_none() && self.l2.is_none()
    }

    /// True when no index is given.
    pub fn is_empty(&self) -> bool {
        self.j1.is_none() && self.l1.is_none() && self.has_no_second()
    }

    /// The scales given, the first wavelet's first.
    pub fn scales(&self) -> impl Iterator<Item = usize> {
        [self.j1, self.j2].into_iter().flatten()
    }

    /// True when every given scale is below `scales` and every given orientation below
    /// `orientations`.
    pub fn within(&self, scales: usize, orientations: usize) -> bool {
        let l_ok = [self.l1, self.l2]
            .into_iter()
            .flatten()
            .all(|l| l < orientations);
        self.scales().all(|j| j < scales) && l_ok
    }

    /// True when this path, read as a selection, takes `other`: each index given here equals
    /// the one of `other`; an index not given here takes any.
    pub fn selects(&self, other: &WaveletPath) -> bool {
        let same = |want: Option<usize>, got: Option<usize>| want.is_none() || want == got;
        same(self.j1, other.j1)
            && same(self.l1, other.l1)
            && same(self.j2, other.j2)
            && same(self.l2, other.l2)
    }

    /// The name suffix of a coefficient of `wavelets` wavelets: empty for 0, `_j{j1}_l{l1}`
    /// for 1, `_j{j1}_l{l1}_j{j2}_l{l2}` for 2 (a missing index is written 0).
    pub fn suffix(&self, wavelets: u8) -> String {
        let (j1, l1) = (self.j1.unwrap_or(0), self.l1.unwrap_or(0));
        let (j2, l2) = (self.j2.unwrap_or(0), self.l2.unwrap_or(0));
        match wavelets {
            0 => String::new(),
            1 => format!("_j{j1}_l{l1}"),
            _ => format!("_j{j1}_l{l1}_j{j2}_l{l2}"),
        }
    }

    /// The path written by the parts of a name between underscores: `j{j}`, `j{j}_l{l}`,
    /// `j{j1}_j{j2}`, `j{j1}_l{l1}_j{j2}_l{l2}` (indices decimal digits only; the forms
    /// without orientations leave them unset). None for any other parts.
    pub fn parse_parts(parts: &[&str]) -> Option<Self> {
        let index = |part: &str, letter: char| -> Option<usize> {
            let digits = part.strip_prefix(letter)?;
            let ok = !digits.is_empty() && digits.bytes().all(|b| b.is_ascii_digit());
            ok.then(|| digits.parse().ok())?
        };
        let (j, l) = (|p| index(p, 'j'), |p| index(p, 'l'));
        match parts {
            [a] => Some(Self {
                j1: Some(j(a)?),
                ..Self::NONE
            }),
            [a, b] if b.starts_with('l') => Some(Self::first(j(a)?, l(b)?)),
            [a, b] => Some(Self {
                j1: Some(j(a)?),
                j2: Some(j(b)?),
                ..Self::NONE
            }),
            [a, b, c, d] => Some(Self::second(j(a)?, l(b)?, j(c)?, l(d)?)),
            _ => None,
        }
    }

    /// The number of wavelets of a complete path: 0 with no index, 1 with (j1, l1) alone, 2
    /// with all four; None for a partial path.
    pub fn wavelet_count(&self) -> Option<u8> {
        match (self.j1, self.l1, self.j2, self.l2) {
            (None, None, None, None) => Some(0),
            (Some(_), Some(_), None, None) => Some(1),
            (Some(_), Some(_), Some(_), Some(_)) => Some(2),
            _ => None,
        }
    }
}

/// Label of one coefficient: its kind, order and the scales/orientations it involves.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize)]
pub struct CoefficientLabel {
    /// What is measured.
    pub kind: CoefficientKind,
    /// Number of wavelets applied (0, 1 or 2).
    pub order: u8,
    /// The wavelets applied (serialised as the fields j1, l1, j2, l2).
    #[serde(flatten)]
    pub path: WaveletPath,
}

impl CoefficientLabel {
    /// An order-0 label (mean or variance).
    pub fn order_zero(kind: CoefficientKind) -> Self {
        Self {
            kind,
            order: 0,
            path: WaveletPath::NONE,
        }
    }

    /// An order-1 label (first order or band power) at scale j, orientation l.
    pub fn order_one(kind: CoefficientKind, j: usize, l: usize) -> Self {
        Self {
            kind,
            order: 1,
            path: WaveletPath::first(j, l),
        }
    }

    /// An order-2 label.
    pub fn order_two(j1: usize, l1: usize, j2: usize, l2: usize) -> Self {
        Self {
            kind: CoefficientKind::SecondOrder,
            order: 2,
            path: WaveletPath::second(j1, l1, j2, l2),
        }
    }

    /// The number of wavelets a kind implies: 0 for mean and variance, 1 for S1 and band
    /// powers, 2 for S2.
    fn wavelets_of(kind: CoefficientKind) -> u8 {
        match kind {
            CoefficientKind::Mean | CoefficientKind::Variance => 0,
            CoefficientKind::FirstOrder | CoefficientKind::BandPower => 1,
            CoefficientKind::SecondOrder => 2,
        }
    }

    /// The coefficient's name in a spelling: the stem of its kind followed by `_j{j1}_l{l1}`
    /// (orders 1 and 2) and `_j{j2}_l{l2}` (order 2); a missing index is written 0
    /// ([`WaveletPath::suffix`]).
    pub fn name(&self, spelling: CoefficientSpelling) -> String {
        let stem = self.kind.stem(spelling);
        format!("{stem}{}", self.path.suffix(Self::wavelets_of(self.kind)))
    }
}

impl CoefficientLabel {
    /// The label a name in a spelling stands for (the inverse of [`Self::name`]); None when
    /// the name is not one. Indices are decimal digits only.
    pub fn parse(name: &str, spelling: CoefficientSpelling) -> Option<Self> {
        let kinds = [
            CoefficientKind::Mean,
            CoefficientKind::Variance,
            CoefficientKind::FirstOrder,
            CoefficientKind::BandPower,
            CoefficientKind::SecondOrder,
        ];
        kinds.into_iter().find_map(|kind| {
            let rest = name.strip_prefix(kind.stem(spelling))?;
            let wavelets = Self::wavelets_of(kind);
            let path = match rest.strip_prefix('_') {
                None if rest.is_empty() => WaveletPath::NONE,
                None => return None,
                Some(tail) => WaveletPath::parse_parts(&tail.split('_').collect::<Vec<_>>())?,
            };
            (path.wavelet_count() == Some(wavelets)).then_some(Self {
                kind,
                order: wavelets,
                path,
            })
        })
    }
}

/// The positions of the full set of J scales and L orientations (module documentation).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct CoefficientLayout {
    scale_count: usize,
    orientation_count: usize,
}

impl CoefficientLayout {
    /// Position of the weighted mean.
    pub const MEAN: usize = 0;
    /// Position of the weighted variance.
    pub const VARIANCE: usize = 1;
    /// Position of S1(0,0), the first coefficient of order 1.
    pub const FIRST_ORDER_START: usize = 2;

    /// The layout of J scales and L orientations.
    pub fn new(scale_count: usize, orientation_count: usize) -> Self {
        Self {
            scale_count,
            orientation_count,
        }
    }

    /// Number of scales J.
    pub fn scale_count(&self) -> usize {
        self.scale_count
    }

    /// Number of orientations L.
    pub fn orientation_count(&self) -> usize {
        self.orientation_count
    }

    /// Number of (j, l) pairs, JL: the count of S1 and, again, of band powers.
    pub fn first_order_count(&self) -> usize {
        self.scale_count * self.orientation_count
    }

    /// Number of S2 coefficients, L²J(J−1)/2.
    pub fn second_order_count(&self) -> usize {
        let (jn, ln) = (self.scale_count, self.orientation_count);
        ln * ln * jn * jn.saturating_sub(1) / 2
    }

    /// Number of coefficients in the full set, 2 + 2JL + L²J(J−1)/2.
    pub fn len(&self) -> usize {
        Self::FIRST_ORDER_START + 2 * self.first_order_count() + self.second_order_count()
    }

    /// False: the full set always holds the mean and the variance.
    pub fn is_empty(&self) -> bool {
        false
    }

    /// Position of P(0,0), the first band power: 2 + JL.
    pub fn band_power_start(&self) -> usize {
        Self::FIRST_ORDER_START + self.first_order_count()
    }

    /// Position of the first S2: 2 + 2JL.
    pub fn second_order_start(&self) -> usize {
        Self::FIRST_ORDER_START + 2 * self.first_order_count()
    }

    /// Position of (j, l) among the JL pairs, nested j, l: jL + l. Blocks laid out like S1
    /// (band powers, the cross statistics' band powers and envelopes) use it too.
    pub fn pair_offset(&self, j: usize, l: usize) -> usize {
        j * self.orientation_count + l
    }

    /// Position of S1(j,l): 2 + jL + l.
    pub fn first_order(&self, j: usize, l: usize) -> usize {
        Self::FIRST_ORDER_START + self.pair_offset(j, l)
    }

    /// Position of P(j,l): 2 + JL + jL + l.
    pub fn band_power(&self, j: usize, l: usize) -> usize {
        self.band_power_start() + self.pair_offset(j, l)
    }

    /// Position of S2(j1,l1,j2,l2), j1 < j2: 2 + 2JL + [`Self::second_order_offset`].
    pub fn second_order(&self, j1: usize, l1: usize, j2: usize, l2: usize) -> usize {
        self.second_order_start() + self.second_order_offset(j1, l1, j2, l2)
    }

    /// Position of S2(j1,l1,j2,l2), j1 < j2, among the S2 alone (nested j1, l1, j2 > j1, l2):
    /// Σ_{a<j1} L²(J−a−1) + l1·L(J−j1−1) + (j2−j1−1)·L + l2. Blocks laid out like S2 (the
    /// cross statistics' envelope coefficients) use it too.
    pub fn second_order_offset(&self, j1: usize, l1: usize, j2: usize, l2: usize) -> usize {
        let (jn, ln) = (self.scale_count, self.orientation_count);
        let mut idx = 0;
        for a in 0..j1 {
            idx += ln * (jn - a - 1) * ln;
        }
        idx + l1 * (jn - j1 - 1) * ln + (j2 - j1 - 1) * ln + l2
    }

    /// Position of the coefficient with this label, or None when the label is not one of this
    /// layout's (indices out of range, j1 ≥ j2, or order and kind disagreeing).
    pub fn position(&self, label: &CoefficientLabel) -> Option<usize> {
        let (jn, ln) = (self.scale_count, self.orientation_count);
        let scale = |j: Option<usize>| j.filter(|&j| j < jn);
        let angle = |l: Option<usize>| l.filter(|&l| l < ln);
        let path = &label.path;
        match (label.kind, label.order) {
            (CoefficientKind::Mean, 0) if path.is_empty() => Some(Self::MEAN),
            (CoefficientKind::Variance, 0) if path.is_empty() => Some(Self::VARIANCE),
            (CoefficientKind::FirstOrder, 1) if path.has_no_second() => {
                Some(self.first_order(scale(path.j1)?, angle(path.l1)?))
            }
            (CoefficientKind::BandPower, 1) if path.has_no_second() => {
                Some(self.band_power(scale(path.j1)?, angle(path.l1)?))
            }
            (CoefficientKind::SecondOrder, 2) => {
                let (j1, j2) = (scale(path.j1)?, scale(path.j2)?);
                (j1 < j2).then_some(())?;
                Some(self.second_order(j1, angle(path.l1)?, j2, angle(path.l2)?))
            }
            _ => None,
        }
    }

    /// Every label, in position order.
    pub fn labels(&self) -> Vec<CoefficientLabel> {
        let (jn, ln) = (self.scale_count, self.orientation_count);
        let mut labels = Vec::with_capacity(self.len());
        labels.push(CoefficientLabel::order_zero(CoefficientKind::Mean));
        labels.push(CoefficientLabel::order_zero(CoefficientKind::Variance));
        for kind in [CoefficientKind::FirstOrder, CoefficientKind::BandPower] {
            for j in 0..jn {
                for l in 0..ln {
                    labels.push(CoefficientLabel::order_one(kind, j, l));
                }
            }
        }
        for j1 in 0..jn {
            for l1 in 0..ln {
                for j2 in (j1 + 1)..jn {
                    for l2 in 0..ln {
                        labels.push(CoefficientLabel::order_two(j1, l1, j2, l2));
                    }
                }
            }
        }
        labels
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every position formula agrees with the order of `labels`, and `position` inverts it.
    #[test]
    fn positions_match_the_label_order() {
        for (jn, ln) in [(1, 1), (3, 4), (4, 2), (5, 3)] {
            let layout = CoefficientLayout::new(jn, ln);
            let labels = layout.labels();
            assert_eq!(labels.len(), layout.len());
            for (i, label) in labels.iter().enumerate() {
                assert_eq!(layout.position(label), Some(i), "{label:?}");
                let direct = match label.kind {
                    CoefficientKind::Mean => CoefficientLayout::MEAN,
                    CoefficientKind::Variance => CoefficientLayout::VARIANCE,
                    CoefficientKind::FirstOrder => {
                        layout.first_order(label.path.j1.unwrap(), label.path.l1.unwrap())
                    }
                    CoefficientKind::BandPower => {
                        layout.band_power(label.path.j1.unwrap(), label.path.l1.unwrap())
                    }
                    CoefficientKind::SecondOrder => layout.second_order(
                        label.path.j1.unwrap(),
                        label.path.l1.unwrap(),
                        label.path.j2.unwrap(),
                        label.path.l2.unwrap(),
                    ),
                };
                assert_eq!(direct, i, "{label:?}");
            }
        }
    }

    /// Labels outside the layout have no position.
    #[test]
    fn foreign_labels_have_no_position() {
        let layout = CoefficientLayout::new(3, 4);
        for label in [
            CoefficientLabel::order_one(CoefficientKind::FirstOrder, 3, 0),
            CoefficientLabel::order_one(CoefficientKind::BandPower, 0, 4),
            CoefficientLabel::order_two(1, 0, 1, 0),
            CoefficientLabel::order_two(2, 0, 1, 0),
            CoefficientLabel {
                order: 2,
                ..CoefficientLabel::order_one(CoefficientKind::FirstOrder, 0, 0)
            },
        ] {
            assert_eq!(layout.position(&label), None, "{label:?}");
        }
    }

    /// Parsing a name gives back the label it was made from, in both spellings; other text
    /// is no name.
    #[test]
    fn names_parse_back_to_their_labels() {
        use CoefficientSpelling::{Short, SpelledOut};
        for label in CoefficientLayout::new(3, 2).labels() {
            for spelling in [Short, SpelledOut] {
                assert_eq!(
                    CoefficientLabel::parse(&label.name(spelling), spelling),
                    Some(label)
                );
            }
        }
        for bad in [
            "S1",
            "S1_j0",
            "S1_j0_l",
            "S1_j0_l1_",
            "S1_jx_l0",
            "S1_j+1_l0",
            "means",
            "S1j0_l0",
            "S2_j0_l1_j2",
            "first_order_j0_l1_j2_l3",
            "bandpower_j0_l0_j1_l1",
        ] {
            assert_eq!(CoefficientLabel::parse(bad, Short), None, "{bad}");
        }
        assert_eq!(CoefficientLabel::parse("S1_j0_l0", SpelledOut), None);
    }

    /// Read back flattened into a record, absent and null indices are `None` (serde's rule for
    /// `Option` fields, common practice), and a path writes back as it was read.
    #[test]
    fn paths_read_absent_and_null_indices_as_none() {
        #[derive(Debug, PartialEq, Serialize, Deserialize)]
        struct Record {
            order: u8,
            #[serde(flatten)]
            path: WaveletPath,
        }
        let read = |text: &str| serde_json::from_str::<Record>(text).unwrap();
        let first = read(r#"{"order": 1, "j1": 2, "l1": 3, "j2": null}"#);
        assert_eq!(first.path, WaveletPath::first(2, 3));
        assert_eq!(read(r#"{"order": 0}"#).path, WaveletPath::NONE);
        assert_eq!(
            serde_json::to_string(&first).unwrap(),
            r#"{"order":1,"j1":2,"l1":3,"j2":null,"l2":null}"#
        );
    }

    /// A path read as a selection takes every path that agrees on the indices it gives; the
    /// range check looks at the given indices only.
    #[test]
    fn selections_and_ranges_look_at_given_indices_only() {
        let averaged = WaveletPath::parse_parts(&["j1", "j3"]).unwrap();
        assert!(averaged.selects(&WaveletPath::second(1, 0, 3, 2)));
        assert!(!averaged.selects(&WaveletPath::second(1, 0, 2, 2)));
        assert!(!averaged.selects(&WaveletPath::first(1, 0)));
        assert!(averaged.within(4, 1));
        assert!(!averaged.within(3, 1));
        assert!(!WaveletPath::first(0, 4).within(1, 4));
        assert_eq!(averaged.wavelet_count(), None);
        assert_eq!(WaveletPath::parse_parts(&["j1", "x3"]), None);
    }

    /// Both spellings of one label of each kind.
    #[test]
    fn names_in_both_spellings() {
        use CoefficientSpelling::{Short, SpelledOut};
        let s1 = CoefficientLabel::order_one(CoefficientKind::FirstOrder, 0, 1);
        let p = CoefficientLabel::order_one(CoefficientKind::BandPower, 2, 3);
        let s2 = CoefficientLabel::order_two(0, 1, 2, 3);
        let mean = CoefficientLabel::order_zero(CoefficientKind::Mean);
        assert_eq!(s1.name(Short), "S1_j0_l1");
        assert_eq!(s1.name(SpelledOut), "first_order_j0_l1");
        assert_eq!(p.name(Short), "bandpower_j2_l3");
        assert_eq!(p.name(SpelledOut), "band_power_j2_l3");
        assert_eq!(s2.name(Short), "S2_j0_l1_j2_l3");
        assert_eq!(s2.name(SpelledOut), "second_order_j0_l1_j2_l3");
        assert_eq!(mean.name(Short), "mean");
        assert_eq!(mean.name(SpelledOut), "mean");
    }
}
