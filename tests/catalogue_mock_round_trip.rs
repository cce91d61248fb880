//! Mock catalogues (invented galaxies): without shape noise the binned mean shear equals the
//! shear map it was drawn from (the mean of N equal values, to rounding), the CSV writer's
//! numbers read back bit for bit (shortest round-trip decimal, common practice), and the
//! shear of a convergence map, binned and inverted (Kaiser & Squires 1993 on the full sky),
//! gives the convergence back.

use planisphere::catalogue::convergence::{convergence_on_footprint, mass_mapper};
use planisphere::catalogue::mock::{mock_catalogue, shear_of_convergence, write_catalogue_csv};
use planisphere::catalogue::{
    bin_catalogue, BinningPlan, CatalogueBinner, CatalogueColumns, CatalogueSource, GalaxyBlock,
};
use planisphere::harmonics::mass_mapping::MassMappingSettings;
use planisphere::{Footprint, Ordering, Pixelization, SkyMap};

fn kappa(nside: u32) -> SkyMap {
    // a smooth band-limited field (ℓ ≤ 4) with no monopole or dipole worth speaking of
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    SkyMap::from_fn(pix, |d| {
        let (st, ct) = d.theta.sin_cos();
        0.01 * (3.0 * ct * ct - 1.0)
            + 0.004 * st * st * (2.0 * d.phi).cos()
            + 0.002 * st.powi(4) * (4.0 * d.phi).sin()
    })
}

#[test]
fn noiseless_mock_galaxies_bin_to_their_shear_and_invert_to_their_convergence() {
    let nside = 16;
    let k = kappa(nside);
    let (g1, g2) = shear_of_convergence(&k, 2 * nside as usize).unwrap();
    let full = Footprint::full_sky(k.pixelization());
    let galaxies = mock_catalogue(&g1, &g2, &full, 60_000, 0.0, 3).unwrap();
    let mut binner = CatalogueBinner::new(nside, None).unwrap();
    binner.add_block(&galaxies);
    let maps = binner.maps(1, "mock").unwrap();
    let scale = g1.values().iter().map(|v| v.abs()).fold(0.0, f64::max);
    for p in 0..k.pixelization().npix() {
        if let Some(b) = maps.gamma1.get(p) {
            assert!((b - g1.get(p).unwrap()).abs() <= 1e-14 * scale, "pixel {p}");
            assert!((maps.gamma2.get(p).unwrap() - g2.get(p).unwrap()).abs() <= 1e-14 * scale);
        }
    }
    // with 60 000 galaxies on 3072 pixels every pixel is hit: the full sky inverts exactly
    assert_eq!(maps.footprint.summary().observed_pixels, 3072);
    let mapper = mass_mapper(nside, Some(2 * nside as usize)).unwrap();
    let back = convergence_on_footprint(
        &mapper,
        &maps.gamma1,
        &maps.gamma2,
        &maps.footprint,
        &MassMappingSettings::default(),
    )
    .unwrap();
    let mean = k.values().iter().sum::<f64>() / 3072.0;
    let kscale = k
        .values()
        .iter()
        .map(|v| (v - mean).abs())
        .fold(0.0, f64::max);
    let worst = (0..3072u64)
        .map(|p| (back.e.get(p).unwrap() - (k.get(p).unwrap() - mean)).abs())
        .fold(0.0, f64::max);
    let worst_b = (0..3072u64)
        .map(|p| back.b.get(p).unwrap().abs())
        .fold(0.0, f64::max);
    println!(
        "κ_E error {:.2e}, κ_B {:.2e} of max |κ| {kscale:.3e}",
        worst, worst_b
    );
    assert!(worst < 1e-3 * kscale, "κ_E error {worst}");
    assert!(worst_b < 1e-3 * kscale, "κ_B {worst_b}");
}

#[test]
fn the_csv_writer_reads_back_bit_for_bit() {
    let nside = 8;
    let k = kappa(nside);
    let (g1, g2) = shear_of_convergence(&k, 2 * nside as usize).unwrap();
    let cap = Footprint::from_fn(k.pixelization(), |d| d.theta < 1.0);
    let galaxies = mock_catalogue(&g1, &g2, &cap, 500, 0.26, 9).unwrap();
    assert!(galaxies
        .dec
        .iter()
        .all(|&d| d > 90.0 - 1f64.to_degrees() - 8.0));
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("mock.csv");
    write_catalogue_csv(&path, &galaxies).unwrap();
    let mut source = CatalogueSource::open(&path, &CatalogueColumns::default()).unwrap();
    let mut read = GalaxyBlock::default();
    assert!(source.read_block(&mut read, 10_000).unwrap());
    assert_eq!(read, galaxies);
    let maps = bin_catalogue(
        &mut CatalogueSource::open(&path, &CatalogueColumns::default()).unwrap(),
        &BinningPlan::new(nside),
    )
    .unwrap();
    assert_eq!(maps.report.used, 500);
}
