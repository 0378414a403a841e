//! The crate's layers flow one way (ARCHITECTURE.md): a module may use modules of lower layers
//! only. This test reads the sources and fails on an upward or sideways `crate::` path, outside
//! unit-test modules (tests may build their inputs with anything, the simulator included).

use std::collections::BTreeMap;
use std::path::Path;

/// Layers, lowest first; modules within one layer do not use each other.
const LAYERS: &[&[&str]] = &[
    &["units", "numeric", "reduce", "cautions", "atomic", "clock"],
    &["estimate", "setup"],
    &["acquire"],
    &["signal"],
    &["analysis"],
    &["modal"],
    &["model"],
    &["rotor", "coast"],
    &["session"],
    &["capture"],
    &["pipeline"],
    &["report", "sim"],
    &["app"],
    &["cli"],
];

fn layer_of(module: &str) -> Option<usize> {
    LAYERS.iter().position(|l| l.contains(&module))
}

/// The `crate::` modules a source text uses, outside its `#[cfg(test)]` part.
fn uses(text: &str) -> Vec<String> {
    let body = text.split("#[cfg(test)]").next().unwrap_or("");
    let mut out = Vec::new();
    let mut rest = body;
    while let Some(i) = rest.find("crate::") {
        rest = &rest[i + "crate::".len()..];
        if let Some(group) = rest.strip_prefix('{') {
            // `use crate::{a::b, c};`: the first segment of each item.
            let end = group.find('}').unwrap_or(group.len());
            for item in group[..end].split(',') {
                let name: String = item
                    .trim()
                    .chars()
                    .take_while(|c| c.is_alphanumeric() || *c == '_')
                    .collect();
                if !name.is_empty() {
                    out.push(name);
                }
            }
        } else {
            let name: String = rest
                .chars()
                .take_while(|c| c.is_alphanumeric() || *c == '_')
                .collect();
            out.push(name);
        }
    }
    out
}

fn visit(dir: &Path, files: &mut Vec<std::path::PathBuf>) {
    for e in std::fs::read_dir(dir).expect("src is readable").flatten() {
        let p = e.path();
        if p.is_dir() {
            visit(&p, files);
        } else if p.extension().is_some_and(|x| x == "rs") {
            files.push(p);
        }
    }
}

#[test]
fn every_module_uses_only_lower_layers() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut files = Vec::new();
    visit(&src, &mut files);
    let mut problems: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for f in &files {
        let rel = f.strip_prefix(&src).expect("under src");
        let first = rel
            .components()
            .next()
            .and_then(|c| c.as_os_str().to_str())
            .unwrap_or("");
        let module = first.trim_end_matches(".rs");
        if module == "lib" || module == "main" {
            continue;
        }
        let Some(own) = layer_of(module) else {
            problems
                .entry(rel.display().to_string())
                .or_default()
                .push(format!("module `{module}` is in no layer of this test"));
            continue;
        };
        let text = std::fs::read_to_string(f).expect("source is readable");
        for used in uses(&text) {
            if used == module || used == "Complex64" {
                continue;
            }
            match layer_of(&used) {
                Some(l) if l < own => {}
                Some(l) => problems
                    .entry(rel.display().to_string())
                    .or_default()
                    .push(format!(
                        "`{module}` (layer {own}) uses `{used}` (layer {l}): only lower layers"
                    )),
                None => problems
                    .entry(rel.display().to_string())
                    .or_default()
                    .push(format!("uses `crate::{used}`, which is in no layer")),
            }
        }
    }
    for v in problems.values_mut() {
        v.sort();
        v.dedup();
    }
    assert!(
        problems.is_empty(),
        "layer violations:\n{}",
        problems
            .iter()
            .map(|(f, v)| format!("  {f}: {}", v.join("; ")))
            .collect::<Vec<_>>()
            .join("\n")
    );
}

#[test]
fn the_scanner_sees_grouped_and_plain_paths_and_skips_tests() {
    let text = "use crate::{signal::frf, setup::Setup};\nfn f() { crate::numeric::median(&[]); }\n\
                #[cfg(test)]\nmod tests { use crate::sim; }\n";
    assert_eq!(uses(text), vec!["signal", "setup", "numeric"]);
}
