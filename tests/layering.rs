//! The phase order holds in the source: no module imports one above it, the
//! module graph has no loop, and only the binary touches stdout and exit
//! codes. The table in DEVELOPERS.md says the same in words.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

/// Module -> the modules it names with `crate::` (or `super::` inside a
/// folder module), test code left out.
fn graph(dir: &Path, root: &Path, parent: Option<&str>) -> BTreeMap<String, BTreeSet<String>> {
    let mut g: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    let mut files = Vec::new();
    collect(dir, &mut files);
    for f in files {
        let rel = f
            .strip_prefix(root)
            .unwrap()
            .to_string_lossy()
            .replace('\\', "/");
        let module = match parent {
            None => rel
                .split('/')
                .next()
                .unwrap()
                .trim_end_matches(".rs")
                .to_string(),
            Some(_) => rel
                .trim_end_matches(".rs")
                .split('/')
                .next()
                .unwrap()
                .to_string(),
        };
        let text = std::fs::read_to_string(&f).unwrap();
        let code = text.split("#[cfg(test)]").next().unwrap();
        let deps = g.entry(module.clone()).or_default();
        let prefix = match parent {
            None => "crate::".to_string(),
            Some(p) => format!("crate::{p}::"),
        };
        for pat in [prefix.as_str(), "super::"] {
            if pat == "super::" && (parent.is_none() || module == "mod") {
                continue;
            }
            for (i, _) in code.match_indices(pat) {
                let after = &code[i + pat.len()..];
                let name: String = after
                    .chars()
                    .take_while(|c| c.is_alphanumeric() || *c == '_')
                    .collect();
                // Lib-root re-exports name the module they come from.
                let name = match name.as_str() {
                    "Error" => "error".to_string(),
                    "Report" | "RunInfo" => "report".to_string(),
                    _ => name,
                };
                let known = parent.is_none() || dir.join(format!("{name}.rs")).exists();
                if !name.is_empty() && name != module && known && name != "mod" {
                    deps.insert(name);
                }
            }
        }
    }
    g
}

fn collect(dir: &Path, out: &mut Vec<std::path::PathBuf>) {
    for e in std::fs::read_dir(dir).unwrap() {
        let p = e.unwrap().path();
        if p.is_dir() {
            collect(&p, out);
        } else if p.extension().is_some_and(|x| x == "rs") {
            out.push(p);
        }
    }
}

/// A loop in the graph, as the modules along it.
fn find_loop(g: &BTreeMap<String, BTreeSet<String>>) -> Option<Vec<String>> {
    fn visit(
        n: &str,
        g: &BTreeMap<String, BTreeSet<String>>,
        path: &mut Vec<String>,
        done: &mut BTreeSet<String>,
    ) -> Option<Vec<String>> {
        if let Some(i) = path.iter().position(|p| p == n) {
            let mut l = path[i..].to_vec();
            l.push(n.to_string());
            return Some(l);
        }
        if done.contains(n) {
            return None;
        }
        path.push(n.to_string());
        for d in g.get(n).into_iter().flatten() {
            if let Some(l) = visit(d, g, path, done) {
                return Some(l);
            }
        }
        path.pop();
        done.insert(n.to_string());
        None
    }
    let mut done = BTreeSet::new();
    for n in g.keys() {
        if let Some(l) = visit(n, g, &mut Vec::new(), &mut done) {
            return Some(l);
        }
    }
    None
}

fn src() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("src")
}

fn library() -> BTreeMap<String, BTreeSet<String>> {
    let mut g = graph(&src(), &src(), None);
    g.remove("cmd");
    g.remove("main");
    g.remove("lib");
    g
}

#[test]
fn the_module_graph_has_no_loop() {
    let g = library();
    assert!(g.len() > 15, "{g:?}");
    assert_eq!(find_loop(&g), None, "modules import each other: {g:#?}");
    let read = graph(&src().join("read"), &src().join("read"), Some("read"));
    assert!(read.contains_key("batch") && read.contains_key("vocab"));
    assert_eq!(
        find_loop(&read),
        None,
        "readers import each other: {read:#?}"
    );
}

#[test]
fn the_finding_loop_check_can_fail() {
    let mut g: BTreeMap<String, BTreeSet<String>> = BTreeMap::new();
    g.entry("qc".into()).or_default().insert("report".into());
    g.entry("report".into()).or_default().insert("qc".into());
    assert!(find_loop(&g).is_some());
}

#[test]
fn computation_never_imports_rendering_output_or_the_ledger() {
    let g = library();
    let computation = [
        "read",
        "units",
        "numeric",
        "resolve",
        "classify",
        "evaluated",
        "spool",
        "qc",
        "problem",
        "report",
        "study",
        "power",
        "sign",
    ];
    let above = [
        "render",
        "layout",
        "pdf",
        "templates",
        "issue",
        "reissue",
        "ledger",
        "output",
        "error",
        "starter",
    ];
    for m in computation {
        let deps = g.get(m).unwrap_or_else(|| panic!("no module {m}"));
        for d in above {
            assert!(!deps.contains(d), "{m} imports {d}");
        }
    }
    // Renderers see the report model, never the ledger or the file system.
    for d in ["ledger", "issue", "reissue", "output", "error"] {
        for m in ["render", "layout", "pdf", "templates"] {
            assert!(!g[m].contains(d), "{m} imports {d}");
        }
    }
}

#[test]
fn only_the_binary_touches_stdout_argv_and_exit() {
    let mut files = Vec::new();
    collect(&src(), &mut files);
    let mut checked = 0;
    for f in files {
        let rel = f
            .strip_prefix(src())
            .unwrap()
            .to_string_lossy()
            .into_owned();
        if rel.starts_with("cmd") || rel == "main.rs" {
            continue;
        }
        checked += 1;
        let text = std::fs::read_to_string(&f).unwrap();
        let code = text.split("#[cfg(test)]").next().unwrap();
        for banned in [
            "println!",
            "print!(",
            "std::io::stdout",
            "process::exit",
            "env::args",
        ] {
            assert!(!code.contains(banned), "{rel} uses {banned}");
        }
    }
    assert!(checked > 30);
}
