//! Where the tool's output goes: standard output that may be a closed pipe
//! or a full disk, and files written whole or not at all.
//!
//! Every command prints through [`print()`] and writes files through
//! [`write_file`], after [`refuse_clashes`] has checked that no output names
//! an input or another output.

use std::ffi::OsString;
use std::fmt;
use std::fs::{self, File};
use std::io::{self, Write};
use std::path::{Path, PathBuf};

use crate::exit::{EXIT_BAD_INPUT, Failure};

/// A plain message as an error.
#[derive(Debug)]
struct Message(String);

impl fmt::Display for Message {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for Message {}

fn bad(message: String) -> Failure {
    Failure {
        code: EXIT_BAD_INPUT,
        error: Box::new(Message(message)),
    }
}

/// Prints `text` on standard output and flushes it.
///
/// A closed standard output (the reader of a pipe has gone, as in `cairn
/// demo | head -c 1`) is not an error: the rest of the text is dropped
/// quietly and the command ends with the exit code it would have had.
///
/// # Errors
/// Exit code 2 when standard output cannot take the text for any other
/// reason (a full disk, an I/O error).
pub fn print(text: &str) -> Result<(), Failure> {
    let mut out = io::stdout().lock();
    match out.write_all(text.as_bytes()).and_then(|()| out.flush()) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == io::ErrorKind::BrokenPipe => Ok(()),
        Err(e) => Err(bad(format!("cannot write to standard output: {e}"))),
    }
}

/// Prints a note on standard error, with its control characters escaped;
/// a standard error that cannot take it (a closed pipe) is ignored: a note
/// is never worth failing a command for.
pub fn note(text: &str) {
    let mut err = io::stderr().lock();
    let _ = writeln!(err, "{}", printable(text));
}

/// Writes `contents` to `path` whole or not at all: into a temporary file
/// in the same directory, which then replaces `path` (so a failure part way
/// leaves any earlier file as it was). A path that exists and is not a
/// regular file (a device such as `/dev/stdout`, a named pipe) is written
/// directly. A symbolic link is followed: the file it points at is replaced.
///
/// # Errors
/// Exit code 2, naming the path, when the file cannot be written.
pub fn write_file(path: &Path, contents: &[u8]) -> Result<(), Failure> {
    let fail = |e: io::Error| bad(format!("cannot write {}: {e}", path.display()));
    let target = match fs::metadata(path) {
        Ok(m) if !m.is_file() => {
            if m.is_dir() {
                return Err(bad(format!(
                    "cannot write {}: it is a directory",
                    path.display()
                )));
            }
            return write_direct(path, contents).map_err(fail);
        }
        // Renaming over a read-only file would replace it although writing
        // into it is refused: keep the file's own answer.
        Ok(m) if m.permissions().readonly() => {
            return Err(bad(format!(
                "cannot write {}: the file is read-only",
                path.display()
            )));
        }
        Ok(_) => fs::canonicalize(path).map_err(fail)?,
        Err(_) => path.to_path_buf(),
    };
    let Some(name) = target.file_name() else {
        return Err(bad(format!(
            "cannot write {}: not a file name",
            path.display()
        )));
    };
    let dir = match target.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    let mut temp_name = OsString::from(".");
    temp_name.push(name);
    temp_name.push(format!(".cairn-{}.tmp", std::process::id()));
    let temp = dir.join(temp_name);
    let written = write_direct(&temp, contents).and_then(|()| fs::rename(&temp, &target));
    if let Err(e) = written {
        let _ = fs::remove_file(&temp);
        return Err(fail(e));
    }
    Ok(())
}

fn write_direct(path: &Path, contents: &[u8]) -> io::Result<()> {
    let mut f = File::create(path)?;
    f.write_all(contents)?;
    f.flush()?;
    // A regular file is synced so that the rename publishes whole contents;
    // a device may not support it.
    if f.metadata().is_ok_and(|m| m.is_file()) {
        f.sync_all()?;
    }
    Ok(())
}

/// A path's identity for comparison: its canonical form when it exists,
/// otherwise its parent's canonical form joined with its file name (the
/// path as given when the parent does not exist either).
fn identity(path: &Path) -> PathBuf {
    if let Ok(p) = fs::canonicalize(path) {
        return p;
    }
    let parent = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    };
    match (fs::canonicalize(&parent), path.file_name()) {
        (Ok(p), Some(name)) => p.join(name),
        _ => path.to_path_buf(),
    }
}

/// Refuses outputs that would overwrite an input or each other: every
/// output is compared with every input and every other output by
/// [canonical path](fs::canonicalize) (a path that does not exist yet by
/// its parent's canonical path and its file name). Each entry is the
/// option's name for the message and the path.
///
/// # Errors
/// Exit code 2 naming both options.
pub fn refuse_clashes(inputs: &[(&str, &Path)], outputs: &[(&str, &Path)]) -> Result<(), Failure> {
    let ids: Vec<PathBuf> = outputs.iter().map(|(_, p)| identity(p)).collect();
    for (i, (what, path)) in outputs.iter().enumerate() {
        for (input, ipath) in inputs {
            if identity(ipath) == ids[i] {
                return Err(bad(format!(
                    "{what} {} names the {input} itself: it would be overwritten; choose another file",
                    path.display()
                )));
            }
        }
        for (j, (other, _)) in outputs.iter().enumerate().take(i) {
            if ids[j] == ids[i] {
                return Err(bad(format!(
                    "{other} and {what} name the same file ({}): one would overwrite the other",
                    path.display()
                )));
            }
        }
    }
    Ok(())
}

/// `text` with its control characters (terminal escape sequences, carriage
/// returns, tabs) written as escapes such as `\u{1b}`; line breaks are kept,
/// so a message of several lines still prints as several lines.
#[must_use]
pub fn printable(text: &str) -> std::borrow::Cow<'_, str> {
    if !text.chars().any(|c| c.is_control() && c != '\n') {
        return std::borrow::Cow::Borrowed(text);
    }
    let mut out = String::with_capacity(text.len() + 8);
    for c in text.chars() {
        if c.is_control() && c != '\n' {
            out.extend(c.escape_default());
        } else {
            out.push(c);
        }
    }
    std::borrow::Cow::Owned(out)
}

/// `text` on one line: every control character escaped, line breaks too
/// (for names and titles, which are one line in every report).
#[must_use]
pub fn one_line(text: &str) -> String {
    text.chars()
        .flat_map(|c| {
            let escaped: Vec<char> = if c.is_control() {
                c.escape_default().collect()
            } else {
                vec![c]
            };
            escaped
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch(name: &str) -> PathBuf {
        let dir = std::env::temp_dir().join(format!("cairn-output-{}", std::process::id()));
        fs::create_dir_all(&dir).unwrap();
        dir.join(name)
    }

    #[test]
    fn control_characters_are_escaped() {
        assert_eq!(printable("red \u{1b}[31m\nnext"), "red \\u{1b}[31m\nnext");
        assert_eq!(one_line("a\u{1b}[2J\r\nb"), "a\\u{1b}[2J\\r\\nb");
        assert_eq!(one_line("plain ünïcode"), "plain ünïcode");
    }

    #[test]
    fn a_file_is_replaced_whole_and_no_temporary_is_left() {
        let p = scratch("whole.txt");
        fs::write(&p, "a much longer earlier text").unwrap();
        write_file(&p, b"new").unwrap();
        assert_eq!(fs::read_to_string(&p).unwrap(), "new");
        let left: Vec<_> = fs::read_dir(p.parent().unwrap())
            .unwrap()
            .filter_map(Result::ok)
            .filter(|e| e.file_name().to_string_lossy().ends_with(".tmp"))
            .collect();
        assert!(left.is_empty(), "temporary files left: {left:?}");
    }

    #[test]
    fn a_read_only_file_is_left_alone() {
        let p = scratch("read-only.txt");
        let _ = fs::remove_file(&p);
        fs::write(&p, "kept").unwrap();
        let mut perm = fs::metadata(&p).unwrap().permissions();
        perm.set_readonly(true);
        fs::set_permissions(&p, perm).unwrap();
        let e = write_file(&p, b"new").unwrap_err();
        assert!(e.to_string().contains("read-only"), "{e}");
        assert_eq!(fs::read_to_string(&p).unwrap(), "kept");
    }

    #[test]
    fn a_missing_directory_fails_with_the_path() {
        let p = scratch("no-such-dir/x.json");
        let e = write_file(&p, b"x").unwrap_err();
        assert_eq!(e.code, EXIT_BAD_INPUT);
        assert!(e.to_string().contains("no-such-dir"), "{e}");
    }

    #[test]
    fn spellings_of_one_file_clash() {
        let a = scratch("clash.toml");
        fs::write(&a, "").unwrap();
        let dir = a.parent().unwrap();
        let other = dir.join(".").join("clash.toml");
        let e = refuse_clashes(&[("spec", &a)], &[("--json", &other)]).unwrap_err();
        assert!(e.to_string().contains("spec itself"), "{e}");
        // Two outputs that do not exist yet, one spelled through `.`.
        let x = dir.join("new.out");
        let y = dir.join(".").join("new.out");
        assert!(refuse_clashes(&[], &[("--json", &x), ("--plot", &y)]).is_err());
        assert!(refuse_clashes(&[("spec", &a)], &[("--json", &x)]).is_ok());
    }
}
