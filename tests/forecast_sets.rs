//! Statistic sets, scale cuts and the comparison of forecasts between sets.

mod forecast_support;

use forecast_support::{GaussianSampler, LinearModel};
use planisphere::forecast::{
    compare_statistic_sets, ColumnLabel, CovarianceEstimate, DerivativeEnsembles, Ensemble,
    FisherForecast, ScaleCut, StatisticSet,
};

/// Ten statistics: five band powers "bp_ell{ℓ}" (scale ℓ = 100, 200, ...) and five first-order
/// coefficients "s1_j{j}" (scale j = 0..4).
fn named_labels() -> Vec<ColumnLabel> {
    (0..5)
        .map(|j| {
            ColumnLabel::with_scale(format!("bp_ell{}", 100 * (j + 1)), 100.0 * (j + 1) as f64)
        })
        .chain((0..5).map(|j| ColumnLabel::with_scale(format!("s1_j{j}"), j as f64)))
        .collect()
}

fn relabel(e: &Ensemble) -> Ensemble {
    let (n, p) = (e.n_simulations(), e.n_statistics());
    let values: Vec<f64> = (0..n)
        .flat_map(|i| (0..p).map(move |j| (i, j)))
        .map(|ij| e.values()[ij])
        .collect();
    Ensemble::from_row_major(named_labels(), n, values).unwrap()
}

struct Inputs {
    fiducial: Ensemble,
    derivatives: Vec<DerivativeEnsembles>,
    model: LinearModel,
}

fn inputs(n: usize, n_d: usize, seed: u64) -> Inputs {
    let model = LinearModel::new();
    let mut sampler = GaussianSampler::new(seed, &model.c);
    let fiducial = relabel(&sampler.ensemble(&model.mean(&model.theta), n));
    let derivatives = (0..2)
        .map(|a| {
            let step = 0.5;
            DerivativeEnsembles {
                parameter: format!("theta{a}"),
                step,
                plus: relabel(&sampler.ensemble(&model.shifted_mean(a, step), n_d)),
                minus: relabel(&sampler.ensemble(&model.shifted_mean(a, -step), n_d)),
                paired: false,
            }
        })
        .collect();
    Inputs {
        fiducial,
        derivatives,
        model,
    }
}

// Source: common practice — sets are chosen by label predicates.
#[test]
fn sets_are_selected_by_prefix_names_and_scale() {
    let labels = named_labels();
    let bp = StatisticSet::with_prefixes("band powers", &labels, &["bp_"]).unwrap();
    assert_eq!(bp.columns, vec![0, 1, 2, 3, 4]);
    let both = StatisticSet::with_prefixes("all", &labels, &["s1_", "bp_"]).unwrap();
    assert_eq!(both.len(), 10);
    let named = StatisticSet::with_names("pair", &labels, &["s1_j3", "bp_ell200"]).unwrap();
    assert_eq!(named.columns, vec![1, 8]);
    let err = StatisticSet::with_names("pair", &labels, &["s2_j1"]).unwrap_err();
    assert!(
        err.to_string()
            .contains("statistic set 'pair': no column is labelled 's2_j1'"),
        "{err}"
    );
    let err = StatisticSet::with_prefixes("bispectrum", &labels, &["bk_"]).unwrap_err();
    assert!(
        err.to_string()
            .contains("statistic set 'bispectrum' selects no column"),
        "{err}"
    );
    let err = StatisticSet::from_columns("x", &labels, vec![3, 10]).unwrap_err();
    assert!(
        err.to_string().contains("column index 10 is out of range"),
        "{err}"
    );
    // Scale cut ℓ ∈ [150, 450] on the band powers.
    let cut = ScaleCut::new(150.0, 450.0).unwrap();
    assert_eq!(
        bp.with_scale_cut(&labels, &cut).unwrap().columns,
        vec![1, 2, 3]
    );
    assert_eq!(cut.filter(&labels), vec![1, 2, 3]);
    let mut unscaled = labels.clone();
    unscaled.push(ColumnLabel::new("variance"));
    assert_eq!(cut.filter(&unscaled), vec![1, 2, 3, 10]);
    let strict = ScaleCut {
        keep_unscaled: false,
        ..cut
    };
    assert_eq!(strict.filter(&unscaled), vec![1, 2, 3]);
    let s1_small = StatisticSet::with_prefixes("order 1", &labels, &["s1_"])
        .unwrap()
        .with_scale_cut(&labels, &ScaleCut::new(f64::NEG_INFINITY, 2.0).unwrap())
        .unwrap();
    assert_eq!(s1_small.columns, vec![5, 6, 7]);
    assert!(ScaleCut::new(2.0, 1.0).is_err());
    assert!(bp
        .with_scale_cut(&labels, &ScaleCut::new(1e4, 1e5).unwrap())
        .is_err());
}

// Source: Tegmark, Taylor & Heavens 1997 (ApJ 480, 22): for each set S of the linear-Gaussian
// model, F_S = M_Sᵀ C_SS⁻¹ M_S exactly; the recovered σ_marg agree within 4× their relative
// scatter ≈ √(1/(2(n − p)) + f/p) (from memory; see tests/forecast_fisher.rs).
#[test]
fn comparison_rows_agree_with_each_sets_analytic_forecast() {
    let inp = inputs(400, 200, 99);
    let labels = named_labels();
    let sets = vec![
        StatisticSet::all("all", &labels).unwrap(),
        StatisticSet::with_prefixes("band powers", &labels, &["bp_"]).unwrap(),
        StatisticSet::with_prefixes("order 1", &labels, &["s1_"]).unwrap(),
    ];
    let table = compare_statistic_sets(&inp.fiducial, &inp.derivatives, &sets).unwrap();
    assert_eq!(table.parameters, vec!["theta0", "theta1"]);
    for (row, set) in table.rows.iter().zip(&sets) {
        assert!(row.error.is_none(), "{:?}", row.error);
        assert_eq!(row.n_statistics, set.len());
        let (n, p) = (400usize, set.len());
        let h = (n - p - 2) as f64 / (n - 1) as f64;
        assert_eq!(row.hartlap_factor, Some(h));
        let m = inp.model.m.select_rows(&set.columns);
        let c = inp
            .model
            .c
            .select_rows(&set.columns)
            .select_columns(&set.columns);
        let f = m.transpose() * c.try_inverse().unwrap() * &m;
        let exact = FisherForecast::from_fisher_matrix(table.parameters.clone(), &f).unwrap();
        let bias = row.derivative_bias_fraction.as_ref().unwrap();
        for (a, &bias_a) in bias.iter().enumerate() {
            let got = row.marginalised_errors.as_ref().unwrap()[a];
            let scatter = (1.0 / (2.0 * (n - p) as f64) + bias_a / p as f64).sqrt();
            let ratio = got / exact.marginalised_errors[a];
            println!(
                "{}: theta{a} σ_marg {got:.5} / exact {:.5} = {ratio:.4} (scatter ≈ {scatter:.4})",
                row.set, exact.marginalised_errors[a]
            );
            assert!(
                (ratio - 1.0).abs() < 4.0 * scatter,
                "{} theta{a}: ratio {ratio}",
                row.set
            );
            let cond = row.conditional_errors.as_ref().unwrap()[a];
            assert!((cond / exact.conditional_errors[a] - 1.0).abs() < 4.0 * scatter);
        }
    }
    // Each row is the forecast of the set's own covariance (not a block of the full precision).
    let sub = inp.fiducial.select(&sets[1].columns).unwrap();
    let precision = CovarianceEstimate::from_ensemble(&sub)
        .unwrap()
        .precision()
        .unwrap();
    let ders: Vec<_> = inp
        .derivatives
        .iter()
        .map(|d| {
            d.finite_difference()
                .unwrap()
                .select(&sets[1].columns)
                .unwrap()
        })
        .collect();
    let direct = FisherForecast::from_derivatives(&precision, &ders).unwrap();
    assert_eq!(
        table.rows[1].marginalised_errors.as_ref().unwrap(),
        &direct.marginalised_errors
    );
}

// Source: Hartlap et al. 2007 eq. 17 — with n = 12 the 10-statistic set has no unbiased
// precision (n ≤ p + 2) and the 5-statistic set has h = 5/11 < 0.8.
#[test]
fn comparison_records_per_set_failures_and_warnings() {
    let inp = inputs(12, 50, 5);
    let labels = named_labels();
    let sets = vec![
        StatisticSet::all("all", &labels).unwrap(),
        StatisticSet::with_prefixes("band powers", &labels, &["bp_"]).unwrap(),
    ];
    let table = compare_statistic_sets(&inp.fiducial, &inp.derivatives, &sets).unwrap();
    let all = &table.rows[0];
    assert!(all
        .error
        .as_ref()
        .unwrap()
        .contains("12 simulations are too few for 10 statistics"));
    assert!(all.marginalised_errors.is_none() && all.hartlap_factor.is_none());
    let bp = &table.rows[1];
    assert!(bp.error.is_none());
    assert_eq!(bp.hartlap_factor, Some(5.0 / 11.0));
    assert!(bp
        .warnings
        .iter()
        .any(|w| w.contains("n = 12") && w.contains("p = 5")));
    let text = table.to_text();
    assert!(
        text.contains("error [all]: 12 simulations are too few"),
        "{text}"
    );
    assert!(
        text.contains("warning [band powers]: Hartlap factor 0.4545"),
        "{text}"
    );
    let csv = table.to_csv();
    let last = csv.lines().nth(2).unwrap();
    assert!(
        last.starts_with("band powers,5,12,0.45454545454545453,"),
        "{last}"
    );
}

// Source: common practice — aligned text columns; CSV fields round-trip the f64 values.
#[test]
fn text_table_is_aligned_and_csv_round_trips() {
    let inp = inputs(200, 40, 17);
    let labels = named_labels();
    let sets = vec![
        StatisticSet::all("orders 1+2 and band powers", &labels).unwrap(),
        StatisticSet::with_names("subset", &labels, &["bp_ell100", "s1_j0", "s1_j4"]).unwrap(),
    ];
    let table = compare_statistic_sets(&inp.fiducial, &inp.derivatives, &sets).unwrap();
    let text = table.to_text();
    println!("{text}{}", table.to_csv());
    let lines: Vec<&str> = text.lines().take(3).collect();
    assert!(
        lines[0].starts_with("set ") && lines[0].contains("sigma_marg(theta0)"),
        "{text}"
    );
    let width = lines[0].chars().count();
    assert!(lines.iter().all(|l| l.chars().count() == width), "{text}");
    // Every header field ends where the numbers below it end (right alignment).
    let end = lines[0].find("sigma_marg(theta0)").unwrap() + "sigma_marg(theta0)".len();
    for l in &lines[1..] {
        assert!(
            l.as_bytes()[end - 1] != b' ' && l.as_bytes()[end] == b' ',
            "{l}"
        );
    }
    let csv = table.to_csv();
    let rows: Vec<Vec<&str>> = csv.lines().map(|l| l.split(',').collect()).collect();
    assert_eq!(rows.len(), 3);
    assert_eq!(rows[0].len(), 4 + 3 * 2 + 2);
    for (r, row) in rows[1..].iter().zip(&table.rows) {
        assert_eq!(r.len(), rows[0].len());
        assert_eq!(r[0], row.set);
        let marg = row.marginalised_errors.as_ref().unwrap();
        for a in 0..2 {
            assert_eq!(
                r[4 + a].parse::<f64>().unwrap().to_bits(),
                marg[a].to_bits()
            );
        }
    }
    let json = serde_json::to_string(&table).unwrap();
    assert!(json.contains("\"marginalised_errors\"") && json.contains("\"subset\""));
}

// Source: common practice — every ensemble must describe the same statistics.
#[test]
fn comparison_rejects_mismatched_columns() {
    let inp = inputs(50, 10, 1);
    let labels = named_labels();
    let sets = vec![StatisticSet::all("all", &labels).unwrap()];
    let mut bad = inp.derivatives.clone();
    bad[1].minus = bad[1].minus.select(&[0, 1, 2]).unwrap();
    let err = compare_statistic_sets(&inp.fiducial, &bad, &sets)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("−step set of 'theta1'") && err.contains("10 columns against 3"),
        "{err}"
    );
    let mut zero = inp.derivatives.clone();
    zero[0].step = 0.0;
    let err = compare_statistic_sets(&inp.fiducial, &zero, &sets)
        .unwrap_err()
        .to_string();
    assert!(
        err.contains("step for parameter 'theta0' must be a positive number"),
        "{err}"
    );
}
