//! Speed of binning a galaxy catalogue into shear maps, on one thread, and what dominates:
//! the pixel search (cdshealpix ring hash), the sums, a noise realisation, and reading the
//! same rows through the CSV and FITS readers. Invented galaxies (uniform on a 5000 deg² cap).
//!
//! cargo run --release --example catalogue_binning_speed [GALAXIES] [NSIDE]
//!
//! Prints one table; every row is measured in the same run (best of three).

use planisphere::catalogue::screening::check_row;
use planisphere::catalogue::{
    BinningPlan, CatalogueBinner, CatalogueColumns, CatalogueSource, GalaxyBlock, NoiseRealisations,
};
use planisphere::{Direction, Ordering, Pixelization};
use rand::{Rng, SeedableRng};
use rand_chacha::ChaCha8Rng;
use std::io::Write;
use std::time::Instant;

fn invented(n: usize) -> GalaxyBlock {
    let mut rng = ChaCha8Rng::seed_from_u64(1);
    let mut b = GalaxyBlock::default();
    // a cap of 5000 deg² around the south pole region: z uniform in [-1, -1 + 2·f]
    let f = 5000.0 / 41252.96;
    for _ in 0..n {
        let z: f64 = rng.gen_range(-1.0..-1.0 + 2.0 * f);
        let ra = rng.gen_range(0.0..360.0);
        let dec = z.asin().to_degrees();
        let e1 = rng.gen_range(-0.5..0.5);
        let e2 = rng.gen_range(-0.5..0.5);
        b.push(ra, dec, e1, e2, rng.gen_range(0.5..1.5));
    }
    b
}

fn best_of_three(mut f: impl FnMut()) -> f64 {
    (0..3)
        .map(|_| {
            let t = Instant::now();
            f();
            t.elapsed().as_secs_f64()
        })
        .fold(f64::INFINITY, f64::min)
}

/// A FITS binary table of the galaxies (FITS standard 4.0, §7.3; big-endian float64 columns).
fn write_fits(path: &std::path::Path, g: &GalaxyBlock) {
    let mut cards: Vec<String> = Vec::new();
    let card = |k: &str, v: &str| format!("{k:<8}= {v:>20}");
    cards.push(card("SIMPLE", "T"));
    cards.push(card("BITPIX", "8"));
    cards.push(card("NAXIS", "0"));
    cards.push(card("EXTEND", "T"));
    cards.push("END".to_string());
    let mut bytes = Vec::new();
    let pad = |bytes: &mut Vec<u8>, fill: u8| {
        while !bytes.len().is_multiple_of(2880) {
            bytes.push(fill);
        }
    };
    let put_cards = |bytes: &mut Vec<u8>, cards: &[String]| {
        for c in cards {
            bytes.extend_from_slice(format!("{c:<80}").as_bytes());
        }
        pad(bytes, b' ');
    };
    put_cards(&mut bytes, &cards);
    let names = ["RA", "DEC", "E1", "E2", "WEIGHT"];
    let mut ext = vec![
        card("XTENSION", "'BINTABLE'"),
        card("BITPIX", "8"),
        card("NAXIS", "2"),
        card("NAXIS1", &(8 * names.len()).to_string()),
        card("NAXIS2", &g.len().to_string()),
        card("PCOUNT", "0"),
        card("GCOUNT", "1"),
        card("TFIELDS", &names.len().to_string()),
    ];
    for (i, n) in names.iter().enumerate() {
        ext.push(card(&format!("TTYPE{}", i + 1), &format!("'{n:<8}'")));
        ext.push(card(&format!("TFORM{}", i + 1), "'D       '"));
    }
    ext.push("END".to_string());
    put_cards(&mut bytes, &ext);
    for i in 0..g.len() {
        for v in [g.ra[i], g.dec[i], g.e1[i], g.e2[i], g.weight[i]] {
            bytes.extend_from_slice(&v.to_be_bytes());
        }
    }
    pad(&mut bytes, 0);
    std::fs::write(path, bytes).unwrap();
}

fn write_csv(path: &std::path::Path, g: &GalaxyBlock) {
    let mut out = std::io::BufWriter::new(std::fs::File::create(path).unwrap());
    writeln!(out, "RA,DEC,E1,E2,WEIGHT").unwrap();
    for i in 0..g.len() {
        writeln!(
            out,
            "{},{},{},{},{}",
            g.ra[i], g.dec[i], g.e1[i], g.e2[i], g.weight[i]
        )
        .unwrap();
    }
}

fn split(g: &GalaxyBlock, block_rows: usize) -> Vec<GalaxyBlock> {
    let n = g.len();
    (0..n.div_ceil(block_rows))
        .map(|k| {
            let (s, e) = (k * block_rows, ((k + 1) * block_rows).min(n));
            GalaxyBlock {
                first_row: s as u64,
                ra: g.ra[s..e].to_vec(),
                dec: g.dec[s..e].to_vec(),
                e1: g.e1[s..e].to_vec(),
                e2: g.e2[s..e].to_vec(),
                weight: g.weight[s..e].to_vec(),
            }
        })
        .collect()
}

fn main() {
    let mut args = std::env::args().skip(1);
    let n: usize = args.next().map_or(10_000_000, |s| s.parse().unwrap());
    let nside: u32 = args.next().map_or(1024, |s| s.parse().unwrap());
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(1)
        .build()
        .unwrap();
    let galaxies = invented(n);
    let block_rows = 1 << 20;
    let blocks = split(&galaxies, block_rows);
    // the same galaxies in sky order (sorted by their NSIDE 32 NESTED pixel, as survey tiles
    // come), which keeps the sums of neighbouring rows in the same cache lines
    let coarse = Pixelization::new(32, Ordering::Nested).unwrap();
    let mut order: Vec<usize> = (0..n).collect();
    order.sort_by_key(|&i| {
        coarse.pixel_of(Direction::from_lonlat_deg(galaxies.ra[i], galaxies.dec[i]))
    });
    let mut sorted = GalaxyBlock::default();
    for &i in &order {
        sorted.push(
            galaxies.ra[i],
            galaxies.dec[i],
            galaxies.e1[i],
            galaxies.e2[i],
            galaxies.weight[i],
        );
    }
    let sorted_blocks = split(&sorted, block_rows);
    let pix = Pixelization::new(nside, Ordering::Ring).unwrap();
    let mut rows: Vec<(String, f64, f64)> = Vec::new();

    let t_pixels = best_of_three(|| {
        let mut sink = 0u64;
        for i in 0..n {
            if check_row(
                galaxies.ra[i],
                galaxies.dec[i],
                galaxies.e1[i],
                galaxies.e2[i],
                galaxies.weight[i],
            )
            .is_none()
            {
                sink ^= pix.pixel_of(Direction::from_lonlat_deg(galaxies.ra[i], galaxies.dec[i]));
            }
        }
        std::hint::black_box(sink);
    });
    rows.push(("row checks + pixel search only".into(), t_pixels, n as f64));

    let noise = NoiseRealisations {
        seed: 1,
        indices: vec![0],
    };
    let mut binner = CatalogueBinner::new(nside, None).unwrap();
    for (name, set, with_noise) in [
        ("binning, in memory, random order", &blocks, false),
        ("binning, in memory, sky order", &sorted_blocks, false),
        (
            "binning + 1 noise realisation, sky order",
            &sorted_blocks,
            true,
        ),
    ] {
        // fresh sums for each run, allocated outside the timing
        let mut fresh: Vec<CatalogueBinner> = (0..3)
            .map(|_| CatalogueBinner::new(nside, with_noise.then_some(&noise)).unwrap())
            .collect();
        let t = best_of_three(|| {
            let mut b = fresh.pop().unwrap();
            pool.install(|| {
                for blk in set.iter() {
                    b.add_block(blk);
                }
            });
            binner = b;
        });
        rows.push((name.into(), t, n as f64));
    }

    let t_maps = best_of_three(|| {
        std::hint::black_box(binner.maps(1, "bench").unwrap());
    });
    rows.push(("making the 7 maps from the sums".into(), t_maps, n as f64));

    // files: at most 2 million rows, so the CSV stays near 200 MB
    let file_rows = n.min(2_000_000);
    let mut g = galaxies.clone();
    g.ra.truncate(file_rows);
    g.dec.truncate(file_rows);
    g.e1.truncate(file_rows);
    g.e2.truncate(file_rows);
    g.weight.truncate(file_rows);
    let dir = tempfile::tempdir().unwrap();
    let (csv, fits) = (dir.path().join("g.csv"), dir.path().join("g.fits"));
    write_csv(&csv, &g);
    write_fits(&fits, &g);
    let columns = CatalogueColumns::default();
    for (name, path) in [("CSV", &csv), ("FITS", &fits)] {
        let t_read = best_of_three(|| {
            let mut s = CatalogueSource::open(path, &columns).unwrap();
            let mut b = GalaxyBlock::default();
            while s.read_block(&mut b, block_rows).unwrap() {
                std::hint::black_box(&b);
            }
        });
        rows.push((format!("{name} reading only"), t_read, file_rows as f64));
        let t_all = best_of_three(|| {
            let mut s = CatalogueSource::open(path, &columns).unwrap();
            let plan = BinningPlan::new(nside);
            let mut binner = CatalogueBinner::new(plan.nside, None).unwrap();
            let mut b = GalaxyBlock::default();
            while s.read_block(&mut b, plan.block_rows).unwrap() {
                pool.install(|| binner.add_block(&b));
            }
            std::hint::black_box(binner.report().used);
        });
        rows.push((
            format!("{name} reading + binning (random order)"),
            t_all,
            file_rows as f64,
        ));
    }

    println!(
        "catalogue binning, 1 thread, NSIDE {nside}, {n} galaxies in memory, {file_rows} in files (best of 3)"
    );
    println!("| step | seconds | galaxies | million galaxies / s |");
    println!("| --- | ---: | ---: | ---: |");
    for (name, t, count) in rows {
        println!("| {name} | {t:.3} | {count} | {:.1} |", count / t / 1e6);
    }
}
