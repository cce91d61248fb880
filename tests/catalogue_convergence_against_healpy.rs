//! κ_E, κ_B of a binned catalogue against healpy 1.20.1: `map2alm_spin([γ1, γ2], 2)` of the
//! binned shear (0 outside the footprint), times −√(ℓ(ℓ+1)/((ℓ+2)(ℓ−1))) (Kaiser & Squires
//! 1993 on the sphere), `alm2map`, unsmoothed and with `gauss_beam` of 120′ FWHM
//! (reference-values/catalogue_binning_reference.py, file kappa.csv); κ is kept on the footprint
//! and invalid outside it.

mod common;

use common::reference_path;
use planisphere::catalogue::convergence::{convergence_on_footprint, mass_mapper};
use planisphere::catalogue::{bin_catalogue, BinningPlan, CatalogueColumns, CatalogueSource};
use planisphere::harmonics::mass_mapping::MassMappingSettings;

#[test]
fn convergence_of_the_binned_shear_matches_healpy_on_the_footprint() {
    let path = reference_path("catalogue_binning/galaxies.csv");
    let mut source = CatalogueSource::open(&path, &CatalogueColumns::default()).unwrap();
    let maps = bin_catalogue(&mut source, &BinningPlan::new(16)).unwrap();
    let mapper = mass_mapper(16, None).unwrap();
    assert_eq!(mapper.lmax(), 47);
    let text = std::fs::read_to_string(reference_path("catalogue_binning/kappa.csv")).unwrap();
    let rows: Vec<Vec<f64>> = text
        .lines()
        .skip(1)
        .map(|l| l.split(',').map(|v| v.parse().unwrap()).collect())
        .collect();
    assert_eq!(rows.len(), 165);
    for (column, fwhm) in [(1, 0.0), (3, 120.0)] {
        let settings = MassMappingSettings {
            smoothing_fwhm_arcmin: fwhm,
            // healpy's map2alm_spin does no Jacobi iterations
            iterations: 0,
            ..MassMappingSettings::default()
        };
        let kappa = convergence_on_footprint(
            &mapper,
            &maps.gamma1,
            &maps.gamma2,
            &maps.footprint,
            &settings,
        )
        .unwrap();
        let scale = rows.iter().map(|r| r[column].abs()).fold(0.0, f64::max);
        let mut worst: f64 = 0.0;
        for r in &rows {
            let p = r[0] as u64;
            for (map, want) in [(&kappa.e, r[column]), (&kappa.b, r[column + 1])] {
                let got = map.get(p).unwrap();
                worst = worst.max((got - want).abs() / scale);
            }
        }
        println!("FWHM {fwhm}′: worst |Δκ| / max|κ| = {worst:.2e}");
        assert!(worst < 1e-10, "FWHM {fwhm}: {worst}");
        assert_eq!(kappa.e.valid_count(), 165);
        assert_eq!(kappa.b.valid_count(), 165);
    }
}
