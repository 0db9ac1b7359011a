//! The error type of the library and the command line: one clear sentence for the user.
//!
//! Owns the rule that every failure reaching a user is a single sentence naming the file, the
//! problem and the fix, and maps kinds of failure to exit codes (2 for anything the user can
//! correct: bad input, bad options, outputs in the way; 1 for an internal failure).

use std::fmt;
use std::path::Path;

/// Whether the user can fix the failure (exit code 2) or not (1).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ErrorKind {
    /// An input file that cannot be used.
    Input,
    /// An option or value on the command line that cannot be used.
    Usage,
    /// An output that cannot be written.
    Output,
    /// A failure that is cairn's own fault.
    Internal,
}

/// A failure, described by one sentence.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Error {
    /// What kind of failure it is.
    pub kind: ErrorKind,
    /// The sentence shown to the user.
    pub message: String,
}

impl Error {
    /// A problem with an input file: "FILE: problem; fix."
    pub fn input(path: &Path, message: impl AsRef<str>) -> Self {
        Error {
            kind: ErrorKind::Input,
            message: format!("{}: {}", path.display(), message.as_ref()),
        }
    }

    /// A problem with an option.
    pub fn usage(message: impl Into<String>) -> Self {
        Error {
            kind: ErrorKind::Usage,
            message: message.into(),
        }
    }

    /// A problem with an output path. The temporary file of an output (`.NAME.partial-PID-K`,
    /// or a FITS writer's `..NAME.partial-PID-K.part-PID`) is named as the output it was to
    /// become, and a full disk is said as such with its remedy.
    pub fn output(path: &Path, message: impl AsRef<str>) -> Self {
        let path = final_output(path);
        let message = message.as_ref();
        let message = match ["No space left on device", "Disk quota exceeded"]
            .into_iter()
            .find(|t| message.contains(t))
        {
            Some(said) => {
                let dir = match path.parent() {
                    Some(d) if !d.as_os_str().is_empty() => d.display().to_string(),
                    _ => ".".to_string(),
                };
                format!(
                    "cannot be written, as there is no room left for it in {dir} ({said}); free some space there or give another -o folder."
                )
            }
            None => message.to_string(),
        };
        Error {
            kind: ErrorKind::Output,
            message: format!("{}: {message}", path.display()),
        }
    }

    /// A failure that should not happen.
    pub fn internal(message: impl Into<String>) -> Self {
        Error {
            kind: ErrorKind::Internal,
            message: message.into(),
        }
    }

    /// The process exit code for this failure.
    pub fn exit_code(&self) -> i32 {
        match self.kind {
            ErrorKind::Internal => 1,
            _ => 2,
        }
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for Error {}

/// Result with cairn's error.
pub type Result<T> = std::result::Result<T, Error>;

/// The output a temporary file `path` was to become (`dir/.NAME.partial-PID-K` or
/// `dir/..NAME.partial-PID-K.part-PID` is `dir/NAME`); any other path as it is.
fn final_output(path: &Path) -> std::path::PathBuf {
    let Some(file) = path.file_name().and_then(|n| n.to_str()) else {
        return path.to_path_buf();
    };
    let Some(at) = file.rfind(".partial-").filter(|_| file.starts_with('.')) else {
        return path.to_path_buf();
    };
    let name = file[..at].trim_start_matches('.');
    if name.is_empty() {
        return path.to_path_buf();
    }
    path.with_file_name(name)
}

/// The refusal of `path`, given where a text file was expected (`expected`: "a JSON run
/// record", say), when it is not text: a FITS file (its first card `SIMPLE`), a
/// gzip-compressed file, or other binary data (a NUL byte or bytes that are not UTF-8 in its
/// first block); `fix` ends the sentence. `None` when the file starts as text or cannot be
/// read (its reader then says why). Only the first 2880 bytes are read, so a large map given
/// by mistake costs nothing.
pub fn not_text(path: &Path, expected: &str, fix: &str) -> Option<Error> {
    use std::io::Read as _;
    let mut head = Vec::new();
    std::fs::File::open(path)
        .ok()?
        .take(2880)
        .read_to_end(&mut head)
        .ok()?;
    let what = if head.starts_with(b"SIMPLE") {
        "a FITS file"
    } else if head.starts_with(&[0x1f, 0x8b]) {
        "a gzip-compressed file"
    } else if head.contains(&0)
        || std::str::from_utf8(&head).is_err_and(|e| e.error_len().is_some())
    {
        "binary data, not text"
    } else {
        return None;
    };
    Some(Error::input(
        path,
        format!("is {what}, not {expected}; {fix}."),
    ))
}

#[cfg(test)]
mod tests {
    #[test]
    fn a_full_disk_names_the_output_and_the_folder() {
        let p = std::path::Path::new("run/.overlay.pdf.partial-5500-9");
        let e = super::Error::output(
            p,
            "cannot be written (No space left on device (os error 28)).",
        );
        assert_eq!(
            e.message,
            "run/overlay.pdf: cannot be written, as there is no room left for it in run (No space left on device); free some space there or give another -o folder."
        );
        assert_eq!(e.exit_code(), 2);
        let p = std::path::Path::new("out/..labels.fits.partial-7-2.part-7");
        let e = super::Error::output(p, "cannot be written (Permission denied).");
        assert_eq!(
            e.message,
            "out/labels.fits: cannot be written (Permission denied)."
        );
        let p = std::path::Path::new("out/structures.csv");
        assert_eq!(
            super::Error::output(p, "x.").message,
            "out/structures.csv: x."
        );
    }

    #[test]
    fn binary_files_given_for_text_are_named() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("x");
        let says = |bytes: &[u8]| {
            std::fs::write(&p, bytes).unwrap();
            super::not_text(&p, "a JSON file", "give one").map(|e| e.message)
        };
        let fits = says(b"SIMPLE  =                    T").unwrap();
        assert!(
            fits.contains("is a FITS file, not a JSON file; give one."),
            "{fits}"
        );
        assert!(says(&[0x1f, 0x8b, 8, 0]).unwrap().contains("gzip"));
        assert!(says(&[b'{', 0xff, 0xfe]).unwrap().contains("binary data"));
        assert!(says("{\"a\": \"é\"}".as_bytes()).is_none());
        // A character cut at the end of the first block is still text.
        let mut long = vec![b' '; 2879];
        long.extend_from_slice("é".as_bytes());
        assert!(says(&long).is_none());
        assert!(super::not_text(&d.path().join("none"), "x", "y").is_none());
    }
}
