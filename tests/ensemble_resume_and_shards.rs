//! Ensembles: resumed, sharded and uninterrupted runs give the same table bit for bit; the
//! directory refuses a different job; merging reports missing members; .npy output reads back.

use planisphere::ensemble::{EnsembleDescription, EnsembleJob, MemberSource, Shard};
use planisphere::Result;
use std::path::Path;
use std::sync::atomic::{AtomicBool, Ordering};

fn description(n: u64) -> EnsembleDescription {
    EnsembleDescription {
        program_version: "test".into(),
        members: (0..n).map(MemberSource::Simulation).collect(),
        labels: vec!["a".into(), "b".into(), "c".into()],
        settings: serde_json::json!({"kind": "test"}),
    }
}

/// A deterministic stand-in for a measurement: irrational-looking values from the index.
fn measure(i: usize, _: &MemberSource) -> Result<Vec<f64>> {
    let x = (i as f64 + 0.5).sqrt();
    Ok(vec![x.sin(), x.ln(), 1.0 / (1.0 + x * x * x)])
}

fn bits(dir: &Path) -> Vec<u64> {
    let t = EnsembleJob::merge(dir).unwrap();
    t.rows
        .iter()
        .flat_map(|r| r.values.iter().map(|v| v.to_bits()))
        .collect()
}

#[test]
fn interrupted_then_resumed_run_equals_uninterrupted_run_bit_for_bit() {
    let tmp = tempfile::tempdir().unwrap();
    let (a, b) = (tmp.path().join("whole"), tmp.path().join("resumed"));
    EnsembleJob::create_or_open(&a, description(40))
        .unwrap()
        .run(Shard::ALL, measure, false)
        .unwrap();
    // first attempt dies after a dozen members: the rest fail
    let ens = EnsembleJob::create_or_open(&b, description(40)).unwrap();
    let stop = AtomicBool::new(false);
    let count = std::sync::atomic::AtomicUsize::new(0);
    let r = ens.run(
        Shard::ALL,
        |i, s| {
            if count.fetch_add(1, Ordering::SeqCst) >= 12 || stop.load(Ordering::SeqCst) {
                stop.store(true, Ordering::SeqCst);
                return Err(planisphere::Error::Data("interrupted".into()));
            }
            measure(i, s)
        },
        false,
    );
    assert!(r.unwrap_err().to_string().contains("maps failed"));
    let e = EnsembleJob::merge(&b).unwrap_err().to_string();
    assert!(e.contains("are not measured yet"), "{e}");
    // rerun: only the missing ones are measured
    let ens = EnsembleJob::create_or_open(&b, description(40)).unwrap();
    let report = ens.run(Shard::ALL, measure, false).unwrap();
    assert_eq!(report.already_done, 12);
    assert_eq!(report.measured, 28);
    assert_eq!(bits(&a), bits(&b));
}

#[test]
fn shards_merge_to_the_unsharded_table() {
    let tmp = tempfile::tempdir().unwrap();
    let (a, b) = (tmp.path().join("whole"), tmp.path().join("sharded"));
    EnsembleJob::create_or_open(&a, description(23))
        .unwrap()
        .run(Shard::ALL, measure, false)
        .unwrap();
    for k in 0..4 {
        let ens = EnsembleJob::create_or_open(&b, description(23)).unwrap();
        let r = ens
            .run(Shard { index: k, count: 4 }, measure, false)
            .unwrap();
        assert_eq!(r.members_in_shard, (23 - k).div_ceil(4));
    }
    assert_eq!(bits(&a), bits(&b));
}

#[test]
fn merged_npy_reads_back_with_labels_in_the_sidecar() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path().join("e");
    EnsembleJob::create_or_open(&d, description(5))
        .unwrap()
        .run(Shard::ALL, measure, false)
        .unwrap();
    EnsembleJob::write_merged(&d).unwrap();
    let m: ndarray::Array2<f64> = ndarray_npy::read_npy(d.join("statistics.npy")).unwrap();
    assert_eq!(m.shape(), &[5, 3]);
    assert_eq!(
        m[[3, 1]].to_bits(),
        measure(3, &MemberSource::Simulation(3)).unwrap()[1].to_bits()
    );
    let side: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(d.join("statistics.json")).unwrap()).unwrap();
    assert_eq!(side["columns"], serde_json::json!(["a", "b", "c"]));
    assert_eq!(side["shape"], serde_json::json!([5, 3]));
    let csv = std::fs::read_to_string(d.join("statistics.csv")).unwrap();
    assert!(csv.starts_with("member,source,a,b,c\n"));
    assert_eq!(csv.lines().count(), 6);
}

#[test]
fn a_directory_refuses_a_different_job() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path().join("e");
    EnsembleJob::create_or_open(&d, description(5)).unwrap();
    let e = EnsembleJob::create_or_open(&d, description(6))
        .unwrap_err()
        .to_string();
    assert!(
        e.ends_with(
            "already holds another ensemble job (5 members vs 6, there vs here); choose another output directory"
        ),
        "{e}"
    );
}

#[test]
fn a_refused_job_is_told_the_first_difference_and_changes_nothing() {
    let tmp = tempfile::tempdir().unwrap();
    let d = tmp.path().join("e");
    EnsembleJob::create_or_open(&d, description(5)).unwrap();
    let before = std::fs::read(d.join("ensemble.json")).unwrap();
    let mut member = description(5);
    member.members[3] = MemberSource::File("x.fits".into());
    let mut setting = description(5);
    setting.settings = serde_json::json!({"kind": "other"});
    let mut version = description(5);
    version.program_version = "next".into();
    for (other, words) in [
        (
            member,
            "(member 3 is simulation 3 vs x.fits, there vs here)",
        ),
        (setting, "(kind 'test' vs 'other', there vs here)"),
        (version, "(program version test vs next, there vs here)"),
    ] {
        let e = EnsembleJob::create_or_open(&d, other)
            .unwrap_err()
            .to_string();
        assert!(e.contains(words), "{e}");
        assert_eq!(std::fs::read(d.join("ensemble.json")).unwrap(), before);
    }
    // the same job opens it again
    EnsembleJob::create_or_open(&d, description(5)).unwrap();
}

#[test]
fn shard_text_and_slurm_variables_are_parsed_and_checked() {
    assert_eq!(Shard::parse("2/5").unwrap(), Shard { index: 2, count: 5 });
    for bad in ["5/5", "x/2", "3", "1/0"] {
        let e = Shard::parse(bad).unwrap_err().to_string();
        assert!(e.starts_with("--shard expects INDEX/COUNT"), "{e}");
    }
    assert_eq!(
        Shard::from_slurm_values(Some("3"), Some("8"), None).unwrap(),
        Some(Shard { index: 3, count: 8 })
    );
    assert_eq!(
        Shard::from_slurm_values(Some("4"), Some("8"), Some("1")).unwrap(),
        Some(Shard { index: 3, count: 8 })
    );
    assert_eq!(
        Shard::from_slurm_values(None, Some("8"), None).unwrap(),
        None
    );
    let e = Shard::from_slurm_values(Some("3"), None, None)
        .unwrap_err()
        .to_string();
    assert!(e.contains("SLURM_ARRAY_TASK_COUNT is not"), "{e}");
    let e = Shard::from_slurm_values(Some("8"), Some("8"), None)
        .unwrap_err()
        .to_string();
    assert!(e.contains("does not fit SLURM_ARRAY_TASK_COUNT 8"), "{e}");
    let e = Shard::from_slurm_values(Some("a"), Some("8"), None)
        .unwrap_err()
        .to_string();
    assert_eq!(
        e,
        "environment variable SLURM_ARRAY_TASK_ID='a' is not a whole number"
    );
}
