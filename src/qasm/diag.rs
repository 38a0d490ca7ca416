//! Source files and located diagnostics.
//!
//! Invariant: every diagnostic carries a file, a byte span inside that file, a
//! message and a hint; rendering shows `file:line:column`, the line and a caret.

use std::fmt;
use std::ops::Range;

/// Index of a file in a [`SourceMap`].
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct FileId(pub u32);

/// A byte range inside one source file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct Span {
    pub file: FileId,
    pub start: u32,
    pub end: u32,
}

impl Span {
    pub fn new(file: FileId, range: Range<usize>) -> Span {
        Span {
            file,
            start: range.start as u32,
            end: range.end as u32,
        }
    }

    /// The smallest span covering both.
    pub fn to(self, other: Span) -> Span {
        Span {
            file: self.file,
            start: self.start.min(other.start),
            end: self.end.max(other.end),
        }
    }
}

/// The text of every file read so far, with the name shown in diagnostics.
#[derive(Debug, Default, Clone)]
pub struct SourceMap {
    /// Name and text of each file; the text is shared so that readers can hold it
    /// while more files are added.
    files: Vec<(String, std::rc::Rc<str>)>,
}

impl SourceMap {
    pub fn add(&mut self, name: impl Into<String>, text: impl Into<std::rc::Rc<str>>) -> FileId {
        self.files.push((name.into(), text.into()));
        FileId(self.files.len() as u32 - 1)
    }

    pub fn name(&self, id: FileId) -> &str {
        &self.files[id.0 as usize].0
    }

    pub fn text(&self, id: FileId) -> &str {
        &self.files[id.0 as usize].1
    }

    /// The text of a file as a shared handle (no copy).
    pub fn shared_text(&self, id: FileId) -> std::rc::Rc<str> {
        self.files[id.0 as usize].1.clone()
    }

    /// One-based line and column (in characters) of a byte offset.
    pub fn line_col(&self, id: FileId, offset: u32) -> (usize, usize) {
        let text = self.text(id);
        let offset = (offset as usize).min(text.len());
        let before = &text[..floor_char_boundary(text, offset)];
        let line = before.matches('\n').count() + 1;
        let line_start = before.rfind('\n').map_or(0, |p| p + 1);
        let col = before[line_start..].chars().count() + 1;
        (line, col)
    }
}

fn floor_char_boundary(text: &str, mut offset: usize) -> usize {
    while offset > 0 && !text.is_char_boundary(offset) {
        offset -= 1;
    }
    offset
}

#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Severity {
    Error,
    Warning,
}

/// One located message about the input.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Diagnostic {
    pub severity: Severity,
    /// A short stable identifier of the kind of mistake, e.g. `undefined-gate`.
    pub code: &'static str,
    pub span: Span,
    pub message: String,
    pub label: String,
    pub hint: String,
}

impl Diagnostic {
    pub fn error(code: &'static str, span: Span, message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            severity: Severity::Error,
            code,
            span,
            message: message.into(),
            label: String::new(),
            hint: String::new(),
        }
    }

    pub fn warning(code: &'static str, span: Span, message: impl Into<String>) -> Diagnostic {
        Diagnostic {
            severity: Severity::Warning,
            ..Diagnostic::error(code, span, message)
        }
    }

    pub fn label(mut self, label: impl Into<String>) -> Diagnostic {
        self.label = label.into();
        self
    }

    pub fn hint(mut self, hint: impl Into<String>) -> Diagnostic {
        self.hint = hint.into();
        self
    }

    pub fn is_error(&self) -> bool {
        self.severity == Severity::Error
    }

    /// Renders the diagnostic as plain text (no colour): a headline with
    /// `file:line:column`, the source line with a caret under the span, and the hint.
    pub fn render(&self, sources: &SourceMap) -> String {
        use ariadne::{CharSet, Config, Label, Report, ReportKind, Source};
        let name = sources.name(self.span.file).to_string();
        let text = sources.text(self.span.file);
        let (line, col) = sources.line_col(self.span.file, self.span.start);
        let to_char = |b: u32| {
            text[..floor_char_boundary(text, b as usize)]
                .chars()
                .count()
        };
        let start = to_char(self.span.start);
        let end = to_char(self.span.end).max(start + 1);
        let kind = match self.severity {
            Severity::Error => ReportKind::Error,
            Severity::Warning => ReportKind::Warning,
        };
        let label_text = if self.label.is_empty() {
            "here"
        } else {
            self.label.as_str()
        };
        let report = Report::build(kind, name.as_str(), start)
            .with_code(self.code)
            .with_message(format!("{name}:{line}:{col}: {}", self.message))
            .with_label(Label::new((name.as_str(), start..end)).with_message(label_text))
            .with_help(&self.hint)
            .with_config(
                Config::default()
                    .with_color(false)
                    .with_char_set(CharSet::Ascii),
            )
            .finish();
        let mut out = Vec::new();
        let cache = (name.as_str(), Source::from(text));
        if report.write(cache, &mut out).is_err() {
            return format!(
                "{name}:{line}:{col}: {}\n  hint: {}\n",
                self.message, self.hint
            );
        }
        String::from_utf8_lossy(&out).into_owned()
    }
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{} [{}]", self.message, self.code)
    }
}

/// Renders every diagnostic, errors and warnings in source order.
pub fn render_all(diags: &[Diagnostic], sources: &SourceMap) -> String {
    diags
        .iter()
        .map(|d| d.render(sources))
        .collect::<Vec<_>>()
        .join("")
}
