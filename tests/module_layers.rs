//! The layout rule of the crate (our rule, stated in the crate doc of src/lib.rs): the top-level
//! modules form one ordered list, and a module may use only the modules before it. This holds by
//! reading every `crate::…` path in the code (comments excluded) of each file under src/, so a
//! new import that points up the pipeline, or closes a circle between folders, fails here. Inside
//! a folder, two modules (or a ring of them) that use each other fail too (see the second half).

use std::path::{Path, PathBuf};

/// The top-level modules in pipeline order: foundations, then the stages, then the command line.
const ORDER: &[&str] = &[
    "error",
    "files",
    "limits",
    "sky",
    "harmonics",
    "simulate",
    "tiles",
    "scattering",
    "measure",
    "io",
    "catalogue",
    "ensemble",
    "forecast",
    "synthesis",
    "figures",
    "cli",
];

/// Names the crate root re-exports, and the module each comes from.
const ROOT_REEXPORTS: &[(&str, &str)] = &[
    ("Error", "error"),
    ("Result", "error"),
    ("Footprint", "sky"),
    ("SkyMap", "sky"),
    ("Pixelization", "sky"),
    ("Direction", "sky"),
    ("Ordering", "sky"),
];

fn rust_files(dir: &Path, out: &mut Vec<PathBuf>) {
    for entry in std::fs::read_dir(dir).expect("src/ is readable") {
        let path = entry.expect("directory entry").path();
        if path.is_dir() {
            rust_files(&path, out);
        } else if path.extension().is_some_and(|e| e == "rs") {
            out.push(path);
        }
    }
}

/// The code of a file without `//` comments (doc comments included), line by line.
fn code_without_comments(text: &str) -> String {
    text.lines()
        .map(|line| match line.find("//") {
            Some(i) if !line[..i].contains('"') => &line[..i],
            _ => line,
        })
        .collect::<Vec<_>>()
        .join("\n")
}

fn identifier_at(text: &str) -> &str {
    let end = text
        .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
        .unwrap_or(text.len());
    &text[..end]
}

/// The first path segment after every `crate::` (for `crate::{a::b, c}`, each of a and c).
fn crate_paths(code: &str) -> Vec<String> {
    let mut found = Vec::new();
    let mut rest = code;
    while let Some(i) = rest.find("crate::") {
        let preceded_by_identifier = rest[..i]
            .chars()
            .last()
            .is_some_and(|c| c.is_ascii_alphanumeric() || c == '_' || c == '$');
        rest = &rest[i + "crate::".len()..];
        if preceded_by_identifier {
            continue;
        }
        if let Some(group) = rest.strip_prefix('{') {
            let mut depth = 1;
            let mut item_start = true;
            for (k, c) in group.char_indices() {
                match c {
                    '{' => depth += 1,
                    '}' => {
                        depth -= 1;
                        if depth == 0 {
                            break;
                        }
                    }
                    ',' if depth == 1 => {
                        item_start = true;
                        continue;
                    }
                    c if c.is_whitespace() => continue,
                    _ => {}
                }
                if item_start && depth == 1 {
                    found.push(identifier_at(&group[k..]).to_string());
                    item_start = false;
                }
            }
        } else {
            found.push(identifier_at(rest).to_string());
        }
    }
    found
}

fn top_module(src: &Path, file: &Path) -> String {
    let relative = file.strip_prefix(src).expect("file under src/");
    let first = relative
        .components()
        .next()
        .expect("non-empty path")
        .as_os_str()
        .to_string_lossy()
        .to_string();
    first.trim_end_matches(".rs").to_string()
}

#[test]
fn every_module_uses_only_modules_before_it_in_pipeline_order() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut files = Vec::new();
    rust_files(&src, &mut files);
    files.sort();
    let rank = |m: &str| ORDER.iter().position(|&o| o == m);
    let mut violations = Vec::new();
    let mut checked = 0;
    for file in &files {
        let module = top_module(&src, file);
        if module == "lib" || module == "main" {
            continue;
        }
        let own =
            rank(&module).unwrap_or_else(|| panic!("{} is not in the pipeline order list", module));
        let text = std::fs::read_to_string(file).expect("source file is readable");
        for first in crate_paths(&code_without_comments(&text)) {
            let used = ROOT_REEXPORTS
                .iter()
                .find(|(name, _)| *name == first)
                .map_or(first.as_str(), |(_, m)| m);
            checked += 1;
            match rank(used) {
                Some(r) if r <= own => {}
                _ => violations.push(format!("{} uses crate::{first}", file.display())),
            }
        }
    }
    assert!(
        checked > 100,
        "only {checked} crate paths found: the scan is broken"
    );
    assert!(violations.is_empty(), "{}", violations.join("\n"));
}

#[test]
fn the_path_scan_sees_grouped_and_plain_imports() {
    let code = "use crate::{tiles::tiling::Tile, Error};\nlet x = crate::sky::apodization::c2(1.0);\nuse crate::{\n    a::{b, c},\n    d,\n};";
    assert_eq!(crate_paths(code), ["tiles", "Error", "sky", "a", "d"]);
    assert_eq!(
        code_without_comments("let a = 1; // crate::cli\n/// [`crate::cli`]"),
        "let a = 1; \n"
    );
}

// ---- Import circles inside a folder ----------------------------------------------------------
//
// Inside a folder, uses between modules point one way: a module may use a sibling only when the
// sibling does not use it back, directly or through other siblings. The check reads every `crate::…`, `super::…`
// and `self::…` path (use trees expanded, comments excluded) with all its segments, resolves the
// names a folder's `mod.rs` re-exports to the sibling that defines them, and looks for a circle
// in each folder's graph of sibling uses.

use std::collections::{BTreeMap, BTreeSet};

/// The module path of a file under src/: `tiles/tiling/latitude_bands.rs` is
/// `[tiles, tiling, latitude_bands]`, `scattering/mod.rs` is `[scattering]`.
fn module_path(src: &Path, file: &Path) -> Vec<String> {
    let relative = file.strip_prefix(src).expect("file under src/");
    let mut segments: Vec<String> = relative
        .components()
        .map(|c| {
            c.as_os_str()
                .to_string_lossy()
                .trim_end_matches(".rs")
                .to_string()
        })
        .collect();
    if segments.last().is_some_and(|s| s == "mod") {
        segments.pop();
    }
    segments
}

fn skip_whitespace(text: &str, at: usize) -> usize {
    at + text[at..].len() - text[at..].trim_start().len()
}

/// Expands the use tree (or plain path) at the start of `text`, every leaf prefixed with
/// `prefix`, into `out`; returns the bytes read.
fn expand_tree(text: &str, prefix: &[String], out: &mut Vec<Vec<String>>) -> usize {
    let mut path = prefix.to_vec();
    let mut at = 0;
    loop {
        at = skip_whitespace(text, at);
        let rest = &text[at..];
        if rest.starts_with('{') {
            at += 1;
            loop {
                at = skip_whitespace(text, at);
                match text[at..].chars().next() {
                    None => return at,
                    Some('}') => return at + 1,
                    Some(',') => at += 1,
                    Some(_) => {
                        let read = expand_tree(&text[at..], &path, out);
                        if read == 0 {
                            at += text[at..].chars().next().map_or(1, char::len_utf8);
                        }
                        at += read;
                    }
                }
            }
        }
        if rest.starts_with('*') {
            path.push("*".to_string());
            out.push(path);
            return at + 1;
        }
        let name = identifier_at(rest);
        if name.is_empty() {
            if path.len() > prefix.len() {
                out.push(path);
            }
            return at;
        }
        path.push(name.to_string());
        at += name.len();
        if text[at..].starts_with("::") {
            at += 2;
        } else {
            out.push(path);
            return at;
        }
    }
}

/// Every module path the code names, resolved from the file's own module path `own`:
/// `crate::a::b` is `[a, b]`, `super::b` is `own` without its last segment then `b`,
/// `self::b` is `own` then `b`.
fn resolved_paths(code: &str, own: &[String]) -> Vec<Vec<String>> {
    let mut found = Vec::new();
    let mut at = 0;
    while at < code.len() {
        let rest = &code[at..];
        let starts = ["crate::", "super::", "self::"]
            .iter()
            .filter_map(|k| rest.find(k).map(|i| (i, *k)))
            .min();
        let Some((i, keyword)) = starts else { break };
        let preceded = code[..at + i]
            .chars()
            .last()
            .is_some_and(|c| c.is_ascii_alphanumeric() || c == '_' || c == '$' || c == ':');
        at += i + keyword.len();
        if preceded {
            continue;
        }
        let mut base: Vec<String> = match keyword {
            "crate::" => Vec::new(),
            "self::" => own.to_vec(),
            _ => own[..own.len().saturating_sub(1)].to_vec(),
        };
        while keyword == "super::" && code[at..].starts_with("super::") {
            base.pop();
            at += "super::".len();
        }
        at += expand_tree(&code[at..], &base, &mut found);
    }
    found
}

/// The modules directly inside each folder of src/ (files and subfolders), by folder path.
fn folder_modules(src: &Path, files: &[PathBuf]) -> BTreeMap<Vec<String>, BTreeSet<String>> {
    let mut folders: BTreeMap<Vec<String>, BTreeSet<String>> = BTreeMap::new();
    for file in files {
        let path = module_path(src, file);
        for k in 1..path.len() {
            folders
                .entry(path[..k].to_vec())
                .or_default()
                .insert(path[k].clone());
        }
    }
    folders
}

/// The names a folder's module file re-exports (`pub use child::{A, B}`), mapped to the child
/// module that defines them: (folder path, name) → child.
fn reexports(
    src: &Path,
    files: &[PathBuf],
    folders: &BTreeMap<Vec<String>, BTreeSet<String>>,
) -> BTreeMap<(Vec<String>, String), String> {
    let mut map = BTreeMap::new();
    for file in files {
        let own = module_path(src, file);
        let Some(children) = folders.get(&own) else {
            continue;
        };
        let code = code_without_comments(&std::fs::read_to_string(file).expect("readable"));
        for statement in code.split("pub use ").skip(1) {
            let mut leaves = Vec::new();
            let relative = !(statement.starts_with("crate::")
                || statement.starts_with("self::")
                || statement.starts_with("super::"));
            if relative {
                expand_tree(statement, &own, &mut leaves);
            } else {
                leaves = resolved_paths(statement.split(';').next().unwrap_or(""), &own);
            }
            for leaf in leaves {
                let inside = leaf.len() > own.len() + 1 && leaf[..own.len()] == own[..];
                if inside && children.contains(&leaf[own.len()]) {
                    let name = leaf.last().expect("non-empty").clone();
                    map.insert((own.clone(), name), leaf[own.len()].clone());
                }
            }
        }
    }
    map
}

/// One use of a sibling: in folder `folder`, module `from` names module `to` (in `file`).
type SiblingUses = BTreeMap<Vec<String>, BTreeMap<(String, String), String>>;

/// Every use of one module of a folder by another module of the same folder.
fn sibling_uses(src: &Path, files: &[PathBuf]) -> SiblingUses {
    let folders = folder_modules(src, files);
    let reexported = reexports(src, files, &folders);
    let mut uses: SiblingUses = BTreeMap::new();
    for file in files {
        let own = module_path(src, file);
        let code = code_without_comments(&std::fs::read_to_string(file).expect("readable"));
        for path in resolved_paths(&code, &own) {
            let common = own.iter().zip(&path).take_while(|(a, b)| a == b).count();
            if common == 0 || common >= own.len() || common >= path.len() {
                continue;
            }
            let folder = own[..common].to_vec();
            let Some(children) = folders.get(&folder) else {
                continue;
            };
            let named = &path[common];
            let to = if children.contains(named) {
                named.clone()
            } else if let Some(child) = reexported.get(&(folder.clone(), named.clone())) {
                child.clone()
            } else {
                continue;
            };
            let from = own[common].clone();
            if from != to {
                uses.entry(folder)
                    .or_default()
                    .entry((from, to))
                    .or_insert_with(|| file.display().to_string());
            }
        }
    }
    uses
}

/// The circles of a folder's graph of sibling uses: for each use a → b from which a is reached
/// again, the circle a → b → … → a.
fn circles(edges: &BTreeMap<(String, String), String>) -> Vec<Vec<String>> {
    let next = |m: &str| -> Vec<String> {
        edges
            .keys()
            .filter(|(a, _)| a == m)
            .map(|(_, b)| b.clone())
            .collect()
    };
    let mut found = Vec::new();
    for (a, b) in edges.keys() {
        // Breadth-first from b, remembering the way back, until a is reached.
        let mut came_from: BTreeMap<String, String> = BTreeMap::new();
        let mut frontier = vec![b.clone()];
        let mut seen = BTreeSet::from([b.clone()]);
        while !frontier.is_empty() && !seen.contains(a) {
            let mut following = Vec::new();
            for m in &frontier {
                for n in next(m) {
                    if seen.insert(n.clone()) {
                        came_from.insert(n.clone(), m.clone());
                        following.push(n);
                    }
                }
            }
            frontier = following;
        }
        if seen.contains(a) {
            let mut way = vec![a.clone()];
            let mut m = a.clone();
            while &m != b {
                m = came_from[&m].clone();
                way.push(m.clone());
            }
            way.push(a.clone());
            way.reverse();
            found.push(way);
        }
    }
    found
}

#[test]
fn no_two_modules_of_one_folder_use_each_other_even_through_others() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut files = Vec::new();
    rust_files(&src, &mut files);
    files.sort();
    let uses = sibling_uses(&src, &files);
    let counted: usize = uses.values().map(BTreeMap::len).sum();
    assert!(
        counted > 20,
        "only {counted} sibling uses found: the scan is broken"
    );
    let mut violations = Vec::new();
    for (folder, edges) in &uses {
        for circle in circles(edges) {
            let evidence: Vec<String> = circle
                .windows(2)
                .map(|w| edges[&(w[0].clone(), w[1].clone())].clone())
                .collect();
            violations.push(format!(
                "{}: {} (in {})",
                folder.join("::"),
                circle.join(" → "),
                evidence.join(", ")
            ));
        }
    }
    assert!(violations.is_empty(), "{}", violations.join("\n"));
}

#[test]
fn the_sibling_scan_resolves_paths_reexports_and_finds_circles() {
    let own = ["tiles".to_string(), "sampling".to_string()];
    let code = "use crate::tiles::{projection::{Gnomonic, rectangle}, tiling::TilingPlan};\n\
                use super::tiling;\nlet n = crate::scattering::fft::size(2);\nuse self::inner::X;\n\
                mod tests { use super::*; use super::super::sky::Footprint; }";
    let strings = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
    assert_eq!(
        resolved_paths(code, &own),
        [
            strings(&["tiles", "projection", "Gnomonic"]),
            strings(&["tiles", "projection", "rectangle"]),
            strings(&["tiles", "tiling", "TilingPlan"]),
            strings(&["tiles", "tiling"]),
            strings(&["scattering", "fft", "size"]),
            strings(&["tiles", "sampling", "inner", "X"]),
            strings(&["tiles", "*"]),
            strings(&["sky", "Footprint"]),
        ]
    );
    let edge = |a: &str, b: &str| ((a.to_string(), b.to_string()), String::new());
    let two = BTreeMap::from([edge("a", "b"), edge("b", "a"), edge("b", "c")]);
    assert_eq!(
        circles(&two),
        [strings(&["a", "b", "a"]), strings(&["b", "a", "b"])]
    );
    let three = BTreeMap::from([edge("a", "b"), edge("b", "c"), edge("c", "a")]);
    assert_eq!(circles(&three).len(), 3);
    let chain = BTreeMap::from([edge("a", "b"), edge("b", "c"), edge("a", "c")]);
    assert!(circles(&chain).is_empty());
}
