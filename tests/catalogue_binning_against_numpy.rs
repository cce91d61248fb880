//! Galaxy catalogues binned into maps, against numpy 2.4.6 `bincount` with healpy 1.20.1
//! `ang2pix(lonlat=True)` (reference-values/catalogue_binning_reference.py wrote the catalogue as
//! CSV and as an astropy 8.0.2 FITS binary table, and the expected per-pixel N, Σw, γ1, γ2,
//! shape-noise variance and density contrast, and the row counts by reason).

mod common;

use common::{read_json, reference_path};
use planisphere::catalogue::maps_file::{write_catalogue_maps, MAP_COLUMNS};
use planisphere::catalogue::{
    bin_catalogue, BinningPlan, CatalogueColumns, CatalogueFormat, CatalogueMaps, CatalogueSource,
    RowProblem, WeightChoice,
};
use planisphere::io::fits_io::{read_map, ColumnChoice};

struct Expected {
    pixel: usize,
    values: [f64; 6],
}

fn expected_rows() -> Vec<Expected> {
    let text = std::fs::read_to_string(reference_path("catalogue_binning/expected.csv")).unwrap();
    text.lines()
        .skip(1)
        .map(|line| {
            let f: Vec<&str> = line.split(',').collect();
            let mut values = [0.0; 6];
            for (k, v) in values.iter_mut().enumerate() {
                *v = f[k + 1].parse().unwrap();
            }
            Expected {
                pixel: f[0].parse().unwrap(),
                values,
            }
        })
        .collect()
}

fn bin(file: &str, block_rows: usize, min_galaxies: u64) -> (CatalogueMaps, CatalogueFormat) {
    let mut source = CatalogueSource::open(
        &reference_path(&format!("catalogue_binning/{file}")),
        &CatalogueColumns::default(),
    )
    .unwrap();
    assert_eq!(source.weight_column(), Some("WEIGHT"));
    let plan = BinningPlan {
        min_galaxies,
        block_rows,
        ..BinningPlan::new(16)
    };
    (bin_catalogue(&mut source, &plan).unwrap(), source.format())
}

fn close(a: f64, b: f64) -> bool {
    // 1e-12 relative, or absolute for values near zero: sums of a few dozen terms in the same
    // order as numpy's bincount
    (a - b).abs() <= 1e-12 * b.abs().max(1.0)
}

fn check_against_numpy(maps: &CatalogueMaps) {
    let expected = expected_rows();
    let json = read_json("catalogue_binning/expected.json");
    let npix = 12 * 16 * 16;
    let mut listed = vec![false; npix];
    for e in &expected {
        listed[e.pixel] = true;
        let p = e.pixel as u64;
        let got = [
            maps.galaxies.get(p).unwrap(),
            maps.weight.get(p).unwrap(),
            maps.gamma1.get(p).unwrap(),
            maps.gamma2.get(p).unwrap(),
            maps.noise_variance.get(p).unwrap(),
            maps.density_contrast.get(p).unwrap(),
        ];
        for (k, (&g, &x)) in got.iter().zip(&e.values).enumerate() {
            assert!(close(g, x), "pixel {p} value {k}: {g} vs numpy {x}");
        }
    }
    for (p, &inside) in listed.iter().enumerate() {
        let p = p as u64;
        assert_eq!(
            maps.footprint.weights().get(p as usize),
            if inside { 1.0 } else { 0.0 }
        );
        if !inside {
            assert_eq!(maps.galaxies.get(p), Some(0.0));
            assert_eq!(maps.weight.get(p), Some(0.0));
            assert_eq!(maps.gamma1.get(p), None, "pixel {p} outside the footprint");
            assert_eq!(maps.density_contrast.get(p), None);
        }
    }
    assert!(close(
        maps.mean_galaxies,
        json["mean_galaxies"].as_f64().unwrap()
    ));
    let r = &maps.report;
    assert_eq!(r.rows, json["rows"].as_u64().unwrap());
    assert_eq!(r.used, json["used"].as_u64().unwrap());
    assert_eq!(r.ra_wrapped, json["ra_wrapped"].as_u64().unwrap());
    let reasons = &json["left_out"];
    for (problem, key) in [
        (RowProblem::NotFinite, "not_finite"),
        (RowProblem::DeclinationOutOfRange, "dec_out_of_range"),
        (RowProblem::EllipticityTooLarge, "ellipticity_too_large"),
        (RowProblem::NegativeWeight, "negative_weight"),
        (RowProblem::ZeroWeight, "zero_weight"),
    ] {
        assert_eq!(r.count(problem), reasons[key].as_u64().unwrap(), "{key}");
    }
}

#[test]
fn csv_and_fits_catalogues_bin_to_the_numpy_maps() {
    for file in ["galaxies.csv", "galaxies.fits"] {
        let (maps, format) = bin(file, 1 << 20, 1);
        let want = if file.ends_with(".csv") {
            CatalogueFormat::Csv
        } else {
            CatalogueFormat::Fits
        };
        assert_eq!(format, want);
        check_against_numpy(&maps);
    }
}

#[test]
fn block_size_and_thread_count_do_not_change_a_single_bit() {
    let in_pool = |threads: usize, file: &str, rows: usize| {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        pool.install(|| bin(file, rows, 1).0)
    };
    let whole = in_pool(1, "galaxies.fits", 1 << 20);
    for (file, rows, threads) in [
        ("galaxies.fits", 7, 1),
        ("galaxies.csv", 1, 2),
        ("galaxies.csv", 333, 3),
        ("galaxies.fits", 1 << 20, 2),
        ("galaxies.csv", 1 << 20, 3),
    ] {
        let cut = in_pool(threads, file, rows);
        assert_eq!(
            cut.galaxies.values_with_sentinel(),
            whole.galaxies.values_with_sentinel()
        );
        assert_eq!(
            cut.report, whole.report,
            "{file} in blocks of {rows}, {threads} threads"
        );
        for (a, b) in [
            (&whole.weight, &cut.weight),
            (&whole.gamma1, &cut.gamma1),
            (&whole.gamma2, &cut.gamma2),
            (&whole.noise_variance, &cut.noise_variance),
        ] {
            let bits = |m: &planisphere::SkyMap| -> Vec<u64> {
                m.values_with_sentinel()
                    .iter()
                    .map(|v| v.to_bits())
                    .collect()
            };
            assert_eq!(
                bits(a),
                bits(b),
                "{file} in blocks of {rows}, {threads} threads"
            );
        }
    }
}

#[test]
fn a_minimum_galaxy_count_shrinks_the_footprint_as_numpy_does() {
    let json = read_json("catalogue_binning/expected.json");
    let (maps, _) = bin("galaxies.csv", 1 << 20, 5);
    let s = maps.footprint.summary();
    assert_eq!(
        s.observed_pixels,
        json["footprint_pixels_min5"].as_u64().unwrap()
    );
    assert!(close(
        maps.mean_galaxies,
        json["mean_galaxies_min5"].as_f64().unwrap()
    ));
}

#[test]
fn the_maps_file_holds_named_columns_with_unseen_outside_the_footprint() {
    let (maps, _) = bin("galaxies.fits", 1 << 20, 1);
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("maps.fits");
    write_catalogue_maps(&path, &maps, &[]).unwrap();
    for (name, original) in [
        ("GALAXIES", &maps.galaxies),
        ("GAMMA1", &maps.gamma1),
        ("GAMMA2", &maps.gamma2),
        ("NOISE_VAR", &maps.noise_variance),
        ("DELTA", &maps.density_contrast),
    ] {
        let (read, header) = read_map(&path, &ColumnChoice::Name(name.to_string())).unwrap();
        assert_eq!(header.coordsys.as_deref(), Some("C"));
        assert_eq!(header.column_names(), MAP_COLUMNS.to_vec());
        assert_eq!(read.valid(), original.valid(), "{name}");
        assert_eq!(read.values_with_sentinel(), original.values_with_sentinel());
    }
}

#[test]
fn columns_are_chosen_by_name_and_a_missing_one_is_named_with_the_choices() {
    let path = reference_path("catalogue_binning/galaxies.fits");
    let columns = CatalogueColumns {
        e1: "G1".to_string(),
        ..CatalogueColumns::default()
    };
    let e = CatalogueSource::open(&path, &columns)
        .unwrap_err()
        .to_string();
    assert!(
        e.contains("no column 'G1' for e1") && e.contains("'E2'") && !e.contains('\n'),
        "{e}"
    );
    // unit weights: γ is then the plain mean of e over the pixel's galaxies
    let unit = CatalogueColumns {
        weight: WeightChoice::Unit,
        ..CatalogueColumns::default()
    };
    let mut source = CatalogueSource::open(&path, &unit).unwrap();
    assert_eq!(source.weight_column(), None);
    let maps = bin_catalogue(&mut source, &BinningPlan::new(16)).unwrap();
    let counts: Vec<f64> = maps.galaxies.values().to_vec();
    let weights: Vec<f64> = maps.weight.values().to_vec();
    assert_eq!(counts, weights);
    // the zero-weight row is used with weight 1 now
    assert_eq!(maps.report.count(RowProblem::ZeroWeight), 0);
}
