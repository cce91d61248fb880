//! The layout rule of the crate (our rule, stated in the crate doc of src/lib.rs): the top-level
//! modules form one ordered list, and a module may use only the modules before it. This holds by
//! reading every `crate::…` path in the code (comments excluded) of each file under src/, so a
//! new import that points up the pipeline, or closes a circle between folders, fails here.

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
