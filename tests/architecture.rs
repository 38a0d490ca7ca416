//! The import graph flows one way: each top-level module of the library refers only
//! to modules listed before it on the `order:` line of ARCHITECTURE.md, and that
//! line names every module of `src/lib.rs`.

use std::path::{Path, PathBuf};

fn rust_files(p: &Path) -> Vec<PathBuf> {
    if p.is_file() {
        return vec![p.to_path_buf()];
    }
    let mut out = Vec::new();
    for e in std::fs::read_dir(p).unwrap().flatten() {
        out.extend(rust_files(&e.path()));
    }
    out.retain(|f| f.extension().is_some_and(|x| x == "rs"));
    out
}

/// The names `prefix` is followed by in `text` (`crate::sim::x` gives `sim`).
fn referenced<'a>(text: &'a str, prefix: &str) -> Vec<&'a str> {
    text.match_indices(prefix)
        .map(|(i, _)| {
            let rest = &text[i + prefix.len()..];
            let end = rest
                .find(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
                .unwrap_or(rest.len());
            &rest[..end]
        })
        .collect()
}

#[test]
fn every_module_imports_only_from_modules_before_it() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let arch = std::fs::read_to_string(root.join("ARCHITECTURE.md")).unwrap();
    let line = arch
        .lines()
        .find_map(|l| l.strip_prefix("order: "))
        .expect("ARCHITECTURE.md has an `order:` line");
    let order: Vec<&str> = line.split(',').map(str::trim).collect();
    let lib = std::fs::read_to_string(root.join("src/lib.rs")).unwrap();
    let declared: Vec<&str> = lib
        .lines()
        .filter_map(|l| l.strip_prefix("pub mod "))
        .map(|l| l.trim_end_matches(';'))
        .collect();
    for m in &declared {
        assert!(
            order.contains(m),
            "module {m} of src/lib.rs is not on the order line"
        );
    }
    let mut violations = Vec::new();
    let mut checked = 0;
    for (rank, module) in order.iter().enumerate() {
        let paths_of_main = [root.join("src/main.rs"), root.join("src/cli")];
        let (path, prefix) = if *module == "main" {
            (paths_of_main[0].clone(), "tutti::")
        } else if root.join("src").join(module).is_dir() {
            (root.join("src").join(module), "crate::")
        } else {
            (root.join("src").join(format!("{module}.rs")), "crate::")
        };
        let mut files = rust_files(&path);
        if *module == "main" {
            files.extend(rust_files(&paths_of_main[1]));
        }
        for file in files {
            let text = std::fs::read_to_string(&file).unwrap();
            for name in referenced(&text, prefix) {
                checked += 1;
                match order.iter().position(|m| *m == name) {
                    Some(r) if r <= rank => {}
                    Some(_) => violations.push(format!(
                        "{} ({module}) refers to {name}, which comes after it",
                        file.display()
                    )),
                    None if declared.contains(&name) => violations.push(format!(
                        "{}: {name} is not on the order line",
                        file.display()
                    )),
                    // Not a module (a function or type re-exported at the root).
                    None => {}
                }
            }
        }
    }
    assert!(
        checked > 100,
        "only {checked} references found: is the scan broken?"
    );
    assert!(violations.is_empty(), "{}", violations.join("\n"));
}

#[test]
fn the_scan_sees_a_reference_that_flows_backwards() {
    // The check itself, on a made-up file: `circuit` referring to `sim` is caught.
    let refs = referenced(
        "use crate::sim::check; fn f() { crate::memory::x() }",
        "crate::",
    );
    assert_eq!(refs, ["sim", "memory"]);
}

/// Every page of the repository that the code, tests and docs cite (`docs/*.md`,
/// `grammar/*.ebnf`, the top-level guides) exists: a source a header cites must be
/// reachable from the repository.
#[test]
fn every_cited_page_of_the_repository_exists() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut files = rust_files(&root.join("src"));
    files.extend(rust_files(&root.join("tests")));
    for doc in ["README.md", "ARCHITECTURE.md", "DEVELOPERS.md"] {
        files.push(root.join(doc));
    }
    for e in std::fs::read_dir(root.join("docs")).unwrap().flatten() {
        files.push(e.path());
    }
    let mut missing = Vec::new();
    let mut cited = 0;
    for f in &files {
        let text = std::fs::read_to_string(f).unwrap();
        for prefix in ["docs/", "grammar/"] {
            for (i, _) in text.match_indices(prefix) {
                // Only a path that starts a word: not "tests/docs/..." or a URL.
                if i > 0
                    && text[..i].ends_with(|c: char| c.is_alphanumeric() || c == '/' || c == '.')
                {
                    continue;
                }
                let rest = &text[i..];
                let end = rest
                    .find(|c: char| !(c.is_ascii_alphanumeric() || "/-_.".contains(c)))
                    .unwrap_or(rest.len());
                let path = rest[..end].trim_end_matches('.');
                if !(path.ends_with(".md") || path.ends_with(".ebnf")) {
                    continue;
                }
                cited += 1;
                if !root.join(path).is_file() {
                    missing.push(format!("{} cites {path}", f.display()));
                }
            }
        }
    }
    assert!(
        cited > 20,
        "only {cited} citations found: is the scan broken?"
    );
    assert!(missing.is_empty(), "{}", missing.join("\n"));
}
