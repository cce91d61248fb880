//! The tile power spectrum of Gaussian skies agrees with the full-sky C_ℓ under ℓ ↔ k − ½
//! (LoVerde & Afshordi 2008, PRD 78, 123506) for 10° tiles: the expectation of the tapered
//! periodogram is the flat-sky spectrum P(k) = C_{k−½} convolved with the taper's |Ŵ|²
//! (E P̂(k) = Σ_q |Ŵ_{k−q}|² P(q) / (N Σa²), common practice), computed here independently.

use num_complex::Complex64;
use planisphere::harmonics::spectrum::AngularSpectrum;
use planisphere::measure::measurement::{border_window, MeasurementSettings, SphereMeasurer};
use planisphere::simulate::skies::SkyRecipe;
use planisphere::{Footprint, Ordering, Pixelization};
use rustfft::FftPlanner;

fn fft2(data: &mut [Complex64], n: usize, inverse: bool) {
    let mut planner = FftPlanner::new();
    let f = if inverse {
        planner.plan_fft_inverse(n)
    } else {
        planner.plan_fft_forward(n)
    };
    for row in data.chunks_exact_mut(n) {
        f.process(row);
    }
    let mut col = vec![Complex64::new(0.0, 0.0); n];
    for x in 0..n {
        for y in 0..n {
            col[y] = data[y * n + x];
        }
        f.process(&mut col);
        for y in 0..n {
            data[y * n + x] = col[y];
        }
    }
}

#[test]
fn tile_power_spectrum_matches_full_sky_cl_at_k_minus_half_for_ten_degree_tiles() {
    let nside = 256;
    let lmax = 3 * nside as usize - 1;
    let spectrum = AngularSpectrum::demo_model(lmax, 1e-4);
    let recipe = SkyRecipe::gaussian(nside, spectrum.clone(), 17);
    let sht = recipe.transform().unwrap();
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let full = Footprint::full_sky(pix);
    let n = 64;
    let delta_arcmin = 600.0 / n as f64; // 64 pixels of 9.375′: 10° tiles
    let settings = MeasurementSettings {
        scales: 3,
        tile_pixels: Some(n),
        pixel_arcmin: Some(delta_arcmin),
        coarse_nside: Some(32),
        border_pixels: 8,
        spectrum_bins: 8,
        bispectrum: false,
        ..MeasurementSettings::default()
    };
    let m = SphereMeasurer::new(pix, &full, settings).unwrap();
    let skies = 3;
    let measured: Vec<Vec<f64>> = (0..skies)
        .map(|i| {
            m.measure(&recipe.realise(&sht, i).unwrap(), &full)
                .unwrap()
                .tile_power
                .power
        })
        .collect();
    // independent prediction: |Ŵ|² ⊛ P on the tile's Fourier grid
    let delta = (delta_arcmin / 60.0f64).to_radians();
    let taper = border_window(n, settings.border_pixels);
    let mut w: Vec<Complex64> = taper.iter().map(|&a| Complex64::new(a, 0.0)).collect();
    fft2(&mut w, n, false);
    let w2: Vec<f64> = w.iter().map(|c| c.norm_sqr()).collect();
    let freq = |i: usize| {
        if i <= n / 2 {
            i as f64
        } else {
            i as f64 - n as f64
        }
    };
    let dk = 2.0 * std::f64::consts::PI / (n as f64 * delta);
    let kmag = |q: usize| dk * (freq(q % n).powi(2) + freq(q / n).powi(2)).sqrt();
    let cl_at = |ell: f64| {
        if ell < 0.0 || ell >= lmax as f64 {
            return 0.0;
        }
        let i = ell.floor() as usize;
        let t = ell - i as f64;
        spectrum.cl[i] * (1.0 - t) + spectrum.cl[i + 1] * t
    };
    let p: Vec<f64> = (0..n * n)
        .map(|q| if q == 0 { 0.0 } else { cl_at(kmag(q) - 0.5) })
        .collect();
    // circular convolution by FFT
    let mut a: Vec<Complex64> = w2.iter().map(|&x| Complex64::new(x, 0.0)).collect();
    let mut b: Vec<Complex64> = p.iter().map(|&x| Complex64::new(x, 0.0)).collect();
    fft2(&mut a, n, false);
    fft2(&mut b, n, false);
    let mut c: Vec<Complex64> = a.iter().zip(&b).map(|(x, y)| x * y).collect();
    fft2(&mut c, n, true);
    let sum_a2: f64 = taper.iter().map(|x| x * x).sum();
    let nn = (n * n) as f64;
    let expected_cell: Vec<f64> = c.iter().map(|z| z.re / nn / (nn * sum_a2)).collect();
    // bins as the tile statistics define them (logarithmic from the fundamental to Nyquist)
    let k0 = dk;
    let k1 = std::f64::consts::PI / delta;
    let edges: Vec<f64> = (0..=8)
        .map(|i| k0 * (k1 / k0).powf(i as f64 / 8.0))
        .collect();
    let h = pix.mean_spacing();
    let mut checked = 0;
    for bin in 0..8 {
        // skip wavelengths shorter than 8 map spacings (the sampling transfer, docs/validation.md)
        if 2.0 * std::f64::consts::PI / edges[bin + 1] < 8.0 * h {
            continue;
        }
        let cells: Vec<usize> = (0..n * n)
            .filter(|&q| kmag(q) >= edges[bin] && kmag(q) < edges[bin + 1])
            .collect();
        let expected = cells.iter().map(|&q| expected_cell[q]).sum::<f64>() / cells.len() as f64;
        let vals: Vec<f64> = measured.iter().map(|v| v[bin]).collect();
        let mean = vals.iter().sum::<f64>() / skies as f64;
        let sd =
            (vals.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (skies as f64 - 1.0)).sqrt();
        // tolerance: 3% for the curvature of 10° tiles (sec²ρ ≤ 1.015) and the ring-cubic
        // transfer above 8h (≥ 0.94), plus 3 standard errors of the sky mean
        let tol = 0.03 * expected + 3.0 * sd / (skies as f64).sqrt();
        assert!(
            (mean - expected).abs() < tol,
            "bin {bin} ({:.0}–{:.0}): {mean:.4e} vs {expected:.4e} ± {tol:.2e}",
            edges[bin],
            edges[bin + 1]
        );
        checked += 1;
    }
    assert!(checked >= 3, "only {checked} bins checked");
}
