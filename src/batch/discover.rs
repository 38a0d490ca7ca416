//! Finding the circuits of a suite: `.qasm` files under folders, links followed
//! only inside the tree, each file once, and the key that places its outputs.

use super::*;

/// One circuit of the suite.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Input {
    /// Where to read it.
    pub path: PathBuf,
    /// Its place in the output tree: the path below the parent of the argument it
    /// was found under, with `/` between parts.
    pub key: String,
}

/// The `.qasm` files under `paths` (files given directly are taken whatever their
/// extension), sorted by key. Folders are searched recursively; a symbolic link is
/// followed only when it stays inside the folder searched, and a file reached twice
/// is taken once. Two different files that would land on the same output are an
/// error.
pub fn discover(paths: &[PathBuf]) -> Result<(Vec<Input>, Vec<String>), String> {
    let mut found: Vec<Input> = Vec::new();
    let mut notes = Vec::new();
    let mut seen = std::collections::HashSet::new();
    for arg in paths {
        let meta =
            std::fs::metadata(arg).map_err(|e| format!("cannot read {}: {e}", arg.display()))?;
        let base = arg.parent().map(Path::to_path_buf).unwrap_or_default();
        if meta.is_file() {
            let canonical =
                std::fs::canonicalize(arg).map_err(|e| format!("{}: {e}", arg.display()))?;
            if seen.insert(canonical) {
                found.push(Input {
                    path: arg.clone(),
                    key: key_of(arg, &base),
                });
            }
            continue;
        }
        let root = std::fs::canonicalize(arg).map_err(|e| format!("{}: {e}", arg.display()))?;
        let mut stack = vec![arg.clone()];
        while let Some(dir) = stack.pop() {
            let mut entries: Vec<PathBuf> = std::fs::read_dir(&dir)
                .map_err(|e| format!("cannot list {}: {e}", dir.display()))?
                .filter_map(|e| e.ok().map(|e| e.path()))
                .collect();
            entries.sort();
            for path in entries {
                let Ok(link) = std::fs::symlink_metadata(&path) else {
                    continue;
                };
                let Ok(canonical) = std::fs::canonicalize(&path) else {
                    notes.push(format!("skipped {}: a broken link", path.display()));
                    continue;
                };
                if link.file_type().is_symlink() && !canonical.starts_with(&root) {
                    notes.push(format!(
                        "skipped {}: a link out of {}",
                        path.display(),
                        arg.display()
                    ));
                    continue;
                }
                let Ok(meta) = std::fs::metadata(&path) else {
                    continue;
                };
                if meta.is_dir() {
                    // A link to a folder inside the tree would visit it twice (or
                    // loop): its files are reached through the real folder.
                    if !link.file_type().is_symlink() {
                        stack.push(path);
                    }
                } else if meta.is_file()
                    && path.extension().is_some_and(|e| e == "qasm")
                    && seen.insert(canonical)
                {
                    found.push(Input {
                        key: key_of(&path, &base),
                        path,
                    });
                }
            }
        }
    }
    found.sort_by(|a, b| a.key.cmp(&b.key));
    for w in found.windows(2) {
        if w[0].key == w[1].key {
            return Err(format!(
                "{} and {} would both be written as {}; give them from different folders",
                w[0].path.display(),
                w[1].path.display(),
                w[0].key
            ));
        }
    }
    Ok((found, notes))
}

/// The path of `path` below `base`, `/`-separated, without `..` or a root.
pub(super) fn key_of(path: &Path, base: &Path) -> String {
    let rel = path.strip_prefix(base).unwrap_or(path);
    rel.components()
        .filter_map(|c| match c {
            std::path::Component::Normal(s) => Some(s.to_string_lossy().into_owned()),
            _ => None,
        })
        .collect::<Vec<_>>()
        .join("/")
}
