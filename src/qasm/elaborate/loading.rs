//! Loading: where included files come from (the [`Loader`] trait and its file
//! system and in-memory implementations), and the `include` statement with its
//! cycle and depth checks.

use super::*;

/// Where included files come from. The standard library is built in and never loaded.
/// Shared by the threads that read one file (only the first of them loads).
pub trait Loader: Sync {
    /// Reads the file at `path`, or says why it cannot.
    fn load(&self, path: &Path) -> Result<String, String>;

    /// A name that is equal for every spelling of the same file; include cycles are
    /// found by comparing these.
    fn canonical(&self, path: &Path) -> PathBuf {
        path.to_path_buf()
    }
}

/// Reads included files from the file system.
pub struct FsLoader;

impl Loader for FsLoader {
    fn load(&self, path: &Path) -> Result<String, String> {
        std::fs::read_to_string(path).map_err(|e| e.to_string())
    }

    fn canonical(&self, path: &Path) -> PathBuf {
        std::fs::canonicalize(path).unwrap_or_else(|_| path.to_path_buf())
    }
}

/// Included files held in memory, for tests and embedding.
#[derive(Default)]
pub struct MemoryLoader(pub HashMap<PathBuf, String>);

impl Loader for MemoryLoader {
    fn load(&self, path: &Path) -> Result<String, String> {
        self.0
            .get(path)
            .cloned()
            .ok_or_else(|| "no such file".to_string())
    }
}

impl<'l> Elaborator<'l> {
    pub(super) fn include(&mut self, path: &str, span: Span, sources: &mut SourceMap) {
        if path == "qelib1.inc" {
            self.library = true;
            return;
        }
        let parent = self
            .include_stack
            .last()
            .and_then(|p| p.0.parent())
            .map(Path::to_path_buf);
        let resolved = parent.unwrap_or_default().join(path);
        let canonical = self.loader.canonical(&resolved);
        if self.include_stack.iter().any(|p| p.1 == canonical) {
            self.diags.push(
                Diagnostic::error(
                    "include-cycle",
                    span,
                    format!(
                        "`{path}` includes itself (through {})",
                        self.include_chain()
                    ),
                )
                .hint("remove the include that closes the cycle"),
            );
            return;
        }
        if self.include_stack.len() > self.limits.max_include_depth {
            self.diags.push(
                Diagnostic::error(
                    "include-too-deep",
                    span,
                    format!(
                        "includes are nested more than {} deep",
                        self.limits.max_include_depth
                    ),
                )
                .hint(
                    "flatten the includes, or raise the include depth limit (--max-include-depth)",
                ),
            );
            return;
        }
        match self.loader.load(&resolved) {
            Ok(text) => {
                let id = sources.add(resolved.display().to_string(), text);
                self.include_stack.push((resolved, canonical));
                self.file(id, sources, false);
                self.include_stack.pop();
            }
            Err(why) => self.diags.push(
                Diagnostic::error("include-not-found", span, format!("cannot read `{}`: {why}", resolved.display()))
                    .hint("paths resolve relative to the including file; the standard library is `qelib1.inc`"),
            ),
        }
    }

    pub(super) fn include_chain(&self) -> String {
        self.include_stack
            .iter()
            .map(|p| p.0.display().to_string())
            .collect::<Vec<_>>()
            .join(" -> ")
    }
}
