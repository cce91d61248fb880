//! Time to write and read full-sky HEALPix FITS maps, printed as a table.
//!
//! `cargo run --release --example fits_read_speed [MAX_NSIDE]` (default 2048; NSIDE 2048 needs
//! about 1.5 GB of memory and 0.6 GB of temporary disk space).

use planisphere::io::fits_io::{read_map, write_map, ColumnChoice, ValuePrecision, WriteOptions};
use planisphere::{Ordering, Pixelization, SkyMap};
use std::time::Instant;

fn main() {
    let max_nside: u32 = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(2048);
    let dir = tempfile::tempdir().expect("temporary directory");
    println!("| NSIDE | pixels | stored | file MB | write s | read s | read MB/s |");
    println!("|---|---|---|---|---|---|---|");
    let mut nside = 256;
    while nside <= max_nside {
        let pix = Pixelization::new(nside, Ordering::Ring).expect("NSIDE");
        let values: Vec<f64> = (0..pix.npix()).map(|p| (p % 1000) as f64 * 1e-3).collect();
        let map = SkyMap::new(pix, values).expect("map");
        for precision in [ValuePrecision::Float32, ValuePrecision::Float64] {
            let path = dir.path().join(format!("m{nside}.fits"));
            let options = WriteOptions {
                precision,
                ..WriteOptions::default()
            };
            let t = Instant::now();
            write_map(&path, "T", &map, &options).expect("write");
            let write_s = t.elapsed().as_secs_f64();
            let size = std::fs::metadata(&path).expect("size").len() as f64 / 1e6;
            let t = Instant::now();
            let (back, _) = read_map(&path, &ColumnChoice::default()).expect("read");
            let read_s = t.elapsed().as_secs_f64();
            assert_eq!(back.valid_count(), pix.npix());
            println!(
                "| {nside} | {} | {precision:?} | {size:.1} | {write_s:.3} | {read_s:.3} | {:.0} |",
                pix.npix(),
                size / read_s
            );
            std::fs::remove_file(&path).expect("remove");
        }
        nside *= 2;
    }
}
