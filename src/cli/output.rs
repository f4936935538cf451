//! Files a command writes: never one of its inputs, never an existing file unless the user
//! passes `--replace` (and never an input even then).

use std::fs::{File, OpenOptions};
use std::path::Path;

use miette::miette;

use super::error::{CliError, CliResult};

/// Whether `a` and `b` name the same file (same device and inode), following links.
fn same_file(a: &Path, b: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (std::fs::metadata(a), std::fs::metadata(b)) {
        (Ok(x), Ok(y)) => x.dev() == y.dev() && x.ino() == y.ino(),
        _ => false,
    }
}

/// Open `path` for writing, refusing an input of this command and, unless `replace`, any file
/// already there (created atomically, so a file appearing meanwhile is not replaced either).
pub fn create(path: &Path, inputs: &[&Path], replace: bool) -> CliResult<File> {
    if let Some(input) = inputs.iter().find(|i| same_file(path, i)) {
        return Err(CliError::input(miette!(
            help = "write the output to another path",
            "{} is this command's input {}: it is not written over",
            path.display(),
            input.display()
        )));
    }
    let mut o = OpenOptions::new();
    o.write(true);
    if replace {
        o.create(true).truncate(true);
    } else {
        o.create_new(true);
    }
    o.open(path).map_err(|e| {
        if e.kind() == std::io::ErrorKind::AlreadyExists {
            CliError::input(miette!(
                help = "choose another name, or pass --replace to write over it",
                "{} exists: it is left as it is",
                path.display()
            ))
        } else {
            CliError::runtime(miette!("cannot create {}: {e}", path.display()))
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn inputs_and_existing_files_are_refused() {
        let dir = std::env::temp_dir().join(format!("slackmeter-out-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let input = dir.join("in.smrec");
        std::fs::write(&input, b"recorded").unwrap();
        // the input itself, also through another spelling, even with --replace
        for p in [input.clone(), dir.join(".").join("in.smrec")] {
            assert!(create(&p, &[&input], true).is_err());
        }
        assert_eq!(std::fs::read(&input).unwrap(), b"recorded");
        let out = dir.join("out.csv");
        std::fs::write(&out, b"mine").unwrap();
        assert!(create(&out, &[&input], false).is_err());
        assert_eq!(std::fs::read(&out).unwrap(), b"mine");
        assert!(create(&out, &[&input], true).is_ok());
        assert!(create(&dir.join("new.csv"), &[&input], false).is_ok());
        let _ = std::fs::remove_dir_all(&dir);
    }
}
