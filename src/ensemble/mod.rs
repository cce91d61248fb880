//! Ensembles: one statistics vector per map, for a list of maps or a set of simulations,
//! measured in parallel, resumable, splittable into shards, and merged into one table.
//!
//! May use: only the crate's foundations ([`crate::error`], [`crate::files`]); what is measured
//! for each member is handed in by the caller, so no stage of the pipeline is needed here.
//!
//! On disk an ensemble is a directory:
//!
//! - `ensemble.json`: the members (sources in order), the column labels, the settings and the
//!   program version, with the job's identity (see [`EnsembleDescription::identity`]); written
//!   once, and checked on every later run so that a rerun can only continue the same job;
//! - `rows/row_NNNNNN.json`: one finished member each (its source, its input's SHA-256, its
//!   values and the stamp of the job that measured it), written to a temporary file and renamed,
//!   so a killed run leaves only whole rows behind. JSON keeps every f64 exactly (shortest
//!   round-trip form), so resumed and uninterrupted runs agree bit for bit;
//! - after merging: `statistics.npy` (members × columns, float64), `statistics.json` (labels,
//!   settings, program version, each member's source and checksum) and `statistics.csv`.
//!
//! Member i belongs to shard k of K when i mod K = k; on a SLURM cluster the shard is taken from
//! `SLURM_ARRAY_TASK_ID` and `SLURM_ARRAY_TASK_COUNT` when none is given.
//!
//! Nothing mixed, nothing stale:
//!
//! - **One job per directory.** `ensemble.json` is created without ever replacing a file (a
//!   temporary file hard-linked into place), so of two jobs started at once on one directory
//!   exactly one writes it; the other finds it, compares, and is refused with the first
//!   difference (a setting, the member list, the columns, the program version). Shards of the
//!   same job find the same description and run side by side (they write different rows). No
//!   lock is held, so a killed run leaves nothing that could block a later one.
//! - **Every row is stamped** with the job identity, the settings behind it, and digests of the
//!   member list and labels. Resume and merge refuse a row of another job (copied in, or left
//!   by an older program version) with the setting that differs, and a row file that cannot be
//!   read as a row with its file name; they never treat it as "not measured yet".
//! - **Stale inputs.** A row of a map file records the file's SHA-256. On resume a row whose
//!   file no longer has that checksum is measured again (and counted as re-measured); `merge`
//!   refuses such a row (the table would not describe the files on disk). A file that is gone is
//!   not checked: its row stands for the file as it was measured.

use crate::error::{Error, Result};
use crate::files::{write_atomically, write_bytes, write_json};
use ndarray::Array2;
use rayon::prelude::*;
use sha2::{Digest, Sha256};
use std::io::Read;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicUsize, Ordering as AtomicOrdering};

/// Where a member's map comes from.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum MemberSource {
    /// A HEALPix FITS file.
    File(PathBuf),
    /// Simulation number `index` of the ensemble's recipe (a single map, or a correlated pair
    /// when the recipe makes pairs).
    Simulation(u64),
    /// Two HEALPix FITS files measured together as a pair (map A, map B).
    FilePair(PathBuf, PathBuf),
}

impl MemberSource {
    /// The files this member reads (none for a simulation).
    pub fn files(&self) -> Vec<&Path> {
        match self {
            MemberSource::File(p) => vec![p.as_path()],
            MemberSource::FilePair(a, b) => vec![a.as_path(), b.as_path()],
            MemberSource::Simulation(_) => Vec::new(),
        }
    }
}

/// Pairs two member lists one to one (map A of pair i from `first`, map B from `second`), for
/// an ensemble of map pairs. Errors when the lists have different lengths or hold anything but
/// files.
pub fn pair_members(
    first: Vec<MemberSource>,
    second: Vec<MemberSource>,
) -> Result<Vec<MemberSource>> {
    if first.len() != second.len() {
        return Err(Error::Mismatch(format!(
            "the first map list has {} maps and the second {}: pairs need lists of equal length",
            first.len(),
            second.len()
        )));
    }
    first
        .into_iter()
        .zip(second)
        .map(|(a, b)| match (a, b) {
            (MemberSource::File(a), MemberSource::File(b)) => Ok(MemberSource::FilePair(a, b)),
            (a, b) => Err(Error::Setting(format!(
                "only map files can be paired, got {a} and {b}"
            ))),
        })
        .collect()
}

impl std::fmt::Display for MemberSource {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            MemberSource::File(p) => write!(f, "{}", p.display()),
            MemberSource::Simulation(i) => write!(f, "simulation {i}"),
            MemberSource::FilePair(a, b) => write!(f, "{} & {}", a.display(), b.display()),
        }
    }
}

/// One shard of K: members i with i mod count = index.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
pub struct Shard {
    pub index: usize,
    pub count: usize,
}

impl Shard {
    /// The whole ensemble.
    pub const ALL: Shard = Shard { index: 0, count: 1 };

    /// Parses `K/N` (0-based K), e.g. `3/10`.
    pub fn parse(text: &str) -> Result<Shard> {
        let bad = || {
            Error::Setting(format!(
                "--shard expects INDEX/COUNT with 0 ≤ INDEX < COUNT, e.g. 0/4; got '{text}'"
            ))
        };
        let (a, b) = text.split_once('/').ok_or_else(bad)?;
        let index: usize = a.trim().parse().map_err(|_| bad())?;
        let count: usize = b.trim().parse().map_err(|_| bad())?;
        if count == 0 || index >= count {
            return Err(bad());
        }
        Ok(Shard { index, count })
    }

    /// The shard from SLURM_ARRAY_TASK_ID / SLURM_ARRAY_TASK_COUNT, if both are set.
    /// (SLURM numbers array tasks from `--array` start; with `--array=0-(N-1)` they are 0-based.)
    pub fn from_slurm_env() -> Result<Option<Shard>> {
        let get = |k: &str| std::env::var(k).ok();
        Self::from_slurm_values(
            get("SLURM_ARRAY_TASK_ID").as_deref(),
            get("SLURM_ARRAY_TASK_COUNT").as_deref(),
            get("SLURM_ARRAY_TASK_MIN").as_deref(),
        )
    }

    /// The shard from the values of SLURM_ARRAY_TASK_ID, _COUNT and _MIN (see
    /// [`Shard::from_slurm_env`]); `None` without ID, an error for an ID without COUNT (every
    /// array task would measure the whole ensemble).
    pub fn from_slurm_values(
        id: Option<&str>,
        count: Option<&str>,
        min: Option<&str>,
    ) -> Result<Option<Shard>> {
        let (id, count) = match (id, count) {
            (Some(id), Some(count)) => (id, count),
            (Some(id), None) => {
                return Err(Error::Setting(format!(
                    "SLURM_ARRAY_TASK_ID={id} is set but SLURM_ARRAY_TASK_COUNT is not: the number of shards is unknown; give --shard INDEX/COUNT"
                )))
            }
            _ => return Ok(None),
        };
        let parse = |name: &str, v: &str| {
            v.trim().parse::<usize>().map_err(|_| {
                Error::Setting(format!(
                    "environment variable {name}='{v}' is not a whole number"
                ))
            })
        };
        let id = parse("SLURM_ARRAY_TASK_ID", id)?;
        let count = parse("SLURM_ARRAY_TASK_COUNT", count)?;
        let min = match min {
            Some(m) => parse("SLURM_ARRAY_TASK_MIN", m)?,
            None => 0,
        };
        let index = id.checked_sub(min).ok_or_else(|| {
            Error::Setting(format!(
                "SLURM_ARRAY_TASK_ID {id} is below SLURM_ARRAY_TASK_MIN {min}"
            ))
        })?;
        if count == 0 || index >= count {
            return Err(Error::Setting(format!(
                "SLURM array task {id} (min {min}) does not fit SLURM_ARRAY_TASK_COUNT {count}: use --array=0-{}",
                count.saturating_sub(1)
            )));
        }
        Ok(Some(Shard { index, count }))
    }

    /// Does member `i` belong to this shard?
    pub fn contains(&self, i: usize) -> bool {
        i % self.count == self.index
    }
}

/// What an ensemble directory holds: written once, checked on every rerun.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct EnsembleDescription {
    /// The program version that created it.
    pub program_version: String,
    /// Members, in table order.
    pub members: Vec<MemberSource>,
    /// Column labels of the statistics vector.
    pub labels: Vec<String>,
    /// The measurement (and simulation) settings, as given by the caller.
    pub settings: serde_json::Value,
}

/// Whether settings describe an ensemble of map pairs (a non-null `pair` entry).
fn settings_are_pair(settings: &serde_json::Value) -> bool {
    settings.get("pair").is_some_and(|p| !p.is_null())
}

/// "pairs of maps vs single maps" when one settings value is of a pair ensemble and the other
/// is not (read `a` first).
fn pair_difference(a: &serde_json::Value, b: &serde_json::Value) -> Option<String> {
    let kind = |v| {
        if settings_are_pair(v) {
            "pairs of maps"
        } else {
            "single maps"
        }
    };
    (settings_are_pair(a) != settings_are_pair(b)).then(|| format!("{} vs {}", kind(a), kind(b)))
}

/// SHA-256 of bytes, hex encoded.
fn sha256_hex(bytes: &[u8]) -> String {
    Sha256::digest(bytes)
        .iter()
        .map(|b| format!("{b:02x}"))
        .collect()
}

/// SHA-256 of a value's JSON text (serde_json writes struct fields in declaration order and
/// object keys in a fixed order, so equal values give equal digests).
fn json_digest<T: serde::Serialize>(value: &T) -> String {
    sha256_hex(serde_json::to_string(value).unwrap_or_default().as_bytes())
}

impl EnsembleDescription {
    /// The job identity: SHA-256 (hex) of the canonical JSON of the program version, the
    /// members, the labels and the settings.
    pub fn identity(&self) -> String {
        json_digest(self)
    }

    /// What every row of this job carries.
    pub fn stamp(&self) -> JobStamp {
        JobStamp {
            identity: self.identity(),
            program_version: self.program_version.clone(),
            members_sha256: json_digest(&self.members),
            labels_sha256: json_digest(&self.labels),
            settings: self.settings.clone(),
        }
    }

    /// Whether the members are pairs of maps (the settings carry a non-null `pair` entry):
    /// each row then holds map A's, map B's and the cross statistics.
    pub fn is_pair(&self) -> bool {
        settings_are_pair(&self.settings)
    }

    /// The first difference between two descriptions, in words ("setting 'sampling': 'Nearest'
    /// vs 'RingCubic'"), reading `self` as the existing one and `other` as the new one; `None`
    /// when they are the same job.
    pub fn difference(&self, other: &EnsembleDescription) -> Option<String> {
        if let Some(d) = pair_difference(&self.settings, &other.settings) {
            return Some(d);
        }
        if let Some(d) = settings_difference(&self.settings, &other.settings) {
            return Some(d);
        }
        if self.members != other.members {
            if self.members.len() != other.members.len() {
                return Some(format!(
                    "{} members vs {}",
                    self.members.len(),
                    other.members.len()
                ));
            }
            let i = (0..self.members.len())
                .find(|&i| self.members[i] != other.members[i])
                .unwrap_or(0);
            return Some(format!(
                "member {i} is {} vs {}",
                self.members[i], other.members[i]
            ));
        }
        if self.labels != other.labels {
            return Some(format!(
                "columns {} vs {}",
                short_list(&self.labels),
                short_list(&other.labels)
            ));
        }
        if self.program_version != other.program_version {
            return Some(format!(
                "program version {} vs {}",
                self.program_version, other.program_version
            ));
        }
        None
    }
}

fn short_list(labels: &[String]) -> String {
    let mut s = labels
        .iter()
        .take(3)
        .cloned()
        .collect::<Vec<_>>()
        .join(", ");
    if labels.len() > 3 {
        s.push_str(&format!(", … ({} in all)", labels.len()));
    }
    format!("[{s}]")
}

fn value_text(v: Option<&serde_json::Value>) -> String {
    match v {
        None | Some(serde_json::Value::Null) => "none".into(),
        Some(serde_json::Value::String(s)) => format!("'{s}'"),
        Some(v) => {
            let t = v.to_string();
            if t.chars().count() > 60 {
                format!("{}…", t.chars().take(60).collect::<String>())
            } else {
                t
            }
        }
    }
}

/// The first setting that differs between two settings values, named by its path
/// ("recipe.seed 7 vs 9"); `None` when they are equal.
pub fn settings_difference(a: &serde_json::Value, b: &serde_json::Value) -> Option<String> {
    fn walk(
        path: &str,
        a: Option<&serde_json::Value>,
        b: Option<&serde_json::Value>,
    ) -> Option<String> {
        use serde_json::Value;
        if a == b {
            return None;
        }
        if let (Some(Value::Object(x)), Some(Value::Object(y))) = (a, b) {
            let mut keys: Vec<&String> = x.keys().chain(y.keys()).collect();
            keys.sort();
            keys.dedup();
            for k in keys {
                let p = if path.is_empty() {
                    k.clone()
                } else {
                    format!("{path}.{k}")
                };
                if let Some(d) = walk(&p, x.get(k.as_str()), y.get(k.as_str())) {
                    return Some(d);
                }
            }
            return None;
        }
        let name = if path.is_empty() { "settings" } else { path };
        Some(format!("{name} {} vs {}", value_text(a), value_text(b)))
    }
    walk("", Some(a), Some(b))
}

/// The identity of the job that measured a row, with what is needed to say how two jobs differ.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct JobStamp {
    /// [`EnsembleDescription::identity`] of the job.
    pub identity: String,
    pub program_version: String,
    /// SHA-256 of the member list's JSON.
    pub members_sha256: String,
    /// SHA-256 of the column labels' JSON.
    pub labels_sha256: String,
    /// The job's settings.
    pub settings: serde_json::Value,
}

impl JobStamp {
    /// The first difference between the job of `self` (a row's) and `job` (this one's), in
    /// words, reading `self` first; `None` for the same job.
    pub fn difference(&self, job: &JobStamp) -> Option<String> {
        if self.identity == job.identity {
            return None;
        }
        if let Some(d) = pair_difference(&self.settings, &job.settings) {
            return Some(d);
        }
        if let Some(d) = settings_difference(&self.settings, &job.settings) {
            return Some(d);
        }
        if self.members_sha256 != job.members_sha256 {
            return Some("another member list".into());
        }
        if self.labels_sha256 != job.labels_sha256 {
            return Some("other columns".into());
        }
        if self.program_version != job.program_version {
            return Some(format!(
                "program version {} vs {}",
                self.program_version, job.program_version
            ));
        }
        Some(format!(
            "job identity {} vs {}",
            short_hash(Some(&self.identity)),
            short_hash(Some(&job.identity))
        ))
    }
}

/// One finished member.
#[derive(Debug, Clone, serde::Serialize, serde::Deserialize)]
pub struct Row {
    pub member: usize,
    pub source: MemberSource,
    /// SHA-256 of the input file (hex), `None` for simulations; of map A for a pair of files.
    pub checksum: Option<String>,
    /// SHA-256 of map B's file for a pair of files.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub second_checksum: Option<String>,
    pub values: Vec<f64>,
    /// The job that measured it (absent in rows of older program versions).
    #[serde(default)]
    pub job: Option<JobStamp>,
}

/// What a member's row file says.
enum RowState {
    /// No row file.
    Missing,
    /// A row of this job, its input unchanged (or gone).
    Done(Box<Row>),
    /// A row of this job whose map file has changed since: the reason.
    Stale(String),
}

/// A progress bar over `count` maps, hidden unless `progress`.
fn progress_bar(count: usize, progress: bool) -> indicatif::ProgressBar {
    if progress {
        let b = indicatif::ProgressBar::new(count as u64);
        if let Ok(style) = indicatif::ProgressStyle::with_template(
            "{prefix} [{bar:30}] {pos}/{len} maps  {elapsed_precise} elapsed, about {eta} left",
        ) {
            b.set_style(style.progress_chars("=> "));
        }
        b.set_prefix("measuring");
        b
    } else {
        indicatif::ProgressBar::hidden()
    }
}

/// What one run did.
#[derive(Debug, Clone, serde::Serialize)]
pub struct RunReport {
    pub shard: Shard,
    pub members_in_shard: usize,
    pub already_done: usize,
    pub measured: usize,
    /// Members measured again because their map file changed after their row was written.
    pub remeasured_stale: usize,
    pub failed: Vec<String>,
}

/// The merged table.
#[derive(Debug, Clone)]
pub struct MergedTable {
    pub description: EnsembleDescription,
    pub rows: Vec<Row>,
}

impl MergedTable {
    /// The angular scale (arcmin) each column probes, as recorded in the settings under
    /// `label_scales_arcmin` (None for a column without one, or all None when not recorded).
    pub fn label_scales(&self) -> Vec<Option<f64>> {
        self.description.settings["label_scales_arcmin"]
            .as_array()
            .map(|a| a.iter().map(|v| v.as_f64()).collect())
            .unwrap_or_default()
    }

    /// The members × columns matrix.
    pub fn matrix(&self) -> Array2<f64> {
        let p = self.description.labels.len();
        let mut a = Array2::zeros((self.rows.len(), p));
        for (i, r) in self.rows.iter().enumerate() {
            for (j, v) in r.values.iter().enumerate() {
                a[[i, j]] = *v;
            }
        }
        a
    }
}

/// SHA-256 of a file, hex encoded.
pub fn file_checksum(path: &Path) -> Result<String> {
    crate::files::require_regular_input(path)?;
    let mut f = std::fs::File::open(path).map_err(|e| Error::io(path, e))?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let n = f.read(&mut buf).map_err(|e| Error::io(path, e))?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(h.finalize().iter().map(|b| format!("{b:02x}")).collect())
}

/// The description file: the description and its identity.
#[derive(serde::Serialize, serde::Deserialize)]
struct DescriptionFile {
    #[serde(flatten)]
    description: EnsembleDescription,
    identity: Option<String>,
}

/// Members from a list file (one path per line, relative to the list's directory; `#` comments).
pub fn members_from_list(list: &Path) -> Result<Vec<MemberSource>> {
    let text = crate::files::read_text(list)?;
    let base = list.parent().unwrap_or(Path::new(""));
    let mut out = Vec::new();
    // each file once: a map listed twice (under any name) would enter the covariance twice
    let mut seen: Vec<(_, usize, PathBuf)> = Vec::new();
    for (k, line) in text.lines().enumerate() {
        let line = line.split('#').next().unwrap_or("").trim();
        if line.is_empty() {
            continue;
        }
        let p = Path::new(line);
        let path = if p.is_absolute() {
            p.to_path_buf()
        } else {
            base.join(p)
        };
        if let Some(id) = crate::files::file_identity(&path) {
            if let Some((_, first, first_path)) = seen.iter().find(|(i, _, _)| *i == id) {
                return Err(Error::io(
                    list,
                    format!(
                        "lines {first} and {} name the same file ({} and {}): each map may be listed once",
                        k + 1,
                        first_path.display(),
                        path.display()
                    ),
                ));
            }
            seen.push((id, k + 1, path.clone()));
        }
        out.push(MemberSource::File(path));
    }
    if out.is_empty() {
        return Err(Error::io(list, "the map list names no files"));
    }
    Ok(out)
}

/// Members from a glob pattern, sorted by path.
pub fn members_from_glob(pattern: &str) -> Result<Vec<MemberSource>> {
    let paths = glob::glob(pattern)
        .map_err(|e| Error::Setting(format!("bad file pattern '{pattern}': {e}")))?;
    // directories are skipped; a FIFO, device or socket is refused (reading it would block)
    let mut files: Vec<PathBuf> = paths
        .filter_map(|p| p.ok())
        .filter(|p| !p.is_dir())
        .map(|p| crate::files::require_regular_input(&p).map(|()| p))
        .collect::<Result<_>>()?;
    files.sort();
    if files.is_empty() {
        return Err(Error::Setting(format!("no files match '{pattern}'")));
    }
    Ok(files.into_iter().map(MemberSource::File).collect())
}

/// An ensemble directory.
#[derive(Debug, Clone)]
pub struct EnsembleJob {
    dir: PathBuf,
    description: EnsembleDescription,
}

fn row_path(dir: &Path, i: usize) -> PathBuf {
    dir.join("rows").join(format!("row_{i:06}.json"))
}

impl EnsembleJob {
    /// Creates the directory for a new ensemble, or opens an existing one after checking that it
    /// describes exactly the same job.
    pub fn create_or_open(dir: &Path, description: EnsembleDescription) -> Result<EnsembleJob> {
        if description.members.is_empty() {
            return Err(Error::Setting("the ensemble has no members".into()));
        }
        std::fs::create_dir_all(dir.join("rows")).map_err(|e| Error::io(dir, e))?;
        let path = dir.join("ensemble.json");
        let file = DescriptionFile {
            identity: Some(description.identity()),
            description,
        };
        let text = serde_json::to_string_pretty(&file)
            .map_err(|e| Error::io(&path, format!("cannot encode JSON: {e}")))?;
        // created once, never replaced: of two jobs racing for the directory exactly one wins
        if !path.exists() && crate::files::write_new(&path, text.as_bytes())? {
            return Ok(EnsembleJob {
                dir: dir.to_path_buf(),
                description: file.description,
            });
        }
        let old = Self::read_description(dir)?;
        if let Some(d) = old.difference(&file.description) {
            return Err(Error::Mismatch(format!(
                "{} already holds another ensemble job ({d}, there vs here); choose another output directory",
                dir.display()
            )));
        }
        Ok(EnsembleJob {
            dir: dir.to_path_buf(),
            description: file.description,
        })
    }

    /// Reads `ensemble.json` and checks that its recorded identity matches its contents.
    fn read_description(dir: &Path) -> Result<EnsembleDescription> {
        let path = dir.join("ensemble.json");
        let text = crate::files::read_text(&path)?;
        let file: DescriptionFile = serde_json::from_str(&text)
            .map_err(|e| Error::io(&path, format!("not an ensemble description: {e}")))?;
        match &file.identity {
            None => Err(Error::io(
                &path,
                "carries no job identity (written by an older planisphere); measure the ensemble again into a new directory",
            )),
            Some(id) if *id != file.description.identity() => Err(Error::io(
                &path,
                "its recorded job identity does not match its contents (edited by hand?)",
            )),
            Some(_) => Ok(file.description),
        }
    }

    /// The description.
    pub fn description(&self) -> &EnsembleDescription {
        &self.description
    }

    /// The state of member `i`'s row (see [`row_state`]).
    fn row_state(&self, stamp: &JobStamp, i: usize) -> Result<RowState> {
        row_state(&self.dir, &self.description, stamp, i)
    }

    /// Measures the members of `shard` that are not finished yet, in parallel, with `measure`
    /// giving each member's values. Failures of single members are collected, not fatal; the
    /// call returns an error at the end when any failed.
    pub fn run<F>(&self, shard: Shard, measure: F, progress: bool) -> Result<RunReport>
    where
        F: Fn(usize, &MemberSource) -> Result<Vec<f64>> + Sync,
    {
        let in_shard: Vec<usize> = (0..self.description.members.len())
            .filter(|&i| shard.contains(i))
            .collect();
        let stamp = self.description.stamp();
        // every row of the shard checked before any work: a row of another job or an unreadable
        // row file stops the run; a row whose map file changed is measured again
        // (the first failing row in member order is reported, whatever the thread timing)
        let states: Vec<RowState> = in_shard
            .par_iter()
            .map(|&i| self.row_state(&stamp, i))
            .collect::<Vec<Result<_>>>()
            .into_iter()
            .collect::<Result<_>>()?;
        let mut todo = Vec::new();
        let mut stale = 0;
        for (&i, state) in in_shard.iter().zip(&states) {
            match state {
                RowState::Done(_) => {}
                RowState::Missing => todo.push(i),
                RowState::Stale(_) => {
                    stale += 1;
                    todo.push(i)
                }
            }
        }
        let bar = progress_bar(todo.len(), progress);
        // One member at a time on each of `workers` threads outside rayon's pool, so that at
        // most `workers` maps are held at once: a rayon worker waiting for the tiles of its
        // member may start another member meanwhile (work stealing) and hold a second map.
        // Each member's tiles still run on rayon's pool; results are kept by member position.
        let workers = rayon::current_num_threads().clamp(1, todo.len().max(1));
        let next = AtomicUsize::new(0);
        let mut failures: Vec<Option<String>> = vec![None; todo.len()];
        std::thread::scope(|scope| {
            let handles: Vec<_> = (0..workers)
                .map(|_| {
                    scope.spawn(|| {
                        let mut out = Vec::new();
                        loop {
                            let k = next.fetch_add(1, AtomicOrdering::Relaxed);
                            let Some(&i) = todo.get(k) else {
                                break;
                            };
                            let result = self.measure_row(i, &stamp, &measure);
                            bar.inc(1);
                            out.push((k, result.err().map(|e| e.to_string())));
                        }
                        out
                    })
                })
                .collect();
            for handle in handles {
                let done = handle
                    .join()
                    .unwrap_or_else(|panic| std::panic::resume_unwind(panic));
                for (k, failure) in done {
                    failures[k] = failure;
                }
            }
        });
        bar.finish_and_clear();
        let failed: Vec<String> = failures.into_iter().flatten().collect();
        let report = RunReport {
            shard,
            members_in_shard: in_shard.len(),
            already_done: in_shard.len() - todo.len(),
            measured: todo.len() - failed.len(),
            remeasured_stale: stale,
            failed,
        };
        if let Some(first) = report.failed.first() {
            return Err(Error::Data(format!(
                "{} of {} maps failed; the first: {first}",
                report.failed.len(),
                todo.len()
            )));
        }
        Ok(report)
    }

    /// Measures member `i` with `measure`, checks its values (one per column, finite) and
    /// writes its row, stamped with the job and the checksums of its map files.
    fn measure_row<F>(&self, i: usize, stamp: &JobStamp, measure: &F) -> Result<()>
    where
        F: Fn(usize, &MemberSource) -> Result<Vec<f64>> + Sync,
    {
        let source = &self.description.members[i];
        let p = self.description.labels.len();
        let sums = source
            .files()
            .into_iter()
            .map(file_checksum)
            .collect::<Result<Vec<_>>>()?;
        let checksum = sums.first().cloned();
        let second_checksum = sums.get(1).cloned();
        let values = measure(i, source)?;
        if values.len() != p {
            return Err(Error::Mismatch(format!(
                "{source}: measured {} values where the ensemble has {p} columns",
                values.len()
            )));
        }
        crate::error::check_finite(&values, |k| {
            format!(
                "{source}: statistic '{}' is not finite",
                self.description.labels[k]
            )
        })?;
        let row = Row {
            member: i,
            source: source.clone(),
            checksum,
            second_checksum,
            values,
            job: Some(stamp.clone()),
        };
        write_json(&row_path(&self.dir, i), &row)
    }

    /// Reads all rows of an ensemble directory in member order; an error names the missing ones,
    /// a row of another job (with what differs), an unreadable row file, or a row whose map file
    /// changed after it was measured.
    pub fn merge(dir: &Path) -> Result<MergedTable> {
        let description = Self::read_description(dir)?;
        let stamp = description.stamp();
        // (the first failing row in member order is reported, whatever the thread timing)
        let states: Vec<RowState> = (0..description.members.len())
            .into_par_iter()
            .map(|i| row_state(dir, &description, &stamp, i))
            .collect::<Vec<Result<_>>>()
            .into_iter()
            .collect::<Result<_>>()?;
        let mut rows = Vec::with_capacity(description.members.len());
        let mut missing = Vec::new();
        for (i, state) in states.into_iter().enumerate() {
            match state {
                RowState::Done(r) => rows.push(*r),
                RowState::Missing => missing.push(i),
                RowState::Stale(why) => {
                    return Err(Error::Mismatch(format!(
                        "{}: {why}; run the ensemble again to re-measure it",
                        dir.display()
                    )))
                }
            }
        }
        if let Some(&first) = missing.first() {
            return Err(Error::Data(format!(
                "{}: {} of {} maps are not measured yet (first: member {first}, {}); run the remaining shards first",
                dir.display(),
                missing.len(),
                description.members.len(),
                description.members[first]
            )));
        }
        Ok(MergedTable { description, rows })
    }

    /// Merges and writes statistics.npy, statistics.json and statistics.csv into the directory.
    pub fn write_merged(dir: &Path) -> Result<MergedTable> {
        let table = Self::merge(dir)?;
        write_table(dir, "statistics", &table)?;
        Ok(table)
    }
}

/// Member `i`'s row, checked against the job: missing; done; stale (a map file whose SHA-256
/// is no longer the recorded one); or an error for a file that is not a row, a row of another
/// member, of another job, or of the wrong length — each naming the row file.
fn row_state(
    dir: &Path,
    description: &EnsembleDescription,
    stamp: &JobStamp,
    i: usize,
) -> Result<RowState> {
    let path = row_path(dir, i);
    match std::fs::symlink_metadata(&path) {
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(RowState::Missing),
        _ => {}
    }
    let unreadable = |why: String| {
        Error::io(
            &path,
            format!("not a readable row file ({why}); delete it to measure member {i} again"),
        )
    };
    let text = crate::files::read_text(&path).map_err(|e| match e {
        Error::Io { reason, .. } => unreadable(reason),
        other => unreadable(other.to_string()),
    })?;
    let row: Row = serde_json::from_str(&text).map_err(|e| unreadable(e.to_string()))?;
    let source = &description.members[i];
    if row.member != i || row.source != *source {
        return Err(Error::io(
            &path,
            format!(
                "holds member {} ({}), not member {i} ({source})",
                row.member, row.source
            ),
        ));
    }
    let Some(job) = &row.job else {
        return Err(Error::io(
            &path,
            format!("row {i} carries no job identity (written by an older planisphere); delete it to measure it again"),
        ));
    };
    if let Some(d) = job.difference(stamp) {
        return Err(Error::Mismatch(format!(
            "{}: row {i} belongs to another job ({d}, row vs this job)",
            path.display()
        )));
    }
    if row.values.len() != description.labels.len() {
        return Err(Error::io(
            &path,
            format!(
                "row {i} has {} values where the ensemble has {} columns",
                row.values.len(),
                description.labels.len()
            ),
        ));
    }
    let recorded = [row.checksum.as_deref(), row.second_checksum.as_deref()];
    for (file, then) in source.files().into_iter().zip(recorded) {
        if file.exists() {
            let now = file_checksum(file)?;
            if then != Some(now.as_str()) {
                return Ok(RowState::Stale(format!(
                    "{} changed after row {i} was measured (SHA-256 {} then, {} now)",
                    file.display(),
                    short_hash(then),
                    short_hash(Some(&now))
                )));
            }
        }
    }
    Ok(RowState::Done(Box::new(row)))
}

fn short_hash(h: Option<&str>) -> String {
    match h {
        Some(h) => format!("{}…", h.chars().take(12).collect::<String>()),
        None => "none".into(),
    }
}

/// Writes `<stem>.npy`, `<stem>.json` and `<stem>.csv` of a table into `dir`.
pub fn write_table(dir: &Path, stem: &str, table: &MergedTable) -> Result<()> {
    let npy = dir.join(format!("{stem}.npy"));
    let matrix = table.matrix();
    write_atomically(&npy, |tmp| {
        ndarray_npy::write_npy(tmp, &matrix).map_err(|e| Error::io(&npy, e))
    })?;
    let members: Vec<serde_json::Value> = table
        .rows
        .iter()
        .map(|r| match &r.second_checksum {
            None => serde_json::json!({"source": r.source, "sha256": r.checksum}),
            Some(b) => {
                serde_json::json!({"source": r.source, "sha256": r.checksum, "second_sha256": b})
            }
        })
        .collect();
    let sidecar = serde_json::json!({
        "array": format!("{stem}.npy"),
        "shape": [table.rows.len(), table.description.labels.len()],
        "rows": if table.description.is_pair() {
            "one per pair of maps, in member order"
        } else {
            "one per map, in member order"
        },
        "columns": table.description.labels,
        "settings": table.description.settings,
        "program": "planisphere",
        "program_version": env!("CARGO_PKG_VERSION"),
        "members": members,
    });
    write_json(&dir.join(format!("{stem}.json")), &sidecar)?;
    let mut csv = String::from("member,source");
    for l in &table.description.labels {
        csv.push(',');
        csv.push_str(l);
    }
    csv.push('\n');
    for r in &table.rows {
        csv.push_str(&format!("{},\"{}\"", r.member, r.source));
        for v in &r.values {
            csv.push_str(&format!(",{v:e}"));
        }
        csv.push('\n');
    }
    write_bytes(&dir.join(format!("{stem}.csv")), csv.as_bytes())
}
