//! What the `plot` pictures are made of, checked as data before it reaches plotters: ellipse
//! outlines, orientation averages and the orientation-harmonic summary of a measurement file, and per-tile values
//! of a tile map.

use planisphere::cli::measure::measurement_document;
use planisphere::cli::plot::{
    band_power_by_scale, coefficients_figure, ellipses_figure, file_summary, pair_items,
    parameter_pair, scale_items, set_ellipses, ForecastFile, MeasurementFile, ELLIPSE_POINTS,
};
use planisphere::forecast::{ConfidenceEllipse, ConfidenceLevel};
use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::measure::measurement::{MapStatistics, MeasurementSettings, SphereMeasurer};
use planisphere::measure::tile_statistic::{paint_tiles, tile_values, TileStatistic};
use planisphere::scattering::pooling::pooled_coefficients;
use planisphere::scattering::statistics::SummaryKind;
use planisphere::simulate::skies::SkyRecipe;
use planisphere::{Footprint, SkyMap};

const FORECAST: &str = r#"{
  "parameters": ["amplitude", "shift", "tilt"],
  "fiducial": [1.0, 0.02, -0.5],
  "sets": [
    {"name": "power spectrum", "parameter_covariance":
        [[0.01, 0.0008, 0.001], [0.0008, 0.0001, -0.0002], [0.001, -0.0002, 0.04]],
     "marginalised_errors": [0.1, 0.01, 0.2]},
    {"name": "summary", "parameter_covariance": null, "marginalised_errors": null},
    {"name": "scattering", "parameter_covariance":
        [[0.0025, -0.0001, 0.0], [-0.0001, 0.00004, 0.0], [0.0, 0.0, 0.01]]}
  ]
}"#;

fn forecast() -> ForecastFile {
    serde_json::from_str(FORECAST).unwrap()
}

/// (p − c)ᵀ C⁻¹ (p − c) for a 2 × 2 covariance [[a, b], [b, d]].
fn mahalanobis_sq(p: (f64, f64), c: (f64, f64), a: f64, b: f64, d: f64) -> f64 {
    let (u, v) = (p.0 - c.0, p.1 - c.1);
    let det = a * d - b * b;
    (d * u * u - 2.0 * b * u * v + a * v * v) / det
}

#[test]
fn ellipse_outlines_are_the_confidence_ellipse_polylines() {
    let file = forecast();
    let (a, b) = parameter_pair(&file, None).unwrap();
    assert_eq!((a, b), (0, 1));
    let (sets, skipped) = set_ellipses(&file, a, b).unwrap();
    assert_eq!(sets.len(), 2);
    assert_eq!(skipped.len(), 1);
    assert!(skipped[0].contains("summary"), "{skipped:?}");
    let figure = ellipses_figure(&file, a, b, &sets, 800);
    let series = &figure.panels[0].series;
    // Two outlines per set (68%, 95%) and the fiducial marker.
    assert_eq!(series.len(), 2 * 2 + 1);
    let covs = [
        (0.01, 0.0001, 0.0008, "power spectrum"),
        (0.0025, 0.00004, -0.0001, "scattering"),
    ];
    for (i, (vx, vy, cxy, name)) in covs.iter().enumerate() {
        let expected =
            ConfidenceEllipse::from_covariance("amplitude", "shift", (1.0, 0.02), *vx, *vy, *cxy)
                .unwrap();
        for (k, level) in [ConfidenceLevel::OneSigma, ConfidenceLevel::TwoSigma]
            .iter()
            .enumerate()
        {
            let s = &series[2 * i + k];
            assert!(s.closed);
            assert_eq!(s.label.as_deref(), (k == 0).then_some(*name));
            let want = expected
                .polyline(level.tabulated_scale(), ELLIPSE_POINTS)
                .unwrap();
            let got: Vec<(f64, f64)> = s.points.iter().map(|p| (p.x, p.y)).collect();
            assert_eq!(got, want);
            // Independently of the ellipse code: every outline point lies at Mahalanobis
            // distance k = 1.52 (68%) or 2.48 (95%) from the fiducial (Coe 2009,
            // arXiv:0906.4123, Table 1: the 1σ ellipse of the 2 × 2 covariance scaled by k).
            let k_coe = [1.52, 2.48][k];
            for &p in &got {
                let d2 = mahalanobis_sq(p, (1.0, 0.02), *vx, *cxy, *vy);
                assert!(
                    (d2.sqrt() - k_coe).abs() < 1e-9,
                    "{name} {k}: {}",
                    d2.sqrt()
                );
            }
        }
    }
    let fid = &series[4];
    assert_eq!(fid.points.len(), 1);
    assert_eq!((fid.points[0].x, fid.points[0].y), (1.0, 0.02));
}

#[test]
fn chosen_parameters_take_their_covariance_block() {
    let file = forecast();
    let (a, b) = parameter_pair(&file, Some("tilt, shift")).unwrap();
    assert_eq!((a, b), (2, 1));
    let (sets, _) = set_ellipses(&file, a, b).unwrap();
    let e = &sets[0].ellipse;
    let want =
        ConfidenceEllipse::from_covariance("tilt", "shift", (-0.5, 0.02), 0.04, 0.0001, -0.0002)
            .unwrap();
    assert_eq!(e, &want);
    for bad in ["tilt", "tilt,tilt", "tilt,mass", "a,b,c"] {
        assert!(parameter_pair(&file, Some(bad)).is_err(), "{bad}");
    }
}

#[test]
fn sets_without_a_usable_covariance_are_skipped_or_refused() {
    let mut file = forecast();
    // Not positive definite in (amplitude, shift): skipped with its reason.
    file.sets[2].parameter_covariance = Some(vec![
        vec![1.0, 2.0, 0.0],
        vec![2.0, 1.0, 0.0],
        vec![0.0, 0.0, 1.0],
    ]);
    let (sets, skipped) = set_ellipses(&file, 0, 1).unwrap();
    assert_eq!(sets.len(), 1);
    assert!(skipped
        .iter()
        .any(|s| s.contains("scattering") && s.contains("positive definite")));
    file.sets[0].parameter_covariance = None;
    let err = set_ellipses(&file, 0, 1).unwrap_err().to_string();
    assert!(err.starts_with("no ellipse to draw"), "{err}");
    assert!(!err.contains('\n'));
}

/// A Gaussian sky at NSIDE 32 (demo spectrum), observed above latitude −20°.
fn partial_sky() -> (SkyMap, Footprint) {
    let recipe = SkyRecipe::gaussian(32, AngularSpectrum::demo_model(95, 1e-4), 11);
    let full = recipe.realise(&recipe.transform().unwrap(), 0).unwrap();
    let pix = full.pixelization();
    let values: Vec<f64> = (0..pix.npix())
        .map(|p| {
            if pix.center(p).lat() > (-20f64).to_radians() {
                full.values()[p as usize]
            } else {
                f64::NAN
            }
        })
        .collect();
    let map = SkyMap::new(pix, values).unwrap();
    let footprint = Footprint::of_valid_pixels(&map)
        .restricted_to(&map)
        .unwrap();
    (map, footprint)
}

fn measured() -> (SkyMap, SphereMeasurer, MapStatistics) {
    let (map, footprint) = partial_sky();
    let settings = MeasurementSettings {
        scales: 3,
        tile_pixels: Some(32),
        bispectrum: false,
        ..MeasurementSettings::default()
    };
    let measurer = SphereMeasurer::new(map.pixelization(), &footprint, settings).unwrap();
    let stats = measurer.measure(&map, &footprint).unwrap();
    (map, measurer, stats)
}

#[test]
fn tile_values_are_each_tiles_own_pooled_coefficients() {
    let (_, measurer, stats) = measured();
    let n = measurer.plan().len();
    assert_eq!(
        stats.per_tile.len(),
        n,
        "every planned tile is measured here"
    );
    let tiles: Vec<usize> = (0..n).collect();
    let engine = measurer.engine();
    for name in [
        "mean",
        "variance",
        "S1_j1_l2",
        "bandpower_j2_l0",
        "S2_j0_l1_j2_l3",
    ] {
        let st = TileStatistic::parse(name).unwrap();
        let values = tile_values(&measurer, &stats, &tiles, &st).unwrap();
        let mut with_value = 0;
        for ((t, v), sums) in values.iter().zip(&stats.per_tile) {
            // The same tile pooled alone by the pooling module (Σ W h / Σ W per coefficient).
            let own = pooled_coefficients(engine, sums).unwrap();
            let want = match name {
                "mean" => own.mean().value,
                "variance" => own.variance().value,
                "S1_j1_l2" => own.first_order(1, 2).value,
                "bandpower_j2_l0" => own.band_power(2, 0).value,
                _ => own.second_order(0, 1, 2, 3).value,
            };
            match v {
                Some(v) => {
                    with_value += 1;
                    assert!((v - want).abs() <= 1e-12 * want.abs(), "{name} tile {t}");
                }
                None => assert!(want.is_nan(), "{name} tile {t}: {want}"),
            }
        }
        assert!(with_value > n / 2, "{name}: only {with_value} of {n} tiles");
    }
}

#[test]
fn weighting_tile_values_by_tile_weights_gives_the_pooled_coefficient() {
    // c = Σ_t Σ W h / Σ_t Σ W (crate::scattering::pooling): the per-tile values v_t = s_t / w_t weighted by
    // w_t recombine to the pooled coefficient of the whole footprint.
    let (_, measurer, stats) = measured();
    let tiles: Vec<usize> = (0..measurer.plan().len()).collect();
    let st = TileStatistic::parse("S1_j1_l3").unwrap();
    let idx = st.label_indices(measurer.engine().labels());
    assert_eq!(idx.len(), 1);
    let values = tile_values(&measurer, &stats, &tiles, &st).unwrap();
    let (mut num, mut den) = (0.0, 0.0);
    for ((_, v), sums) in values.iter().zip(&stats.per_tile) {
        if let Some(v) = v {
            num += sums.weights[idx[0]] * v;
            den += sums.weights[idx[0]];
        }
    }
    let pooled = stats.coefficients.first_order(1, 3).value;
    assert!(
        (num / den - pooled).abs() < 1e-12 * pooled,
        "{} {pooled}",
        num / den
    );
    // The orientation average is the mean of the single-orientation tile values.
    let avg = tile_values(
        &measurer,
        &stats,
        &tiles,
        &TileStatistic::parse("S1_j1").unwrap(),
    )
    .unwrap();
    let singles: Vec<Vec<(usize, Option<f64>)>> = (0..4)
        .map(|l| {
            let st = TileStatistic::parse(&format!("S1_j1_l{l}")).unwrap();
            tile_values(&measurer, &stats, &tiles, &st).unwrap()
        })
        .collect();
    for (t, (_, v)) in avg.iter().enumerate() {
        let vs: Vec<f64> = singles.iter().filter_map(|s| s[t].1).collect();
        if let Some(v) = v {
            assert_eq!(vs.len(), 4, "tile {t}");
            assert!((v - vs.iter().sum::<f64>() / 4.0).abs() < 1e-15 * v.abs().max(1.0));
        }
    }
}

#[test]
fn painted_map_holds_each_tile_value_over_its_core_only() {
    let (map, measurer, stats) = measured();
    let plan = measurer.plan();
    let tiles: Vec<usize> = (0..plan.len()).collect();
    let st = TileStatistic::parse("variance").unwrap();
    let values = tile_values(&measurer, &stats, &tiles, &st).unwrap();
    let painted = paint_tiles(&measurer, &values).unwrap();
    assert_eq!(painted.nside(), map.nside());
    let mut core_pixels = 0u64;
    for &(t, v) in &values {
        if v.is_some() {
            core_pixels += plan.core_pixels(t).unwrap().len() as u64;
        }
        // The tile's centre lies inside its own core.
        assert_eq!(painted.nearest(plan.tiles()[t].center), v, "tile {t}");
    }
    assert_eq!(painted.valid_count(), core_pixels);
    // The footprint stops at −20°: the southern cap has no tiles, so it stays blank.
    assert!(painted.valid_count() < painted.pixelization().npix() * 3 / 4);
}

#[test]
fn statistic_names_parse_and_check_their_indices() {
    let ok = TileStatistic::parse("full.S2_j0_j2").unwrap();
    assert_eq!(
        (ok.path.j1, ok.path.l1, ok.path.j2, ok.path.l2),
        (Some(0), None, Some(2), None)
    );
    assert!(ok.check(3, 4).is_ok());
    assert!(ok.check(2, 4).is_err());
    assert!(TileStatistic::parse("S2_j2_j1")
        .unwrap()
        .check(4, 4)
        .is_err());
    assert!(TileStatistic::parse("S1_j1_l4")
        .unwrap()
        .check(4, 4)
        .is_err());
    for bad in [
        "",
        "S1",
        "S1_1",
        "S1_j",
        "S1_jx",
        "S3_j1",
        "S1_j1_l1_x",
        "Variance",
        "S1_j-1",
    ] {
        let err = TileStatistic::parse(bad).unwrap_err().to_string();
        assert!(err.starts_with("unknown statistic"), "{bad}: {err}");
    }
}

fn measurement_file() -> (SphereMeasurer, MapStatistics, MeasurementFile) {
    let (_, measurer, stats) = measured();
    let doc = measurement_document(&measurer, &stats, "sky", &serde_json::json!(null));
    let file = MeasurementFile::parse(&doc.to_string()).unwrap();
    (measurer, stats, file)
}

/// The reader and the writer share one schema: a written document read back and written
/// again is the same text, byte for byte (a round-trip law).
#[test]
fn measurement_file_read_back_writes_the_same_text() {
    let (_, measurer, stats) = measured();
    let doc = measurement_document(&measurer, &stats, "sky", &serde_json::json!(null));
    let text = serde_json::to_string_pretty(&doc).unwrap();
    let file = MeasurementFile::parse(&text).unwrap();
    assert_eq!(
        serde_json::to_string_pretty(&file.to_value()).unwrap(),
        text
    );
}

#[test]
fn summary_recomputed_from_the_file_matches_the_measured_summary() {
    // The summary (crate::scattering::statistics) is computed from the full set in memory; the plot
    // recomputes it from the coefficient records of the JSON file.
    let (_, stats, file) = measurement_file();
    let from_file = file_summary(&file);
    assert_eq!(from_file.len(), stats.summary.len());
    for (a, b) in from_file.iter().zip(&stats.summary) {
        assert_eq!(a.name, b.name);
        assert_eq!(a.trusted, b.trusted, "{}", a.name);
        assert!(
            (a.value - b.value).abs() <= 1e-14 * b.value.abs().max(1e-300),
            "{}: {} vs {}",
            a.name,
            a.value,
            b.value
        );
    }
    let inter = pair_items(&file, SummaryKind::Intermittency);
    assert_eq!(inter.len(), 3); // (0,1), (0,2), (1,2)
    let moduli = scale_items(&file, SummaryKind::Modulus);
    assert_eq!(moduli.len(), 3);
    for (j, v, _) in moduli {
        let want = stats
            .summary
            .iter()
            .find(|s| s.name == format!("modulus_j{j}"))
            .unwrap()
            .value;
        assert_eq!(v, want);
    }
    for a in band_power_by_scale(&file) {
        let want: f64 = (0..4)
            .map(|l| stats.coefficients.band_power(a.j, l).value)
            .sum::<f64>()
            / 4.0;
        assert!((a.mean.unwrap() - want).abs() < 1e-14 * want);
    }
}

#[test]
fn coefficient_panels_show_the_summary_against_arcmin_and_scale_pair_cells_crossed_out_when_untrusted(
) {
    let (measurer, _, mut file) = measurement_file();
    // All trusted but S1(j = 2, l = 1), which makes modulus_j2 hollow (no pair item uses
    // S1 at j = 2 when J = 3), and S2(0,0,2,3), which crosses out the (0, 2) cells.
    for c in file.coefficients.iter_mut() {
        c.trusted = true;
        if (c.order, c.path.j1, c.path.l1, c.path.j2) == (1, Some(2), Some(1), None)
            || (c.order, c.path.j1, c.path.l1, c.path.j2, c.path.l2)
                == (2, Some(0), Some(0), Some(2), Some(3))
        {
            c.trusted = false;
        }
    }
    let fig = coefficients_figure(&[file.clone()], &["sky".to_string()], 1200).unwrap();
    assert_eq!(fig.panels.len(), 6);
    let order1 = &fig.panels[0];
    let line = &order1.series[0];
    // x: the wavelet's angular scale in arcmin, as the measurer defines it
    let xs: Vec<f64> = line.points.iter().map(|p| p.x).collect();
    let want_x: Vec<f64> = (0..3).map(|j| measurer.wavelet_scale_arcmin(j)).collect();
    for (x, w) in xs.iter().zip(&want_x) {
        assert!((x - w).abs() < 1e-9 * w, "{x} vs {w}");
    }
    let ys: Vec<f64> = line.points.iter().map(|p| p.y).collect();
    let want_y: Vec<f64> = scale_items(&file, SummaryKind::Modulus)
        .iter()
        .map(|t| t.1)
        .collect();
    assert_eq!(ys, want_y);
    let solid: Vec<bool> = line.points.iter().map(|p| p.solid).collect();
    assert_eq!(solid, vec![true, true, false]);
    // Scale-pair triangles: one cell per j1 < j2, at column j2 and row j1, crossed out when
    // untrusted; not a curve against j2.
    for (panel, kind) in [
        (&fig.panels[2], SummaryKind::Intermittency),
        (&fig.panels[3], SummaryKind::Alignment),
    ] {
        assert!(panel.series.is_empty());
        let items = pair_items(&file, kind);
        assert_eq!(panel.cells.len(), items.len());
        for (cell, item) in panel.cells.iter().zip(&items) {
            assert_eq!((cell.x.0 + cell.x.1) / 2.0, item.j2 as f64);
            assert_eq!((cell.y.0 + cell.y.1) / 2.0, item.j1 as f64);
            assert_eq!(cell.marked, (item.j1, item.j2) == (0, 2), "{item:?}");
            let text = cell.text.as_deref().unwrap();
            assert!(text.contains(&format!("{:.3}", item.value)), "{text}");
        }
        // tick text: j and its angular scale (8/3)·2^j·Δ
        let ticks = panel.x.ticks.as_ref().unwrap();
        for (x, text) in ticks {
            let j = *x as usize;
            let arcmin = measurer.wavelet_scale_arcmin(j);
            assert_eq!(text, &format!("{j} ({:.0}′)", arcmin), "{arcmin}");
        }
    }
    // Overlaying two files: two legend entries per line panel, two strips per cell.
    let two = coefficients_figure(
        &[file.clone(), file],
        &["a".to_string(), "b".to_string()],
        1200,
    )
    .unwrap();
    let labels: Vec<&str> = two.panels[0]
        .series
        .iter()
        .filter_map(|s| s.label.as_deref())
        .collect();
    assert_eq!(labels, vec!["a", "b"]);
    assert_eq!(two.panels[2].cells.len(), 6);
    let strip = &two.panels[2].cells[3];
    assert!((strip.x.1 - strip.x.0 - 0.5).abs() < 1e-12);
}
