//! One failure type for every job, and the exit code each kind maps to.
//!
//! | code | meaning |
//! | --- | --- |
//! | 0 | success |
//! | 1 | an analysis failed (numerics: no convergence, no oscillation, a failed sweep point) |
//! | 2 | bad usage: flags, `--set` and `--param` values |
//! | 3 | the circuit file has errors |
//! | 4 | an input or output file could not be read or written |
//! | 130 | interrupted (Ctrl-C) |

use std::fmt;

/// Why a job did not finish.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum JobError {
    /// An analysis failed (exit 1).
    Analysis(String),
    /// Bad flags or flag values (exit 2).
    Usage(String),
    /// The circuit file has errors; the text is the rendered diagnostics (exit 3).
    Invalid(String),
    /// A file could not be read or written (exit 4).
    Io(String),
}

impl JobError {
    /// The process exit code for this failure.
    pub fn exit_code(&self) -> u8 {
        match self {
            JobError::Analysis(_) => 1,
            JobError::Usage(_) => 2,
            JobError::Invalid(_) => 3,
            JobError::Io(_) => 4,
        }
    }

    /// The message.
    pub fn message(&self) -> &str {
        match self {
            JobError::Analysis(m) | JobError::Usage(m) | JobError::Invalid(m) | JobError::Io(m) => {
                m
            }
        }
    }
}

impl fmt::Display for JobError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.message())
    }
}

impl std::error::Error for JobError {}

/// Writes to stderr, ignoring failures: a closed or full stderr must never stop a job or
/// panic (`eprintln!` panics when it cannot write).
#[macro_export]
macro_rules! note {
    ($($arg:tt)*) => {{
        use std::io::Write;
        let _ = writeln!(std::io::stderr().lock(), $($arg)*);
    }};
}

/// As [`note!`], without the newline.
#[macro_export]
macro_rules! note_raw {
    ($($arg:tt)*) => {{
        use std::io::Write;
        let _ = write!(std::io::stderr().lock(), $($arg)*);
    }};
}

/// Prints a line to stdout. A closed pipe (`lamina ... | head`) ends the program quietly; any
/// other failure to write (a full disk, `> /dev/full`) is an output error, exit 4.
#[macro_export]
macro_rules! out {
    ($($arg:tt)*) => {{
        use std::io::Write;
        if let Err(e) = writeln!(std::io::stdout().lock(), $($arg)*) {
            if e.kind() == std::io::ErrorKind::BrokenPipe {
                std::process::exit(0);
            }
            $crate::note!("error: cannot write to standard output: {e}");
            std::process::exit(4);
        }
    }};
}
