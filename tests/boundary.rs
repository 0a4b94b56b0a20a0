//! The core boundary, held by a test rather than by memory: the library's
//! modules (everything under src/ except the application: `main.rs`, the
//! command line `cli*`, the screens `tui*` and the link transports
//! `transport*`) use no terminal, no clap, no sockets, no serial ports and
//! no file system, and print nothing. The log store (`src/logbook/store.rs`,
//! with `src/logbook/follow.rs`, which notices another process's appends)
//! is the one documented exception for files. Parsing addresses in a link
//! spec (`std::net` types) is allowed; opening a socket is not. Test code
//! (from the first `#[cfg(test)]` of a file on, and whole files a parent
//! declares under `#[cfg(test)]`) is not the core and is not read.
//!
//! A second test keeps the core free of import circles: a module and its
//! submodules count as one, and no two top-level core modules may reach each
//! other through `crate::` paths.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// Files under src/ that belong to the application, not the core.
fn is_application(rel: &str) -> bool {
    rel == "main.rs"
        || rel.starts_with("cli")
        || rel.starts_with("tui")
        || rel.starts_with("app")
        || rel.contains("transport")
}

/// Files declared as `#[cfg(test)] mod NAME;` by their parent: test code.
fn test_only_files(src: &Path) -> BTreeSet<String> {
    let mut out = BTreeSet::new();
    let mut stack = vec![src.to_path_buf()];
    while let Some(dir) = stack.pop() {
        for entry in std::fs::read_dir(&dir).expect("src is readable") {
            let path: PathBuf = entry.expect("a directory entry").path();
            if path.is_dir() {
                stack.push(path);
                continue;
            }
            if path.extension().is_none_or(|e| e != "rs") {
                continue;
            }
            let text = std::fs::read_to_string(&path).expect("a source file reads");
            let rel = path
                .strip_prefix(src)
                .expect("under src")
                .with_extension("");
            let stem = rel.to_string_lossy().replace('\\', "/");
            let base = if stem == "lib" || stem == "main" {
                String::new()
            } else {
                format!("{stem}/")
            };
            let mut after_cfg_test = false;
            for line in text.lines() {
                let t = line.trim();
                if t.starts_with("#[cfg(test)]") {
                    after_cfg_test = true;
                    continue;
                }
                if after_cfg_test
                    && let Some(name) = t
                        .strip_prefix("mod ")
                        .or_else(|| t.strip_prefix("pub mod "))
                        .and_then(|r| r.strip_suffix(';'))
                {
                    out.insert(format!("{base}{name}.rs"));
                }
                after_cfg_test = false;
            }
        }
    }
    out
}

fn core_files() -> Vec<(String, String)> {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let test_only = test_only_files(&src);
    let mut out = Vec::new();
    let mut stack = vec![src.clone()];
    while let Some(dir) = stack.pop() {
        for entry in std::fs::read_dir(&dir).expect("src is readable") {
            let path: PathBuf = entry.expect("a directory entry").path();
            if path.is_dir() {
                stack.push(path);
            } else if path.extension().is_some_and(|e| e == "rs") {
                let rel = path
                    .strip_prefix(&src)
                    .expect("under src")
                    .to_string_lossy()
                    .replace('\\', "/");
                if is_application(&rel) || test_only.contains(&rel) {
                    continue;
                }
                let text = std::fs::read_to_string(&path).expect("a source file reads");
                let core: String = text
                    .lines()
                    .take_while(|l| !l.trim_start().starts_with("#[cfg(test)]"))
                    .filter(|l| !l.trim_start().starts_with("//"))
                    .collect::<Vec<_>>()
                    .join("\n");
                out.push((rel, core));
            }
        }
    }
    out.sort();
    out
}

#[test]
fn core_modules_use_no_terminal_clap_sockets_serial_or_files() {
    let files = core_files();
    assert!(
        files.len() > 20,
        "the core's files were found: {}",
        files.len()
    );
    let forbidden: &[(&str, &str)] = &[
        ("ratatui", "the terminal"),
        ("crossterm", "the terminal"),
        ("clap", "the command line"),
        ("UdpSocket", "sockets"),
        ("TcpStream", "sockets"),
        ("TcpListener", "sockets"),
        ("UnixStream", "sockets"),
        ("serialport", "serial ports"),
        ("std::fs", "the file system"),
        ("File::", "the file system"),
        ("OpenOptions", "the file system"),
        ("std::io::stdin", "the terminal"),
        ("std::io::stdout", "the terminal"),
        ("println!", "printing"),
        ("eprintln!", "printing"),
        ("std::thread::spawn", "threads of its own"),
        ("thread::scope", "threads of its own"),
        (
            "rayon",
            "threads of its own (the command line spreads work over cores)",
        ),
    ];
    let mut found = Vec::new();
    for (rel, text) in &files {
        for (needle, what) in forbidden {
            let log_store = rel == "logbook/store.rs" || rel == "logbook/follow.rs";
            let allowed = log_store && *what == "the file system";
            if !allowed && text.contains(needle) {
                found.push(format!("src/{rel} uses {needle} ({what})"));
            }
        }
    }
    assert!(
        found.is_empty(),
        "the core crossed its boundary:\n{}",
        found.join("\n")
    );
}

#[test]
fn core_modules_form_no_import_circle() {
    let files = core_files();
    let top = |rel: &str| -> String {
        let first = rel.split('/').next().unwrap_or(rel);
        first.trim_end_matches(".rs").to_string()
    };
    let modules: BTreeSet<String> = files.iter().map(|(r, _)| top(r)).collect();
    let mut edges: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    for (rel, text) in &files {
        let from = top(rel);
        for (i, _) in text.match_indices("crate::") {
            let rest = &text[i + "crate::".len()..];
            let name: String = rest
                .chars()
                .take_while(|c| c.is_alphanumeric() || *c == '_')
                .collect();
            if name != from && modules.contains(&name) {
                edges.entry(from.clone()).or_default().insert(name);
            }
        }
        // `use crate::{a, b::c}` groups
        for (i, _) in text.match_indices("crate::{") {
            let rest = &text[i + "crate::{".len()..];
            let group = rest.split('}').next().unwrap_or("");
            for part in group.split(',') {
                let name: String = part
                    .trim()
                    .chars()
                    .take_while(|c| c.is_alphanumeric() || *c == '_')
                    .collect();
                if name != from && modules.contains(&name) {
                    edges.entry(from.clone()).or_default().insert(name);
                }
            }
        }
    }
    // Depth-first search for a cycle, reporting the first one found.
    fn visit(
        node: &str,
        edges: &BTreeMap<String, BTreeSet<String>>,
        path: &mut Vec<String>,
        done: &mut BTreeSet<String>,
    ) -> Option<Vec<String>> {
        if let Some(pos) = path.iter().position(|p| p == node) {
            let mut cycle = path[pos..].to_vec();
            cycle.push(node.to_string());
            return Some(cycle);
        }
        if done.contains(node) {
            return None;
        }
        path.push(node.to_string());
        for next in edges.get(node).into_iter().flatten() {
            if let Some(c) = visit(next, edges, path, done) {
                return Some(c);
            }
        }
        path.pop();
        done.insert(node.to_string());
        None
    }
    let mut done = BTreeSet::new();
    for m in &modules {
        let mut path = Vec::new();
        if let Some(cycle) = visit(m, &edges, &mut path, &mut done) {
            panic!("import circle among core modules: {}", cycle.join(" -> "));
        }
    }
}
