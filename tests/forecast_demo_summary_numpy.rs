//! The demo's forecast of the orientation-harmonic summary row, on the demo's own ensembles,
//! against numpy (reference-values/summary_information.py, numpy 2.4.6): the summary items of
//! every sky of one default demo run (86 fiducial skies, 10 paired skies per shifted value),
//! forecast with the demo's statistic sets and paired derivatives, against numpy's
//! Hartlap-corrected covariance (Hartlap, Simon & Schneider 2007, A&A 464, 399, eq. 17), paired
//! central differences and F = Mᵀ Ψ M inverted (Tegmark, Taylor & Heavens 1997, ApJ 480, 22).

mod common;

use planisphere::cli::demo::{DEMO_SETS, STEPS};
use planisphere::cli::forecast::forecast_named_sets;
use planisphere::forecast::{ColumnLabel, DerivativeEnsembles, Ensemble, StatisticSet};
use serde_json::Value;

const SUMMARY_ROW: &str = "orientation-harmonic summary";

fn ensemble(fixture: &Value, name: &str) -> Ensemble {
    let labels: Vec<ColumnLabel> = fixture["columns"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| ColumnLabel::new(c.as_str().unwrap()))
        .collect();
    let rows: Vec<Vec<f64>> = fixture["ensembles"][name]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| {
            r.as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap())
                .collect()
        })
        .collect();
    Ensemble::from_rows(labels, &rows).unwrap()
}

fn numbers(v: &Value) -> Vec<f64> {
    v.as_array()
        .unwrap()
        .iter()
        .map(|x| x.as_f64().unwrap())
        .collect()
}

#[test]
fn demo_summary_row_errors_on_demo_ensembles_match_numpy() {
    let fixture = common::read_json("summary/demo_summary_row.json");
    // the steps numpy used were read back from the demo's sky recipes
    let steps = numbers(&fixture["steps"]);
    for (got, want) in steps.iter().zip([STEPS.amplitude, STEPS.shift]) {
        assert!((got - want).abs() <= 1e-12 * want, "{got} vs {want}");
    }
    let fiducial = ensemble(&fixture, "fiducial");
    let derivatives: Vec<DerivativeEnsembles> =
        [("amplitude", STEPS.amplitude), ("shift", STEPS.shift)]
            .into_iter()
            .map(|(name, step)| DerivativeEnsembles {
                parameter: name.to_string(),
                step,
                plus: ensemble(&fixture, &format!("{name}_plus")),
                minus: ensemble(&fixture, &format!("{name}_minus")),
                paired: true,
            })
            .collect();

    // the demo's row selects exactly the moduli, intermittencies and alignments
    let prefixes = DEMO_SETS
        .iter()
        .find(|(name, _)| *name == SUMMARY_ROW)
        .unwrap()
        .1;
    let set = StatisticSet::with_prefixes(SUMMARY_ROW, fiducial.labels(), prefixes).unwrap();
    let chosen: Vec<String> = set
        .columns
        .iter()
        .map(|&j| fiducial.labels()[j].name.clone())
        .collect();
    let expected: Vec<String> = fixture["summary_row"]
        .as_array()
        .unwrap()
        .iter()
        .map(|c| c.as_str().unwrap().to_string())
        .collect();
    assert_eq!(chosen, expected);

    let result = forecast_named_sets(&fiducial, &derivatives, None, DEMO_SETS).unwrap();
    let row = result
        .comparison
        .rows
        .iter()
        .find(|r| r.set == SUMMARY_ROW)
        .unwrap();
    assert_eq!(row.n_statistics, expected.len());
    let hartlap = fixture["hartlap_factor"].as_f64().unwrap();
    assert!((row.hartlap_factor.unwrap() - hartlap).abs() < 1e-15);
    let errors = row.marginalised_errors.as_ref().unwrap();
    for (a, (got, want)) in errors
        .iter()
        .zip(numbers(&fixture["marginalised_errors"]))
        .enumerate()
    {
        let rel = (got - want).abs() / want;
        assert!(
            rel < 1e-9,
            "parameter {a}: {got} vs numpy {want} (rel {rel:.2e})"
        );
    }
}
