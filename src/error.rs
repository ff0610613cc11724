//! Errors of the library: one [`Diagnostic`] per problem found in a design file, gathered into an
//! [`Error`] so that a user sees every problem of a file at once.

use std::fmt;

/// A place in the design file: 1-based line and column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Location {
    /// Line, counting from 1.
    pub line: usize,
    /// Column, counting from 1.
    pub col: usize,
}

/// One problem in a design file, with the YAML path it concerns and, where known, its place.
///
/// # Examples
///
/// ```
/// use joulepath::Diagnostic;
/// let d = Diagnostic::new("stages[0].output", "`4 ma` has an unknown unit `ma`")
///     .with_hint("write `4 mA`");
/// assert_eq!(d.path(), "stages[0].output");
/// assert_eq!(d.hint(), Some("write `4 mA`"));
/// ```
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Diagnostic {
    path: String,
    message: String,
    hint: Option<String>,
    location: Option<Location>,
    kind: DiagnosticKind,
}

/// What kind of problem a [`Diagnostic`] reports, for programs and tests to match on (the
/// message is for people and may be reworded; the kind and its [`code`](Self::code) stay).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[non_exhaustive]
pub enum DiagnosticKind {
    /// The text is not YAML (`syntax`).
    Syntax,
    /// Lists and mappings nested too deep (`too-deep`).
    TooDeep,
    /// A key given twice in one mapping (`duplicate-key`).
    DuplicateKey,
    /// A key the format does not have (`unknown-key`).
    UnknownKey,
    /// A value with no unit where one is needed (`missing-unit`).
    MissingUnit,
    /// A unit that does not exist or cannot take its prefix (`unknown-unit`).
    UnknownUnit,
    /// A unit of the wrong kind, a voltage where a current belongs (`wrong-unit`).
    WrongUnit,
    /// A value that is not a number (`not-a-number`).
    NotANumber,
    /// A value outside what it can physically be or what the format allows (`out-of-range`).
    OutOfRange,
    /// A name of a cell, stage, load, rail, mode or state that does not exist (`unknown-id`).
    UnknownId,
    /// A path in `tolerances:` or `--set` that names nothing (`unknown-path`).
    UnknownPath,
    /// Any other rule of the format (`invalid`).
    Invalid,
}

impl DiagnosticKind {
    /// The stable code: `unknown-id`, `missing-unit`, ...
    pub fn code(self) -> &'static str {
        match self {
            DiagnosticKind::Syntax => "syntax",
            DiagnosticKind::TooDeep => "too-deep",
            DiagnosticKind::DuplicateKey => "duplicate-key",
            DiagnosticKind::UnknownKey => "unknown-key",
            DiagnosticKind::MissingUnit => "missing-unit",
            DiagnosticKind::UnknownUnit => "unknown-unit",
            DiagnosticKind::WrongUnit => "wrong-unit",
            DiagnosticKind::NotANumber => "not-a-number",
            DiagnosticKind::OutOfRange => "out-of-range",
            DiagnosticKind::UnknownId => "unknown-id",
            DiagnosticKind::UnknownPath => "unknown-path",
            DiagnosticKind::Invalid => "invalid",
        }
    }
}

impl Diagnostic {
    /// A diagnostic at `path` (for example `stages[2].input`; empty for the whole file).
    pub fn new(path: impl Into<String>, message: impl Into<String>) -> Self {
        Self {
            path: path.into(),
            message: message.into(),
            hint: None,
            location: None,
            kind: DiagnosticKind::Invalid,
        }
    }

    /// A diagnostic of kind `kind` at `path`.
    pub fn of(kind: DiagnosticKind, path: impl Into<String>, message: impl Into<String>) -> Self {
        Self::new(path, message).with_kind(kind)
    }

    /// The same diagnostic of kind `kind`.
    #[must_use]
    pub fn with_kind(mut self, kind: DiagnosticKind) -> Self {
        self.kind = kind;
        self
    }

    /// What kind of problem it is.
    pub fn kind(&self) -> DiagnosticKind {
        self.kind
    }

    /// The same diagnostic with a fix to suggest.
    #[must_use]
    pub fn with_hint(mut self, hint: impl Into<String>) -> Self {
        self.hint = Some(hint.into());
        self
    }

    /// The same diagnostic with an optional fix to suggest.
    #[must_use]
    pub fn with_hint_opt(mut self, hint: Option<String>) -> Self {
        self.hint = hint;
        self
    }

    /// The same diagnostic with a place in the file.
    #[must_use]
    pub fn at(mut self, location: Option<Location>) -> Self {
        if location.is_some() {
            self.location = location;
        }
        self
    }

    /// The same diagnostic at a 1-based line and column.
    #[must_use]
    pub fn at_line_col(self, line: usize, col: usize) -> Self {
        self.at(Some(Location { line, col }))
    }

    /// The 1-based line, when the place is known.
    pub fn line(&self) -> Option<usize> {
        self.location.map(|l| l.line)
    }

    /// The YAML path of the value concerned, e.g. `loads[1].draw.tx`.
    pub fn path(&self) -> &str {
        &self.path
    }

    /// What is wrong, in one sentence starting in lower case.
    pub fn message(&self) -> &str {
        &self.message
    }

    /// How to fix it, when there is something to suggest.
    pub fn hint(&self) -> Option<&str> {
        self.hint.as_deref()
    }

    /// Line and column, when the parser gave them.
    pub fn location(&self) -> Option<Location> {
        self.location
    }
}

impl fmt::Display for Diagnostic {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if let Some(loc) = self.location {
            write!(f, "{}:{}: ", loc.line, loc.col)?;
        }
        if self.path.is_empty() {
            write!(f, "{}", self.message)?;
        } else {
            write!(f, "{}: {}", self.path, self.message)?;
        }
        if let Some(h) = &self.hint {
            write!(f, " ({h})")?;
        }
        Ok(())
    }
}

impl std::error::Error for Diagnostic {}

/// The library's error: an invalid design (every problem found) or a failed write.
#[derive(Debug)]
#[non_exhaustive]
pub enum Error {
    /// The design file is invalid; every problem found is listed.
    Invalid(Vec<Diagnostic>),
    /// Writing a report failed.
    Io(std::io::Error),
    /// The design is valid but its discharge gives no result.
    Run(crate::solve::RunError),
}

impl Error {
    /// The diagnostics of an invalid design (empty for other errors).
    pub fn diagnostics(&self) -> &[Diagnostic] {
        match self {
            Error::Invalid(d) => d,
            Error::Io(_) | Error::Run(_) => &[],
        }
    }

    /// An invalid-input error with a single diagnostic.
    pub fn single(d: Diagnostic) -> Self {
        Error::Invalid(vec![d])
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Error::Invalid(ds) => {
                for (i, d) in ds.iter().enumerate() {
                    if i > 0 {
                        writeln!(f)?;
                    }
                    write!(f, "{d}")?;
                }
                Ok(())
            }
            Error::Io(e) => write!(f, "cannot write the output: {e}"),
            Error::Run(e) => write!(f, "{e}"),
        }
    }
}

impl std::error::Error for Error {}

impl From<crate::solve::RunError> for Error {
    fn from(e: crate::solve::RunError) -> Self {
        Error::Run(e)
    }
}

impl From<std::io::Error> for Error {
    fn from(e: std::io::Error) -> Self {
        Error::Io(e)
    }
}

/// The nearest candidate to `name` by edit distance, when it is close enough to be a likely typo.
///
/// # Examples
///
/// ```
/// let ids = ["boost-3v3", "ldo-1v8"];
/// assert_eq!(joulepath::error::did_you_mean("boost-3v", ids.iter().copied()), Some("boost-3v3"));
/// assert_eq!(joulepath::error::did_you_mean("radio", ids.iter().copied()), None);
/// ```
pub fn did_you_mean<'a>(name: &str, candidates: impl Iterator<Item = &'a str>) -> Option<&'a str> {
    let mut best: Option<(f64, &str)> = None;
    for c in candidates {
        let score = strsim::jaro_winkler(&name.to_lowercase(), &c.to_lowercase());
        if score > 0.8 && best.is_none_or(|(s, _)| score > s) {
            best = Some((score, c));
        }
    }
    best.map(|(_, c)| c)
}
