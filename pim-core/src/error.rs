//! Errors as values with context. The library never prints and never exits; the binary
//! shows an [`Error`] once, at the edge, and maps its [`ErrorClass`] to an exit code.

use std::fmt;

/// Where in an input a problem sits: the file (or other source) name, the line
/// (the header is line 1) and the field.
#[derive(Clone, Debug, Default, PartialEq, Eq)]
pub struct Place {
    /// The file or other source, as the user named it.
    pub source: String,
    /// The line (the header is line 1), when the problem sits on one.
    pub line: Option<u64>,
    /// The field (column) at fault, when one is.
    pub field: Option<String>,
}

impl Place {
    /// A place that names only its source.
    pub fn new(source: impl Into<String>) -> Self {
        Place {
            source: source.into(),
            line: None,
            field: None,
        }
    }

    /// The same place at `line`.
    pub fn at_line(mut self, line: u64) -> Self {
        self.line = Some(line);
        self
    }

    /// The same place at `field`.
    pub fn at_field(mut self, field: impl Into<String>) -> Self {
        self.field = Some(field.into());
        self
    }
}

impl fmt::Display for Place {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}", self.source)?;
        if let Some(line) = self.line {
            write!(f, ", line {line}")?;
        }
        if let Some(field) = &self.field {
            write!(f, ", field `{field}`")?;
        }
        Ok(())
    }
}

/// What kind of failure an error is; the binary gives each class its own exit code.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ErrorClass {
    /// A command-line value is wrong (bad frequency text, out-of-range option).
    Argument,
    /// A file's content is wrong: the error names the file, line and field.
    Input,
    /// A file could not be read or written.
    Io,
    /// The inputs are valid but cannot support an answer (bearings that fix nothing).
    Refused,
}

/// An error with the context a user needs to act on it.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Error {
    /// What kind of failure it is (and so the exit code).
    pub class: ErrorClass,
    /// Where in an input it sits, when it sits in one.
    pub place: Option<Place>,
    /// What is wrong, in words a user can act on.
    pub message: String,
}

impl Error {
    /// A problem in a file's content, at `place`.
    pub fn input(place: Place, message: impl Into<String>) -> Self {
        Error {
            class: ErrorClass::Input,
            place: Some(place),
            message: message.into(),
        }
    }

    /// A bad command-line value; `name` is the option or argument.
    pub fn argument(name: &str, message: impl Into<String>) -> Self {
        Error {
            class: ErrorClass::Argument,
            place: Some(Place::new(name)),
            message: message.into(),
        }
    }

    /// A file that could not be read or written.
    pub fn io(path: impl Into<String>, err: &std::io::Error) -> Self {
        Error {
            class: ErrorClass::Io,
            place: Some(Place::new(path)),
            message: err.to_string(),
        }
    }

    /// Valid inputs that cannot support an answer.
    pub fn refused(message: impl Into<String>) -> Self {
        Error {
            class: ErrorClass::Refused,
            place: None,
            message: message.into(),
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match &self.place {
            Some(place) => write!(f, "{place}: {}", self.message),
            None => write!(f, "{}", self.message),
        }
    }
}

impl std::error::Error for Error {}

/// A result whose error is an [`Error`] unless said otherwise.
pub type Result<T, E = Error> = std::result::Result<T, E>;
