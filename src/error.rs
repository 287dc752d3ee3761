//! Errors and diagnostics.
//!
//! Bad input (a malformed network file, a bad flag value) is an [`Error::Input`] and exits with
//! status 2; a failure of the program itself is [`Error::Internal`] and exits with status 1.
//! Every diagnostic about a file names the file, line and column, shows the offending text and
//! says what was expected.

use std::fmt;

/// A place in a source file: 1-based line and column (in characters), and a length in characters.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Span {
    pub line: u32,
    pub col: u32,
    pub len: u32,
}

impl Span {
    pub fn new(line: u32, col: u32, len: u32) -> Span {
        Span { line, col, len }
    }

    /// The smallest span on the same line covering `self` and `other`.
    pub fn to(self, other: Span) -> Span {
        if other.line != self.line {
            return self;
        }
        let end = (other.col + other.len).max(self.col + self.len);
        Span::new(self.line, self.col, end - self.col)
    }
}

/// How much a diagnostic matters: an error stops the command, a warning is printed and the
/// command goes on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Severity {
    Error,
    Warning,
}

impl fmt::Display for Severity {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Severity::Error => "error",
            Severity::Warning => "warning",
        })
    }
}

/// One message about a place in a file.
#[derive(Clone, Debug, PartialEq)]
pub struct Diagnostic {
    pub severity: Severity,
    pub file: String,
    pub span: Span,
    pub message: String,
    /// The source line, shortened to a readable width around the span.
    pub snippet: String,
    /// Column of the span inside `snippet` (1-based), after shortening.
    pub snippet_col: u32,
    /// What the user can do about it.
    pub help: Option<String>,
}

/// Widest source excerpt shown under a message; longer lines are cut around the span.
const SNIPPET_WIDTH: usize = 100;

impl Diagnostic {
    /// A diagnostic at `span` of `source` (the whole file text).
    pub fn at(file: &str, source: &str, span: Span, message: impl Into<String>) -> Diagnostic {
        let line = source
            .lines()
            .nth(span.line.saturating_sub(1) as usize)
            .unwrap_or("");
        Diagnostic::on_line(file, line, span, message)
    }

    /// A diagnostic at `span`, given the text of its line (for callers that index the lines
    /// once instead of scanning the file for every message).
    pub fn on_line(file: &str, line: &str, span: Span, message: impl Into<String>) -> Diagnostic {
        let (snippet, snippet_col) = excerpt(line, span.col as usize);
        Diagnostic {
            severity: Severity::Error,
            file: file.to_string(),
            span,
            message: message.into(),
            snippet,
            snippet_col: snippet_col as u32,
            help: None,
        }
    }

    /// The same message as a warning.
    pub fn warning(mut self) -> Diagnostic {
        self.severity = Severity::Warning;
        self
    }

    /// Adds what the user can do about it.
    pub fn with_help(mut self, help: impl Into<String>) -> Diagnostic {
        self.help = Some(help.into());
        self
    }
}

/// Cuts `line` to at most [`SNIPPET_WIDTH`] characters around column `col`, replacing control
/// characters so the excerpt prints safely; returns it and the column inside it.
fn excerpt(line: &str, col: usize) -> (String, usize) {
    let chars: Vec<char> = line.chars().collect();
    let start = col
        .saturating_sub(1)
        .saturating_sub(SNIPPET_WIDTH / 2)
        .min(chars.len());
    let end = (start + SNIPPET_WIDTH).min(chars.len());
    let mut out: String = chars[start..end]
        .iter()
        .map(|&c| if c.is_control() { '?' } else { c })
        .collect();
    let mut inner = col.saturating_sub(start).max(1);
    if start > 0 {
        out.insert_str(0, "...");
        inner += 3;
    }
    if end < chars.len() {
        out.push_str("...");
    }
    (out, inner)
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(
            f,
            "{}: {}:{}:{}: {}",
            self.severity, self.file, self.span.line, self.span.col, self.message
        )?;
        if !self.snippet.is_empty() || self.span.line > 0 {
            let num = self.span.line.to_string();
            let pad = " ".repeat(num.len());
            writeln!(f, " {pad} |")?;
            writeln!(f, " {num} | {}", self.snippet)?;
            let marks = "^".repeat(self.span.len.clamp(1, 60) as usize);
            let lead = " ".repeat(self.snippet_col.saturating_sub(1) as usize);
            write!(f, " {pad} | {lead}{marks}")?;
        }
        if let Some(help) = &self.help {
            write!(f, "\n = help: {help}")?;
        }
        Ok(())
    }
}

/// Every error copyloop reports.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// One or more problems in an input file.
    #[error("{}", render_all(.0))]
    Input(Vec<Diagnostic>),
    /// A bad command-line value or a request that cannot be met with this input.
    #[error("error: {0}")]
    Usage(String),
    /// A job's option that cannot be used: which one (the library's field name, e.g.
    /// `t_end`), and why. The command line names its own flag instead of the field.
    #[error("error: {field}: {reason}")]
    Invalid { field: &'static str, reason: String },
    /// A file that cannot be read or written.
    #[error("error: {path}: {source}")]
    Io {
        path: String,
        #[source]
        source: std::io::Error,
    },
    /// A failure of copyloop itself.
    #[error("internal error: {0}")]
    Internal(String),
    /// The caller asked a running job to stop ([`crate::ensemble::stoppable`]); nothing of the
    /// job's own results is returned.
    #[error("interrupted")]
    Interrupted,
}

fn render_all(diags: &[Diagnostic]) -> String {
    let shown: Vec<String> = diags.iter().take(20).map(|d| d.to_string()).collect();
    let mut out = shown.join("\n\n");
    if diags.len() > 20 {
        out.push_str(&format!("\n\n... and {} more errors", diags.len() - 20));
    }
    out
}

impl Error {
    /// Process exit status: 2 for bad input, 1 for internal failures, 130 for an interruption
    /// (128 + SIGINT, the shells' convention).
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Input(_) | Error::Usage(_) | Error::Invalid { .. } | Error::Io { .. } => 2,
            Error::Internal(_) => 1,
            Error::Interrupted => 130,
        }
    }

    pub fn usage(msg: impl Into<String>) -> Error {
        Error::Usage(msg.into())
    }

    /// An invalid option value, by field name.
    pub fn invalid(field: &'static str, reason: impl Into<String>) -> Error {
        Error::Invalid {
            field,
            reason: reason.into(),
        }
    }

    pub fn io(path: impl Into<String>, source: std::io::Error) -> Error {
        Error::Io {
            path: path.into(),
            source,
        }
    }
}

impl From<Diagnostic> for Error {
    fn from(d: Diagnostic) -> Error {
        Error::Input(vec![d])
    }
}

pub type Result<T, E = Error> = std::result::Result<T, E>;

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn diagnostic_shows_location_and_caret() {
        let src = "species A = 1\nstep s A -> Q @ 1\n";
        let d = Diagnostic::at("x.crn", src, Span::new(2, 13, 1), "unknown species `Q`");
        let text = d.to_string();
        assert!(text.starts_with("error: x.crn:2:13: unknown species `Q`"));
        assert!(text.contains(" 2 | step s A -> Q @ 1"));
        assert!(text.contains("|             ^"));
    }

    #[test]
    fn huge_line_is_cut_around_the_span() {
        let line = "x".repeat(1_000_000);
        let d = Diagnostic::at("big.crn", &line, Span::new(1, 500_000, 1), "bad");
        assert!(d.snippet.chars().count() <= SNIPPET_WIDTH + 6);
        assert!(d.snippet.starts_with("..."));
    }
}
