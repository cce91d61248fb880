//! Time of the MASTER steps at NSIDE 256, ℓmax = 3·NSIDE − 1 (one run; prints a table): the
//! pseudo-spectrum of one sky (the w2 estimate's cost), weight spectrum, coupling matrix on 1
//! and 2 threads (and whether the bits agree), binned kernel and solve, pixel window, and the
//! whole `master_spectrum`.
//!
//! `cargo run --release --example master_timing [NSIDE]`

use planisphere::harmonics::mode_coupling::{
    healpix_pixel_window, weight_spectrum, BinWeighting, Binning, CouplingMatrix,
    MasterDeconvolution,
};
use planisphere::harmonics::spectra::{master_spectrum, pseudo_spectrum, MasterSettings};
use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::harmonics::HarmonicTransform;
use planisphere::simulate::skies::SkyRecipe;
use planisphere::{Direction, Footprint, Ordering, Pixelization};
use std::time::Instant;

fn main() {
    let nside: usize = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(256);
    let lmax = 3 * nside - 1;
    let pix = Pixelization::new(nside as u32, Ordering::Ring).expect("NSIDE");
    let hole = Direction::from_lonlat_deg(30.0, 60.0).to_vector();
    let mask = Footprint::from_fn(pix, move |d| {
        let v = d.to_vector();
        d.lat().abs() > 20f64.to_radians()
            && v[0] * hole[0] + v[1] * hole[1] + v[2] * hole[2] < 6f64.to_radians().cos()
    });
    println!("NSIDE {nside}, lmax {lmax}, f_sky {:.3}", mask.f_sky());
    println!("| step | seconds |\n|---|---|");
    let recipe = SkyRecipe::gaussian(nside as u32, AngularSpectrum::demo_model(lmax, 1e-4), 1);
    let sky_sht = recipe.transform().expect("transform");
    let map = recipe.realise(&sky_sht, 0).expect("sky");
    let t = Instant::now();
    let sht = HarmonicTransform::new(nside, lmax).expect("transform");
    let pseudo = pseudo_spectrum(&map, &map, Some(&mask), &sht, 0).expect("pseudo");
    let pseudo_seconds = t.elapsed().as_secs_f64();
    println!("| pseudo-spectrum of one map (transform set-up + analysis) | {pseudo_seconds:.2} |");
    let mask_weights = mask.weights().to_vec();
    let t = Instant::now();
    let sht = HarmonicTransform::new(nside, lmax).expect("transform");
    let wl = weight_spectrum(&mask_weights, &sht, 0).expect("spectrum");
    println!(
        "| weight spectrum (transform set-up + analysis) | {:.2} |",
        t.elapsed().as_secs_f64()
    );
    let mut matrices = Vec::new();
    for threads in [1, 2] {
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("pool");
        let t = Instant::now();
        let m = pool.install(|| CouplingMatrix::new(&wl, lmax).expect("coupling"));
        println!(
            "| coupling matrix, {threads} thread(s) | {:.2} |",
            t.elapsed().as_secs_f64()
        );
        matrices.push(m);
    }
    let same = (0..=lmax).all(|a| {
        (0..=lmax).all(|b| matrices[0].get(a, b).to_bits() == matrices[1].get(a, b).to_bits())
    });
    println!("| coupling matrix bits equal on 1 and 2 threads | {same} |");
    let t = Instant::now();
    let binning = Binning::uniform(2, lmax, 16, BinWeighting::Cl).expect("bins");
    let transfer = vec![1.0; lmax + 1];
    let master = MasterDeconvolution::new(&matrices[0], binning, &transfer).expect("kernel");
    let out = master.apply(&wl).expect("solve");
    println!(
        "| binned kernel (Δℓ = 16, {} bins) + LU + solve | {:.3} |",
        out.len(),
        t.elapsed().as_secs_f64()
    );
    let t = Instant::now();
    let p = healpix_pixel_window(nside as u32, lmax).expect("window");
    println!(
        "| pixel window (p at lmax = {:.12}) | {:.2} |",
        p[lmax],
        t.elapsed().as_secs_f64()
    );
    for pixel_window in [false, true] {
        let settings = MasterSettings {
            bin_width: 16,
            weighting: BinWeighting::Cl,
            beam_fwhm_arcmin: 10.0,
            pixel_window,
        };
        let t = Instant::now();
        let s = master_spectrum(&pseudo, nside, 0, &settings).expect("master");
        let seconds = t.elapsed().as_secs_f64();
        println!(
            "| whole master_spectrum, pixel window {pixel_window} ({} bins) | {seconds:.2} ({:.1}× the pseudo-spectrum) |",
            s.bins.len(),
            seconds / pseudo_seconds
        );
    }
}
