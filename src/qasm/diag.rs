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

    /// Every file read, in order: the main file first, then each include.
    pub fn files(&self) -> impl Iterator<Item = (&str, &str)> {
        self.files.iter().map(|(n, t)| (n.as_str(), &**t))
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
    /// Builds the line index of the whole file: to render many, use
    /// [`render_limited`], which builds it once.
    pub fn render(&self, sources: &SourceMap) -> String {
        let mut caches = Vec::new();
        self.render_cached(sources, &mut caches)
    }

    /// [`Diagnostic::render`] with the line indexes of the files kept in `caches`
    /// (indexed by file), so that rendering costs the length of the lines shown.
    fn render_cached<'s>(
        &self,
        sources: &'s SourceMap,
        caches: &mut Vec<Option<(&'s str, ariadne::Source<&'s str>)>>,
    ) -> String {
        use ariadne::{CharSet, Config, IndexType, Label, Report, ReportKind, Source};
        let file = self.span.file.0 as usize;
        let file_name: &'s str = sources.name(self.span.file);
        let name = file_name.to_string();
        let text = sources.text(self.span.file);
        let (line, col) = sources.line_col(self.span.file, self.span.start);
        let start = floor_char_boundary(text, self.span.start as usize);
        let mut end = floor_char_boundary(text, self.span.end as usize).max(start);
        if end == start {
            // Widen an empty span to the next character (if any) for the caret.
            end = text[start..]
                .chars()
                .next()
                .map_or(start, |c| start + c.len_utf8());
        }
        let kind = match self.severity {
            Severity::Error => ReportKind::Error,
            Severity::Warning => ReportKind::Warning,
        };
        let label_text = if self.label.is_empty() {
            "here"
        } else {
            self.label.as_str()
        };
        let report = Report::build(kind, file_name, start)
            .with_code(self.code)
            .with_message(format!("{name}:{line}:{col}: {}", self.message))
            .with_label(Label::new((file_name, start..end)).with_message(label_text))
            .with_help(&self.hint)
            .with_config(
                Config::default()
                    .with_color(false)
                    .with_char_set(CharSet::Ascii)
                    .with_index_type(IndexType::Byte),
            )
            .finish();
        if caches.len() <= file {
            caches.resize_with(file + 1, || None);
        }
        let cache = caches[file].get_or_insert_with(|| (file_name, Source::from(text)));
        let mut out = Vec::new();
        if report.write(&mut *cache, &mut out).is_err() {
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

/// Most diagnostics shown by default; the rest are counted.
pub const DEFAULT_MAX_SHOWN: usize = 20;

/// Renders the diagnostics in source order, at most [`DEFAULT_MAX_SHOWN`].
pub fn render_all(diags: &[Diagnostic], sources: &SourceMap) -> String {
    render_limited(diags, sources, DEFAULT_MAX_SHOWN)
}

/// Renders the first `max_shown` diagnostics, then one line counting the errors
/// and warnings not shown. Each file's line index is built once, so the cost is
/// linear in the file plus the lines shown.
pub fn render_limited(diags: &[Diagnostic], sources: &SourceMap, max_shown: usize) -> String {
    let mut caches = Vec::new();
    let mut out = String::new();
    for d in diags.iter().take(max_shown) {
        out.push_str(&d.render_cached(sources, &mut caches));
    }
    if diags.len() > max_shown {
        let rest = &diags[max_shown..];
        let errors = rest.iter().filter(|d| d.is_error()).count();
        let warnings = rest.len() - errors;
        out.push_str(&format!(
            "... and {errors} more error(s) and {warnings} more warning(s) not shown (--errors-shown sets how many are shown)\n"
        ));
    }
    out
}
