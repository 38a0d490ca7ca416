//! The OpenQASM 2 front end: lexer, syntax tree, parser, elaboration and diagnostics.
//!
//! Invariant: nothing here panics on any input; every problem becomes a located
//! [`Diagnostic`].

pub mod ast;
pub mod diag;
pub mod elaborate;
pub mod lexer;
pub mod parser;

pub use diag::{Diagnostic, Severity, SourceMap, Span};
pub use elaborate::{FsLoader, Limits, Loader, MemoryLoader, ReadOutcome};

use std::path::Path;

/// Reads a program from a string with default limits; includes resolve relative to
/// the folder of `name` on the file system.
pub fn read_str(name: &str, text: &str) -> ReadOutcome {
    elaborate::read_with(name, text, &Limits::default(), &FsLoader)
}

/// Reads a program from a file. A file that cannot be read gives an outcome with one
/// error and no circuit.
pub fn read_file(path: &Path, limits: &Limits) -> ReadOutcome {
    let name = path.display().to_string();
    match std::fs::metadata(path) {
        Ok(m) if m.len() > limits.max_file_bytes as u64 => {
            let mut sources = SourceMap::default();
            let id = sources.add(name.clone(), String::new());
            let d = Diagnostic::error(
                "file-too-large",
                Span::new(id, 0..0),
                format!("the file is {} bytes, more than the limit of {}", m.len(), limits.max_file_bytes),
            )
            .hint("raise the input size limit (--max-file-bytes) if the file is meant to be this large");
            return ReadOutcome {
                circuit: None,
                diagnostics: vec![d],
                sources,
                chunks_ahead: 0,
                max_shown: limits.errors_shown,
            };
        }
        _ => {}
    }
    match std::fs::read(path) {
        Ok(bytes) => {
            let text = String::from_utf8_lossy(&bytes);
            elaborate::read_with(&name, &text, limits, &FsLoader)
        }
        Err(e) => {
            let mut sources = SourceMap::default();
            let id = sources.add(name.clone(), String::new());
            let d = Diagnostic::error(
                "cannot-read",
                Span::new(id, 0..0),
                format!("cannot read {name}: {e}"),
            )
            .hint("check the path and the file's permissions");
            ReadOutcome {
                circuit: None,
                diagnostics: vec![d],
                sources,
                chunks_ahead: 0,
                max_shown: limits.errors_shown,
            }
        }
    }
}
