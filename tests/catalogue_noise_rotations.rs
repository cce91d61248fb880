//! Shape-noise realisations by random rotation of each galaxy's ellipticity, e → e·exp(2iα):
//! * the variance of a pixel's mean shear over 200 rotations matches Σ w²|e|² / (2 (Σw)²), i.e.
//!   σ_e² Σw² / (Σw)² with σ_e² = |e|²/2 per component (σ_e²/N for unit weights; common
//!   practice), within its sampling error, and the mean is zero within its error;
//! * a rotation keeps |e| (to rounding) and the angles are uniform on [0, π) (mean π/2,
//!   variance π²/12: uniform distribution, from memory);
//! * realisation k is bitwise the same for any block size and thread count, and the same when
//!   made alone through the file reader or beside 199 others.
//!
//! The galaxies are invented for the test (a seeded ChaCha stream).

mod common;

use planisphere::catalogue::rotation::{rotate_ellipticity, RotationAngles};
use planisphere::catalogue::{
    bin_catalogue, noise_realisation, BinningPlan, CatalogueBinner, CatalogueColumns,
    CatalogueSource, GalaxyBlock, NoiseRealisations,
};
use planisphere::{Direction, Ordering, Pixelization};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::f64::consts::PI;

const NSIDE: u32 = 8;
const REALISATIONS: u64 = 200;

fn catalogue(n: usize) -> GalaxyBlock {
    let mut rng = ChaCha8Rng::seed_from_u64(42);
    let mut block = GalaxyBlock::default();
    for _ in 0..n {
        let ra = rng.gen_range(0.0..60.0);
        let dec = rng.gen_range(0.0..40.0);
        let (e1, e2) = loop {
            let e1: f64 = rng.gen_range(-0.7..0.7);
            let e2: f64 = rng.gen_range(-0.7..0.7);
            if e1 * e1 + e2 * e2 < 0.49 {
                break (e1 + 0.05, e2);
            }
        };
        block.push(ra, dec, e1, e2, rng.gen_range(0.2..3.0));
    }
    block
}

fn bin_blocks(
    galaxies: &GalaxyBlock,
    rows: usize,
    indices: Vec<u64>,
) -> planisphere::catalogue::CatalogueMaps {
    let noise = NoiseRealisations { seed: 9, indices };
    let mut binner = CatalogueBinner::new(NSIDE, Some(&noise)).unwrap();
    let mut start = 0;
    while start < galaxies.len() {
        let end = (start + rows).min(galaxies.len());
        let mut block = GalaxyBlock::default();
        block.clear(start as u64);
        for i in start..end {
            block.push(
                galaxies.ra[i],
                galaxies.dec[i],
                galaxies.e1[i],
                galaxies.e2[i],
                galaxies.weight[i],
            );
        }
        binner.add_block(&block);
        start = end;
    }
    binner.maps(1, "test catalogue").unwrap()
}

#[test]
fn rotated_shear_has_the_shape_noise_variance_per_pixel() {
    let galaxies = catalogue(4000);
    let maps = bin_blocks(&galaxies, 1 << 20, (0..REALISATIONS).collect());
    // the prediction, computed here from the galaxies with the formula of the module doc
    let pix = Pixelization::new(NSIDE, Ordering::Ring).unwrap();
    let npix = pix.npix() as usize;
    let (mut w_sum, mut w2e2) = (vec![0.0; npix], vec![0.0; npix]);
    for i in 0..galaxies.len() {
        let p = pix.pixel_of(Direction::from_lonlat_deg(galaxies.ra[i], galaxies.dec[i])) as usize;
        let (w, e1, e2) = (galaxies.weight[i], galaxies.e1[i], galaxies.e2[i]);
        w_sum[p] += w;
        w2e2[p] += w * w * (e1 * e1 + e2 * e2);
    }
    let n = REALISATIONS as f64;
    let (mut ratios, mut z2) = (Vec::new(), Vec::new());
    for p in 0..npix {
        if w_sum[p] == 0.0 {
            continue;
        }
        let predicted = w2e2[p] / (2.0 * w_sum[p] * w_sum[p]);
        let stored = maps.noise_variance.get(p as u64).unwrap();
        assert!((stored / predicted - 1.0).abs() < 1e-12);
        for c in 0..2 {
            let values: Vec<f64> = maps
                .noise
                .iter()
                .map(|m| if c == 0 { &m.gamma1 } else { &m.gamma2 })
                .map(|m| m.get(p as u64).unwrap())
                .collect();
            let mean = values.iter().sum::<f64>() / n;
            let var = values.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
            ratios.push(var / predicted);
            z2.push(mean * mean / (predicted / n));
        }
    }
    assert!(ratios.len() >= 40, "{} pixel components", ratios.len());
    let m = ratios.len() as f64;
    let mean_ratio = ratios.iter().sum::<f64>() / m;
    let spread = (ratios.iter().map(|r| (r - mean_ratio).powi(2)).sum::<f64>() / (m - 1.0)).sqrt();
    // the components of one pixel are not independent, so allow the error of m/2 samples
    let error = spread / (m / 2.0).sqrt();
    assert!(
        (mean_ratio - 1.0).abs() < 4.0 * error,
        "variance / prediction = {mean_ratio:.4} ± {error:.4}"
    );
    println!(
        "variance / prediction = {mean_ratio:.4} ± {error:.4} over {} pixel components",
        ratios.len()
    );
    // a factor 2 off (e.g. forgetting the 1/2 per component) would be far outside
    assert!(4.0 * error < 0.25, "test too weak: error {error}");
    // z² of the means has expectation 1
    let mean_z2 = z2.iter().sum::<f64>() / m;
    println!("mean z² of the realisation means = {mean_z2:.3}");
    assert!(
        (mean_z2 - 1.0).abs() < 4.0 * (2.0 / (m / 2.0)).sqrt(),
        "mean z² {mean_z2}"
    );
}

#[test]
fn rotations_keep_the_modulus_and_the_angles_are_uniform() {
    let mut angles = RotationAngles::new(3, 11, 1_000_000);
    let count = 200_000;
    let (mut sum, mut sum2) = (0.0, 0.0);
    for k in 0..count {
        let a = angles.next_angle();
        assert!((0.0..PI).contains(&a));
        sum += a;
        sum2 += a * a;
        let (e1, e2) = (0.3 - 1e-6 * k as f64, -0.2);
        let (r1, r2) = rotate_ellipticity(e1, e2, a);
        let before = (e1 * e1 + e2 * e2).sqrt();
        let after = (r1 * r1 + r2 * r2).sqrt();
        assert!((after - before).abs() <= 4.0 * f64::EPSILON * before);
    }
    let n = count as f64;
    let mean = sum / n;
    let var = sum2 / n - mean * mean;
    let sd = (PI * PI / 12.0).sqrt();
    assert!((mean - PI / 2.0).abs() < 4.0 * sd / n.sqrt(), "mean {mean}");
    // variance of a uniform variable's sample variance: (π⁴/80 − π⁴/144)/n
    let var_error = ((PI.powi(4) / 80.0 - PI.powi(4) / 144.0) / n).sqrt();
    assert!(
        (var - PI * PI / 12.0).abs() < 4.0 * var_error,
        "variance {var}"
    );
}

#[test]
fn a_realisation_is_the_same_for_any_block_size_and_thread_count() {
    let galaxies = catalogue(3000);
    let bits = |maps: &planisphere::catalogue::CatalogueMaps| -> Vec<u64> {
        maps.noise
            .iter()
            .flat_map(|m| {
                m.gamma1
                    .values_with_sentinel()
                    .into_iter()
                    .chain(m.gamma2.values_with_sentinel())
            })
            .map(f64::to_bits)
            .collect()
    };
    let reference = bits(&bin_blocks(&galaxies, 1 << 20, vec![5, 17]));
    for (rows, threads) in [(1, 1), (7, 2), (1000, 2), (1 << 20, 1), (1 << 20, 3)] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .unwrap();
        let got = pool.install(|| bits(&bin_blocks(&galaxies, rows, vec![5, 17])));
        assert_eq!(got, reference, "blocks of {rows}, {threads} threads");
    }
    // realisation 17 alone equals realisation 17 binned beside 5
    let alone = bin_blocks(&galaxies, 999, vec![17]);
    let pair = bin_blocks(&galaxies, 999, vec![5, 17]);
    assert_eq!(
        alone.noise[0].gamma1.values_with_sentinel(),
        pair.noise[1].gamma1.values_with_sentinel()
    );
}

#[test]
fn the_file_reader_gives_realisation_k_alone_as_in_a_series() {
    let path = common::reference_path("catalogue_binning/galaxies.csv");
    let columns = CatalogueColumns::default();
    let plan = BinningPlan {
        block_rows: 64,
        noise: Some(NoiseRealisations {
            seed: 4,
            indices: (0..4).collect(),
        }),
        ..BinningPlan::new(16)
    };
    let series =
        bin_catalogue(&mut CatalogueSource::open(&path, &columns).unwrap(), &plan).unwrap();
    let fits = common::reference_path("catalogue_binning/galaxies.fits");
    let alone = noise_realisation(
        &mut CatalogueSource::open(&fits, &columns).unwrap(),
        &BinningPlan::new(16),
        4,
        2,
    )
    .unwrap();
    assert_eq!(alone.realisation, 2);
    assert_eq!(
        alone.gamma2.values_with_sentinel(),
        series.noise[2].gamma2.values_with_sentinel()
    );
    assert_ne!(
        series.noise[1].gamma2.values_with_sentinel(),
        series.noise[2].gamma2.values_with_sentinel()
    );
}

#[test]
fn a_noise_map_recipe_gives_realisation_k_of_the_series() {
    use planisphere::catalogue::convergence::{convergence_on_footprint, mass_mapper};
    use planisphere::catalogue::noise_maps::{NoiseMapKind, NoiseMapRecipe};
    use planisphere::harmonics::mass_mapping::MassMappingSettings;
    let path = common::reference_path("catalogue_binning/galaxies.csv");
    let settings = MassMappingSettings {
        smoothing_fwhm_arcmin: 90.0,
        ..MassMappingSettings::default()
    };
    let plan = BinningPlan {
        noise: Some(NoiseRealisations {
            seed: 8,
            indices: vec![0, 1, 2],
        }),
        ..BinningPlan::new(16)
    };
    let columns = CatalogueColumns::default();
    let series =
        bin_catalogue(&mut CatalogueSource::open(&path, &columns).unwrap(), &plan).unwrap();
    let mapper = mass_mapper(16, None).unwrap();
    let expected = convergence_on_footprint(
        &mapper,
        &series.noise[2].gamma1,
        &series.noise[2].gamma2,
        &series.footprint,
        &settings,
    )
    .unwrap();
    let recipe = NoiseMapRecipe {
        catalogue: path.clone(),
        columns,
        plan: BinningPlan::new(16),
        seed: 8,
        map: NoiseMapKind::KappaB,
        lmax: None,
        settings,
    };
    let own = recipe.mapper().unwrap();
    let got = recipe.realise(own.as_ref(), 2).unwrap();
    assert_eq!(
        got.values_with_sentinel(),
        expected.b.values_with_sentinel()
    );
    let gamma = NoiseMapRecipe {
        map: NoiseMapKind::Gamma1,
        ..recipe
    };
    assert!(gamma.mapper().unwrap().is_none());
    assert_eq!(
        gamma.realise(None, 1).unwrap().values_with_sentinel(),
        series.noise[1].gamma1.values_with_sentinel()
    );
}
