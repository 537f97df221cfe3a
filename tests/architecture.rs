//! The module graph has no circles (issue 18): from the `crate::` paths in each top-level
//! module's non-test code (comments left out), a depth-first search finds no cycle.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

/// The `.rs` files of a top-level module (a file, or a folder of files).
fn files(path: &Path) -> Vec<std::path::PathBuf> {
    if path.is_file() {
        return vec![path.to_path_buf()];
    }
    let mut out = Vec::new();
    for e in std::fs::read_dir(path).unwrap() {
        out.extend(files(&e.unwrap().path()));
    }
    out
}

/// The top-level modules each module uses through `crate::NAME`.
fn module_graph(src: &Path) -> BTreeMap<String, BTreeSet<String>> {
    let mut modules = BTreeMap::new();
    for e in std::fs::read_dir(src).unwrap() {
        let path = e.unwrap().path();
        let name = path.file_stem().unwrap().to_string_lossy().into_owned();
        if !["lib", "main", "cli"].contains(&name.as_str()) {
            modules.insert(name, files(&path));
        }
    }
    let names: BTreeSet<String> = modules.keys().cloned().collect();
    let mut graph = BTreeMap::new();
    for (name, paths) in &modules {
        let mut uses = BTreeSet::new();
        for p in paths {
            let text = std::fs::read_to_string(p).unwrap();
            let code = text.split("#[cfg(test)]").next().unwrap();
            for line in code.lines().filter(|l| !l.trim_start().starts_with("//")) {
                for part in line.split("crate::").skip(1) {
                    let target: String = part.chars().take_while(|c| c.is_alphanumeric() || *c == '_').collect();
                    if target != *name && names.contains(&target) {
                        uses.insert(target);
                    }
                }
            }
        }
        graph.insert(name.clone(), uses);
    }
    graph
}

/// A cycle through `graph`, if any (depth-first search with an on-path set).
fn find_cycle(graph: &BTreeMap<String, BTreeSet<String>>) -> Option<Vec<String>> {
    fn visit(
        v: &str,
        graph: &BTreeMap<String, BTreeSet<String>>,
        path: &mut Vec<String>,
        done: &mut BTreeSet<String>,
    ) -> Option<Vec<String>> {
        if let Some(k) = path.iter().position(|p| p == v) {
            return Some(path[k..].to_vec());
        }
        if done.contains(v) {
            return None;
        }
        path.push(v.to_string());
        for w in &graph[v] {
            if let Some(c) = visit(w, graph, path, done) {
                return Some(c);
            }
        }
        path.pop();
        done.insert(v.to_string());
        None
    }
    let mut done = BTreeSet::new();
    graph.keys().find_map(|v| visit(v, graph, &mut Vec::new(), &mut done))
}

#[test]
fn the_module_graph_has_no_circles() {
    let graph = module_graph(&Path::new(env!("CARGO_MANIFEST_DIR")).join("src"));
    assert!(graph.len() >= 20 && graph["pipeline"].contains("frames"), "{graph:?}");
    assert_eq!(find_cycle(&graph), None);
    // The search itself finds a cycle where there is one (construction).
    let mut with_cycle = graph.clone();
    with_cycle.get_mut("columns").unwrap().insert("tracks".into());
    assert!(find_cycle(&with_cycle).is_some());
}
