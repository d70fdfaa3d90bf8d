//! The engine's layers import only downward, and files within a layer
//! import each other without circles (ARCHITECTURE.md). Read from the
//! source text: every `crate::LAYER::FILE` path names what a file uses.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// The layers, lowest first.
const LAYERS: [&str; 7] = [
    "base",
    "space",
    "scenario",
    "obstacles",
    "step",
    "io",
    "run",
];

fn rank(layer: &str) -> Option<usize> {
    LAYERS.iter().position(|l| *l == layer)
}

fn sources(dir: &Path, out: &mut Vec<PathBuf>) {
    for e in std::fs::read_dir(dir).expect("engine/src is readable") {
        let p = e.expect("a folder entry").path();
        if p.is_dir() {
            sources(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// (layer, file stem) of a source file under engine/src.
fn place(src: &Path, file: &Path) -> (String, String) {
    let rel = file.strip_prefix(src).expect("under engine/src");
    let parts: Vec<String> = rel
        .iter()
        .map(|c| c.to_string_lossy().trim_end_matches(".rs").to_string())
        .collect();
    match parts.as_slice() {
        [layer, stem] => (layer.clone(), stem.clone()),
        [lib] => (lib.clone(), lib.clone()),
        other => panic!("unexpected depth: {other:?}"),
    }
}

/// Every `crate::a::b` in the text, as (a, b) with b possibly empty.
fn crate_paths(text: &str) -> Vec<(String, String)> {
    let mut out = Vec::new();
    let mut rest = text;
    while let Some(i) = rest.find("crate::") {
        rest = &rest[i + 7..];
        let ident = |s: &str| -> String {
            s.chars()
                .take_while(|c| c.is_alphanumeric() || *c == '_')
                .collect()
        };
        let a = ident(rest);
        let after = &rest[a.len()..];
        let b = after.strip_prefix("::").map(ident).unwrap_or_default();
        out.push((a, b));
    }
    out
}

#[test]
fn layers_import_only_downward_and_files_without_circles() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut files = Vec::new();
    sources(&src, &mut files);
    let mut upward = Vec::new();
    // Within-layer edges: (layer, from) -> {to}.
    let mut edges: BTreeMap<(String, String), BTreeSet<String>> = BTreeMap::new();
    for f in &files {
        let (layer, stem) = place(&src, f);
        let Some(own) = rank(&layer) else {
            // lib.rs declares the layers.
            assert_eq!(layer, "lib", "{} is outside every layer", f.display());
            continue;
        };
        let text = std::fs::read_to_string(f).expect("source is readable");
        for (a, b) in crate_paths(&text) {
            let Some(theirs) = rank(&a) else {
                continue; // crate-root re-exports such as crate::Result
            };
            if theirs > own {
                upward.push(format!("{} uses crate::{a}::{b}", f.display()));
            } else if theirs == own && b != stem && !b.is_empty() {
                edges
                    .entry((layer.clone(), stem.clone()))
                    .or_default()
                    .insert(b);
            }
        }
    }
    assert!(
        upward.is_empty(),
        "imports that run upward:\n{}",
        upward.join("\n")
    );
    // A circle within a layer: depth-first search for a back edge.
    fn visit(
        node: &(String, String),
        edges: &BTreeMap<(String, String), BTreeSet<String>>,
        path: &mut Vec<String>,
        done: &mut BTreeSet<(String, String)>,
    ) -> Option<Vec<String>> {
        if let Some(i) = path.iter().position(|p| *p == node.1) {
            let mut circle = path[i..].to_vec();
            circle.push(node.1.clone());
            return Some(circle);
        }
        if done.contains(node) {
            return None;
        }
        path.push(node.1.clone());
        for next in edges.get(node).into_iter().flatten() {
            if let Some(c) = visit(&(node.0.clone(), next.clone()), edges, path, done) {
                return Some(c);
            }
        }
        path.pop();
        done.insert(node.clone());
        None
    }
    let mut done = BTreeSet::new();
    for node in edges.keys() {
        if let Some(circle) = visit(node, &edges, &mut Vec::new(), &mut done) {
            panic!(
                "files of layer `{}` import in a circle: {}",
                node.0,
                circle.join(" → ")
            );
        }
    }
    // The check sees what it must: every layer has files and some imports cross layers.
    let layers: BTreeSet<String> = files.iter().map(|f| place(&src, f).0).collect();
    for l in LAYERS {
        assert!(layers.contains(l), "layer {l} has no folder");
    }
}

#[test]
fn the_check_catches_an_upward_import_and_a_circle() {
    // The parser itself, on made-up text: a path is found with its file.
    let paths = crate_paths("use crate::run::driver::run;\nlet x = crate::space::SimBox { };");
    assert_eq!(
        paths,
        vec![
            ("run".to_string(), "driver".to_string()),
            ("space".to_string(), "SimBox".to_string())
        ]
    );
    assert!(rank("run") > rank("scenario"));
}
