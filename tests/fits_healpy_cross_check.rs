//! healpy 1.20.1 reads the files planisphere writes with the values planisphere wrote.
//!
//! `write_files_for_healpy` (run by hand: `cargo test --release --test fits_healpy_cross_check
//! -- --ignored`) re-creates reference-values/fits/written_by_planisphere/ from the healpy
//! fixtures; then `python3 reference-values/fits_reference.py` reads each file with healpy
//! 1.20.1's read_map and records the comparison in reference-values/fits/healpy_reads_planisphere.json.
//! The default test checks that today's writer still produces exactly the committed files and
//! that healpy's recorded verdict is "identical" for every one of them.

use planisphere::io::fits_io::{
    read_footprint, read_map, write_footprint, write_maps, ColumnChoice, PixelIndexWidth,
    ValuePrecision, WriteLayout, WriteOptions,
};
use serde_json::{json, Value};
use std::path::{Path, PathBuf};

fn fixture_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("reference-values/fits")
}

struct Case {
    file: &'static str,
    source: &'static str,
    /// (name written, 0-based source column)
    columns: &'static [(&'static str, usize)],
    options: WriteOptions,
    footprint: bool,
}

fn cases() -> Vec<Case> {
    let f32_full = WriteOptions {
        precision: ValuePrecision::Float32,
        ..WriteOptions::default()
    };
    vec![
        Case {
            file: "full_ring_nside8_float64.fits",
            source: "ring_nside8_float64.fits",
            columns: &[("TEMPERATURE", 0)],
            options: WriteOptions::default(),
            footprint: false,
        },
        Case {
            file: "full_nested_nside16_float32.fits",
            source: "nested_nside16_float32.fits",
            columns: &[("KAPPA", 0)],
            options: f32_full.clone(),
            footprint: false,
        },
        Case {
            file: "full_bad_pixels_nside8_float32.fits",
            source: "bad_pixels_nside8_float32.fits",
            columns: &[("VALUE", 0)],
            options: f32_full.clone(),
            footprint: false,
        },
        Case {
            file: "partial_int32_ring_nside16.fits",
            source: "partial_nside16_ring.fits",
            columns: &[("SIGNAL", 0)],
            options: WriteOptions {
                layout: WriteLayout::Partial(PixelIndexWidth::Int32),
                ..WriteOptions::default()
            },
            footprint: false,
        },
        Case {
            file: "partial_int64_nested_nside8_float32.fits",
            source: "bad_pixels_nside8_float32.fits",
            columns: &[("VALUE", 0)],
            options: WriteOptions {
                precision: ValuePrecision::Float32,
                layout: WriteLayout::Partial(PixelIndexWidth::Int64),
                coordsys: Some("E".to_string()),
            },
            footprint: false,
        },
        Case {
            file: "iqu_nside8_float64.fits",
            source: "iqu_nside8_float32.fits",
            columns: &[("I", 0), ("Q", 1), ("U", 2)],
            options: WriteOptions::default(),
            footprint: false,
        },
        Case {
            file: "mask_nside16_float32.fits",
            source: "mask_nside16_uint8.fits",
            columns: &[("MASK", 0)],
            options: f32_full,
            footprint: true,
        },
    ]
}

/// Writes every case into `dir` and returns the manifest the Python script reads.
fn write_cases(dir: &Path) -> Value {
    let mut entries = Vec::new();
    for case in cases() {
        let source = fixture_dir().join(case.source);
        let out = dir.join(case.file);
        let ordering;
        if case.footprint {
            let (fp, _) = read_footprint(&source, &ColumnChoice::Position(0)).unwrap();
            ordering = fp.pixelization().ordering();
            write_footprint(&out, case.columns[0].0, &fp, &case.options).unwrap();
        } else {
            let maps: Vec<_> = case
                .columns
                .iter()
                .map(|&(_, k)| read_map(&source, &ColumnChoice::Position(k)).unwrap().0)
                .collect();
            ordering = maps[0].ordering();
            let named: Vec<(&str, &planisphere::SkyMap)> = case
                .columns
                .iter()
                .zip(&maps)
                .map(|(&(n, _), m)| (n, m))
                .collect();
            write_maps(&out, &named, &case.options).unwrap();
        }
        entries.push(json!({
            "file": case.file,
            "source": case.source,
            "columns": case.columns.iter().map(|c| c.0).collect::<Vec<_>>(),
            "source_columns": case.columns.iter().map(|c| c.1).collect::<Vec<_>>(),
            "ordering": ordering.fits_name(),
            "float32": case.options.precision == ValuePrecision::Float32,
        }));
    }
    json!({ "writer": "planisphere fits_io", "files": entries })
}

#[test]
#[ignore = "regenerates the committed files for healpy; run by hand, then run fits_reference.py"]
fn write_files_for_healpy() {
    let dir = fixture_dir().join("written_by_planisphere");
    std::fs::create_dir_all(&dir).unwrap();
    let manifest = write_cases(&dir);
    std::fs::write(
        dir.join("manifest.json"),
        serde_json::to_string_pretty(&manifest).unwrap(),
    )
    .unwrap();
}

#[test]
fn healpy_reads_planisphere_files_identically() {
    let tmp = tempfile::tempdir().unwrap();
    let manifest = write_cases(tmp.path());
    let committed = fixture_dir().join("written_by_planisphere");
    let committed_manifest: Value =
        serde_json::from_str(&std::fs::read_to_string(committed.join("manifest.json")).unwrap())
            .unwrap();
    assert_eq!(manifest, committed_manifest, "manifest changed: regenerate");
    for case in cases() {
        let now = std::fs::read(tmp.path().join(case.file)).unwrap();
        let then = std::fs::read(committed.join(case.file)).unwrap();
        assert!(
            now == then,
            "{} differs from the committed file healpy checked: regenerate and re-run fits_reference.py",
            case.file
        );
    }
    // Verdict recorded by reference-values/fits_reference.py with healpy 1.20.1 read_map.
    let verdict: Value = serde_json::from_str(
        &std::fs::read_to_string(fixture_dir().join("healpy_reads_planisphere.json")).unwrap(),
    )
    .unwrap();
    assert_eq!(verdict["reader"], "healpy 1.20.1 read_map");
    let files = verdict["files"].as_array().unwrap();
    assert_eq!(files.len(), cases().len());
    for (case, rec) in cases().iter().zip(files) {
        assert_eq!(rec["file"], case.file);
        assert_eq!(
            rec["identical"], true,
            "healpy 1.20.1 disagrees on {}",
            case.file
        );
        assert_eq!(rec["max_abs_difference"], 0.0, "{}", case.file);
        assert_eq!(rec["header"]["PIXTYPE"], "HEALPIX");
    }
    assert_eq!(verdict["all_identical"], true);
}
