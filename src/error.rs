//! Errors as values: one clear sentence for the user, with the context that produced it.

use std::fmt;

/// An error the user can act on. `Display` gives one sentence, context first.
#[derive(Debug, Clone, PartialEq)]
pub struct Error {
    message: String,
}

pub type Result<T> = std::result::Result<T, Error>;

impl Error {
    pub fn new(message: impl Into<String>) -> Self {
        Error {
            message: message.into(),
        }
    }

    /// Prefix the message with what was being done, e.g. "cannot read 'a.wav'".
    pub fn context(self, what: impl fmt::Display) -> Self {
        Error {
            message: format!("{what}: {}", self.message),
        }
    }

    pub fn message(&self) -> &str {
        &self.message
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for Error {}

impl From<std::io::Error> for Error {
    fn from(e: std::io::Error) -> Self {
        Error::new(describe_io(&e))
    }
}

/// A short phrase for an I/O failure, without the OS error number noise.
pub fn describe_io(e: &std::io::Error) -> String {
    use std::io::ErrorKind::*;
    match e.kind() {
        NotFound => "no such file or directory".into(),
        PermissionDenied => "permission denied".into(),
        UnexpectedEof => "the file ends early (truncated)".into(),
        _ => {
            let s = e.to_string();
            match s.find(" (os error") {
                Some(i) => s[..i].to_lowercase(),
                None => s,
            }
        }
    }
}

/// Attach context to any error convertible into ours.
pub trait Context<T> {
    fn context(self, what: impl fmt::Display) -> Result<T>;
    fn with_context<D: fmt::Display>(self, what: impl FnOnce() -> D) -> Result<T>;
}

impl<T, E: Into<Error>> Context<T> for std::result::Result<T, E> {
    fn context(self, what: impl fmt::Display) -> Result<T> {
        self.map_err(|e| e.into().context(what))
    }
    fn with_context<D: fmt::Display>(self, what: impl FnOnce() -> D) -> Result<T> {
        self.map_err(|e| e.into().context(what()))
    }
}

/// Bail out with a formatted error.
#[macro_export]
macro_rules! fail {
    ($($arg:tt)*) => { return Err($crate::error::Error::new(format!($($arg)*))) };
}
