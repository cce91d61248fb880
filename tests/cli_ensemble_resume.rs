//! An ensemble run killed mid-way and rerun ends with exactly the table of an uninterrupted run,
//! and 1 and 2 threads give identical bits.

use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

fn ensemble_args(dir: &Path, recipe: &Path) -> Vec<String> {
    [
        "ensemble",
        "-o",
        &dir.display().to_string(),
        "--simulate",
        &recipe.display().to_string(),
        "-J",
        "3",
        "--tile-pixels",
        "32",
        "--border-pixels",
        "4",
        "--quiet",
    ]
    .iter()
    .map(|s| s.to_string())
    .collect()
}

fn run_to_end(dir: &Path, recipe: &Path, threads: &str) {
    let out = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .args(ensemble_args(dir, recipe))
        .env("RAYON_NUM_THREADS", threads)
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

fn rows(dir: &Path) -> usize {
    std::fs::read_dir(dir.join("rows"))
        .map(|d| {
            d.filter_map(|e| e.ok())
                .filter(|e| e.path().extension().is_some_and(|x| x == "json"))
                .count()
        })
        .unwrap_or(0)
}

#[test]
fn killed_ensemble_resumes_to_the_same_bits_and_thread_count_does_not_matter() {
    let tmp = tempfile::tempdir().unwrap();
    let recipe = tmp.path().join("recipe.toml");
    let count = 10;
    std::fs::write(
        &recipe,
        format!("nside = 64\ncount = {count}\nseed = 5\nlognormal_shift = 0.02\n"),
    )
    .unwrap();
    let whole = tmp.path().join("whole");
    run_to_end(&whole, &recipe, "2");
    // interrupted run: kill it once a few maps are done
    let killed = tmp.path().join("killed");
    let mut child = Command::new(env!("CARGO_BIN_EXE_planisphere"))
        .args(ensemble_args(&killed, &recipe))
        .env("RAYON_NUM_THREADS", "2")
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let start = Instant::now();
    while rows(&killed) < 2 && start.elapsed() < Duration::from_secs(120) {
        std::thread::sleep(Duration::from_millis(10));
    }
    child.kill().unwrap();
    let _ = child.wait();
    let done = rows(&killed);
    assert!(
        done >= 2 && done < count,
        "the kill came at {done} of {count} maps"
    );
    assert!(!killed.join("statistics.npy").exists());
    run_to_end(&killed, &recipe, "2");
    let a = std::fs::read(whole.join("statistics.npy")).unwrap();
    let b = std::fs::read(killed.join("statistics.npy")).unwrap();
    assert_eq!(a, b, "resumed table differs from the uninterrupted one");
    // one thread
    let single = tmp.path().join("single");
    run_to_end(&single, &recipe, "1");
    let c = std::fs::read(single.join("statistics.npy")).unwrap();
    assert_eq!(a, c, "1 and 2 threads differ");
}
