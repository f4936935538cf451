//! The edge's error: a report with its kind, and the one mapping from kind to exit code.
//! Library errors get their kind here, by type and variant; commands add context only.

use miette::Report;

use crate::budget::design::DesignError;
use crate::budget::library::LibraryError;
use crate::diag::SourceError;
use crate::link::LinkError;
use crate::record::RecordingError;
use crate::session::SessionError;
use crate::tui::run::ViewError;

/// Exit code: everything fine.
pub const EXIT_OK: i32 = 0;
/// Exit code: a runtime failure (I/O, device).
pub const EXIT_RUNTIME: i32 = 1;
/// Exit code: bad command line or bad input file.
pub const EXIT_INPUT: i32 = 2;
/// Exit code: the analysis ran and the clock does not fit the budget (a margin is violated).
pub const EXIT_MARGIN: i32 = 3;

/// What went wrong, as far as the exit code is concerned.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    /// The command line or an input file (design, recording, part folder, port path) is wrong.
    Input,
    /// The device, the link or the system failed.
    Runtime,
    /// Whoever read standard output stopped reading (`| head`): the command ends quietly.
    Closed,
}

/// A command's failure: the message for the user and its kind.
#[derive(Debug)]
pub struct CliError {
    /// Input or runtime.
    pub kind: Kind,
    /// What to print.
    pub report: Report,
}

/// A command's result.
pub type CliResult<T> = Result<T, CliError>;

/// How a command that ran to its end came out.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Outcome {
    /// Fine.
    Done,
    /// The analysis ran and the clock does not fit the worst-case budget.
    MarginBroken,
}

impl CliError {
    /// A bad command line or input file.
    pub fn input(report: impl Into<Report>) -> CliError {
        CliError {
            kind: Kind::Input,
            report: report.into(),
        }
    }

    /// A runtime failure.
    pub fn runtime(report: impl Into<Report>) -> CliError {
        CliError {
            kind: Kind::Runtime,
            report: report.into(),
        }
    }

    /// The reader of standard output went away: no message, exit 0.
    pub fn closed() -> CliError {
        CliError {
            kind: Kind::Closed,
            report: miette::miette!("standard output was closed"),
        }
    }

    /// A failed I/O step on `what` (a file, standard output): a runtime failure, or the quiet
    /// end when a pipe's reader stopped reading.
    pub fn io(what: impl std::fmt::Display) -> impl FnOnce(std::io::Error) -> CliError {
        move |e| {
            if e.kind() == std::io::ErrorKind::BrokenPipe {
                CliError::closed()
            } else {
                CliError::runtime(miette::miette!("cannot write {what}: {}", io_words(&e)))
            }
        }
    }
}

/// An OS error in words a user can act on, with the fix where there is one.
pub fn io_words(e: &std::io::Error) -> String {
    let fix = match e.raw_os_error() {
        Some(libc::ENOTTY) => "not a serial device",
        Some(libc::EACCES) | Some(libc::EPERM) => {
            "permission denied (serial devices belong to the `dialout` group: `sudo usermod -aG dialout $USER`, then log in again)"
        }
        Some(libc::ENOENT) => "no such file or device",
        Some(libc::EBUSY) => "in use by another program (close it, or check `fuser DEVICE`)",
        Some(libc::ENOSPC) => "the disk is full",
        Some(libc::EROFS) => "the file system is read-only",
        Some(libc::EISDIR) => "it is a folder",
        _ => return e.to_string(),
    };
    fix.to_string()
}

/// The exit code of a command's result: the one place codes are chosen.
pub fn exit_code(r: &CliResult<Outcome>) -> i32 {
    match r {
        Ok(Outcome::Done) => EXIT_OK,
        Ok(Outcome::MarginBroken) => EXIT_MARGIN,
        Err(e) => match e.kind {
            Kind::Input => EXIT_INPUT,
            Kind::Runtime => EXIT_RUNTIME,
            Kind::Closed => EXIT_OK,
        },
    }
}

impl From<LinkError> for CliError {
    fn from(e: LinkError) -> CliError {
        match e {
            // a path with no device is a mistyped argument
            LinkError::NotFound { .. } | LinkError::NotSerial { .. } => CliError::input(e),
            _ => CliError::runtime(e),
        }
    }
}

impl From<RecordingError> for CliError {
    fn from(e: RecordingError) -> CliError {
        use std::io::ErrorKind as K;
        match &e {
            RecordingError::Io { err, .. }
                if matches!(
                    err.kind(),
                    K::NotFound | K::PermissionDenied | K::IsADirectory | K::InvalidData
                ) =>
            {
                CliError::input(e)
            }
            RecordingError::Io { .. } | RecordingError::Write { .. } => CliError::runtime(e),
            RecordingError::Exists { .. }
            | RecordingError::Magic { .. }
            | RecordingError::Version { .. }
            | RecordingError::Header { .. } => CliError::input(e),
        }
    }
}

impl From<SessionError> for CliError {
    fn from(e: SessionError) -> CliError {
        match e {
            SessionError::Link(e) => e.into(),
            SessionError::Recording(e) => e.into(),
        }
    }
}

impl From<ViewError> for CliError {
    fn from(e: ViewError) -> CliError {
        match e {
            ViewError::Session(e) => e.into(),
            ViewError::Terminal(_) => CliError::runtime(e),
        }
    }
}

impl From<DesignError> for CliError {
    fn from(e: DesignError) -> CliError {
        CliError::input(e)
    }
}

impl From<Box<SourceError>> for CliError {
    fn from(e: Box<SourceError>) -> CliError {
        CliError::input(*e)
    }
}

impl From<LibraryError> for CliError {
    fn from(e: LibraryError) -> CliError {
        CliError::input(e)
    }
}

impl From<serde_json::Error> for CliError {
    fn from(e: serde_json::Error) -> CliError {
        if e.io_error_kind() == Some(std::io::ErrorKind::BrokenPipe) {
            return CliError::closed();
        }
        CliError::runtime(miette::miette!("cannot write JSON: {e}"))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // errno meanings: POSIX.1-2017 <errno.h>; the fixes are the project's own
    #[test]
    fn os_errors_read_as_words_with_a_fix() {
        let words = |n| io_words(&std::io::Error::from_raw_os_error(n));
        assert_eq!(words(libc::ENOTTY), "not a serial device");
        assert!(words(libc::EACCES).contains("dialout"));
        assert!(words(libc::ENOENT).contains("no such"));
        assert!(words(libc::EBUSY).contains("in use"));
        assert!(!words(libc::ENOTTY).contains("typewriter"));
    }

    #[test]
    fn a_closed_pipe_is_a_quiet_exit_0() {
        let e = CliError::io("standard output")(std::io::ErrorKind::BrokenPipe.into());
        assert_eq!(e.kind, Kind::Closed);
        assert_eq!(exit_code(&Err(e)), 0);
    }

    #[test]
    fn each_kind_has_its_code() {
        assert_eq!(exit_code(&Ok(Outcome::Done)), 0);
        assert_eq!(exit_code(&Ok(Outcome::MarginBroken)), 3);
        let missing = LinkError::NotFound {
            path: "/dev/x".into(),
            hint: String::new(),
        };
        assert_eq!(exit_code(&Err(missing.into())), 2);
        let refused = LinkError::Permission {
            path: "/dev/x".into(),
        };
        assert_eq!(exit_code(&Err(refused.into())), 1);
        let exists = RecordingError::Exists { path: "a".into() };
        assert_eq!(exit_code(&Err(exists.into())), 2);
        let write = RecordingError::Write {
            path: "a".into(),
            err: std::io::Error::other("disk full"),
        };
        assert_eq!(exit_code(&Err(write.into())), 1);
    }
}
