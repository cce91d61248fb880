//! Bad settings and unusable data give a clear one-line error, never a panic (common practice;
//! crate rule for user input).

use planisphere::measure::flat::FlatMap;
use planisphere::scattering::pooling::{combine_tiles, pooled_coefficients};
use planisphere::scattering::transform::{ScatteringEngine, TileView};
use planisphere::Error;

fn setting_message(r: planisphere::Result<ScatteringEngine>) -> String {
    match r {
        Err(Error::Setting(m)) => m,
        Err(other) => panic!("expected a setting error, got {other}"),
        Ok(_) => panic!("expected a setting error, got an engine"),
    }
}

#[test]
fn scale_count_too_large_for_tile_size_is_rejected() {
    let m = setting_message(ScatteringEngine::new(64, 6, 4));
    assert_eq!(
        m,
        "J = 6 scales is too large for a 64-pixel tile: need 2^(J+1) <= 64, i.e. J <= 5"
    );
    assert!(ScatteringEngine::new(64, 5, 4).is_ok());
}

#[test]
fn zero_orientations_or_zero_scales_are_rejected() {
    assert_eq!(
        setting_message(ScatteringEngine::new(32, 3, 0)),
        "number of orientations L must be at least 1, got 0"
    );
    assert_eq!(
        setting_message(ScatteringEngine::new(32, 0, 4)),
        "number of scales J must be at least 1, got 0"
    );
}

#[test]
fn tile_size_outside_the_mixed_radix_sizes_is_rejected() {
    // accepted: 2^k·m with m = 1, 3, 5, 7, 9 (k ≥ 4 when m > 1), so that the cropped grids
    // n/2^d stay even (limits::is_tile_size)
    for n in [44, 24, 100, 11] {
        assert_eq!(
            setting_message(ScatteringEngine::new(n, 2, 4)),
            format!(
                "tile size must be 2^k·m pixels (m = 1, 3, 5, 7 or 9; at least 8, and 16·m when m > 1), got {n}"
            )
        );
    }
    for n in [48, 80, 112, 144, 64] {
        assert!(ScatteringEngine::new(n, 2, 4).is_ok(), "{n}");
    }
}

#[test]
fn nan_in_field_is_a_data_error() {
    let engine = ScatteringEngine::new(16, 2, 4).unwrap();
    let mut f = vec![0.5; 256];
    f[37] = f64::NAN;
    let ones = vec![1.0; 256];
    let r = engine.transform_tile(&TileView {
        field: &f,
        taper: &ones,
        weight: &ones,
    });
    match r {
        Err(Error::Data(m)) => {
            assert_eq!(m, "tile field holds a non-finite value (NaN) at pixel 37")
        }
        other => panic!("expected a data error, got {other:?}"),
    }
    match FlatMap::new(16, 1e-3, f) {
        Err(Error::Data(m)) => assert_eq!(m, "flat map holds a non-finite value (NaN) at pixel 37"),
        other => panic!("expected a data error, got {other:?}"),
    }
}

#[test]
fn zero_total_weight_is_a_data_error() {
    let engine = ScatteringEngine::new(16, 2, 4).unwrap();
    let f = vec![0.5; 256];
    let ones = vec![1.0; 256];
    let zeros = vec![0.0; 256];
    match engine.transform_tile(&TileView {
        field: &f,
        taper: &ones,
        weight: &zeros,
    }) {
        Err(Error::Data(m)) => assert_eq!(m, "tile pooling weights sum to zero: no pixel to pool"),
        other => panic!("expected a data error, got {other:?}"),
    }
    match combine_tiles(&[]) {
        Err(Error::Data(m)) => assert_eq!(m, "no tiles to combine"),
        other => panic!("expected a data error, got {other:?}"),
    }
}

#[test]
fn wrong_array_length_and_negative_weight_are_rejected() {
    let engine = ScatteringEngine::new(16, 2, 4).unwrap();
    let f = vec![0.5; 255];
    let ones = vec![1.0; 256];
    match engine.transform_tile(&TileView {
        field: &f,
        taper: &ones,
        weight: &ones,
    }) {
        Err(Error::Mismatch(m)) => {
            assert_eq!(
                m,
                "tile field has 255 values, expected 256 for a 16 x 16 tile"
            )
        }
        other => panic!("expected a mismatch error, got {other:?}"),
    }
    let f = vec![0.5; 256];
    let mut w = ones.clone();
    w[3] = -1.0;
    match engine.transform_tile(&TileView {
        field: &f,
        taper: &ones,
        weight: &w,
    }) {
        Err(Error::Data(m)) => {
            assert_eq!(
                m,
                "tile pooling weight must be non-negative, got -1 at pixel 3"
            )
        }
        other => panic!("expected a data error, got {other:?}"),
    }
    // Sums from an engine of another layout cannot be pooled by this one.
    let other = ScatteringEngine::new(16, 3, 4).unwrap();
    let sums = other
        .transform_tile(&TileView {
            field: &f,
            taper: &ones,
            weight: &ones,
        })
        .unwrap();
    assert!(matches!(
        pooled_coefficients(&engine, &sums),
        Err(Error::Mismatch(_))
    ));
}
