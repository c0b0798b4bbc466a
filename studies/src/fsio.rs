//! File access of stria: atomic writes (everything a run leaves behind is either the old file
//! or the new one), synced appends and truncation that never follow a symbolic link, run
//! directories made durable in their parent, and input files read only when they are regular
//! files within a stated size.

use std::fs::{self, File, OpenOptions};
use std::io::{self, Read, Write};
use std::path::Path;

/// Largest study file read (1 MiB; the demos are a few kilobytes).
pub const STUDY_FILE_MAX_BYTES: u64 = 1 << 20;
/// Largest ROM constants file read (1 MiB).
pub const CONSTANTS_FILE_MAX_BYTES: u64 = 1 << 20;

/// A size in words for messages: `1 MiB`, `256 MiB`, `4 GiB`.
pub fn size_words(bytes: u64) -> String {
    const UNITS: [(u64, &str); 3] = [(1 << 30, "GiB"), (1 << 20, "MiB"), (1 << 10, "KiB")];
    for (unit, name) in UNITS {
        if bytes >= unit && bytes.is_multiple_of(unit) {
            return format!("{} {name}", bytes / unit);
        }
    }
    format!("{bytes} bytes")
}

/// Read a text input file: only a regular file (a FIFO would block, a device such as
/// /dev/zero never ends) of at most `max_bytes` bytes, in UTF-8. The errors say which rule
/// was broken, for the caller's message.
pub fn read_input(path: &Path, max_bytes: u64) -> io::Result<String> {
    // Checked before opening: opening a FIFO for reading blocks until a writer comes.
    let meta = fs::metadata(path)?;
    if !meta.is_file() {
        return Err(not_regular(&meta));
    }
    let f = File::open(path)?;
    // Checked again on the open file, in case the path changed in between.
    let meta = f.metadata()?;
    if !meta.is_file() {
        return Err(not_regular(&meta));
    }
    let too_large = || {
        io::Error::new(
            io::ErrorKind::InvalidData,
            format!("larger than the limit of {}", size_words(max_bytes)),
        )
    };
    if meta.len() > max_bytes {
        return Err(too_large());
    }
    let mut bytes = Vec::with_capacity(meta.len() as usize);
    f.take(max_bytes + 1).read_to_end(&mut bytes)?;
    if bytes.len() as u64 > max_bytes {
        return Err(too_large());
    }
    String::from_utf8(bytes)
        .map_err(|_| io::Error::new(io::ErrorKind::InvalidData, "not UTF-8 text"))
}

fn not_regular(meta: &fs::Metadata) -> io::Error {
    let what = if meta.is_dir() {
        "a directory"
    } else {
        "not a regular file (a FIFO, socket or device)"
    };
    io::Error::new(io::ErrorKind::InvalidInput, what)
}

/// Create `dir` and any missing parents, fsyncing each new directory into its parent, so a
/// run directory survives a power cut together with the files written into it.
pub fn create_dir_synced(dir: &Path) -> io::Result<()> {
    // A relative path's last ancestor is "", which never "exists": stop before it (the
    // working directory exists), or `runs/quick` could not be created.
    let missing: Vec<&Path> = dir
        .ancestors()
        .take_while(|a| !a.as_os_str().is_empty() && !a.exists())
        .collect();
    for d in missing.into_iter().rev() {
        match fs::create_dir(d) {
            Ok(()) => sync_dir(parent_dir(d))?,
            Err(e) if e.kind() == io::ErrorKind::AlreadyExists && d.is_dir() => {}
            Err(e) => return Err(e),
        }
    }
    if dir.is_dir() {
        Ok(())
    } else {
        fs::create_dir_all(dir)
    }
}

/// Remove the temporary files that [`write_atomic`] leaves when a process is killed between
/// creating one and renaming it (`.NAME.tmpPID` for each NAME in `names`). Call it while no
/// other process writes to `dir` (the run's lock is held). Returns how many were removed.
pub fn remove_stale_temps(dir: &Path, names: &[&str]) -> io::Result<usize> {
    let mut removed = 0;
    for entry in fs::read_dir(dir)? {
        let entry = entry?;
        let file_name = entry.file_name();
        let Some(n) = file_name.to_str() else {
            continue;
        };
        let stale = names.iter().any(|name| {
            n.strip_prefix('.')
                .and_then(|r| r.strip_prefix(name))
                .and_then(|r| r.strip_prefix(".tmp"))
                .is_some_and(|pid| !pid.is_empty() && pid.bytes().all(|b| b.is_ascii_digit()))
        });
        if stale && entry.file_type()?.is_file() {
            fs::remove_file(entry.path())?;
            removed += 1;
        }
    }
    if removed > 0 {
        sync_dir(dir)?;
    }
    Ok(removed)
}

/// Write `bytes` to `path` atomically: a temporary file in the same directory, fsync, rename
/// over the target, then fsync the directory so the rename itself survives a power cut.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> io::Result<()> {
    write_replace(path, bytes)?;
    sync_dir(parent_dir(path))
}

fn parent_dir(path: &Path) -> &Path {
    match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    }
}

/// Like [`write_atomic`] without the final directory fsync, for several replacements in one
/// directory followed by one [`sync_dir`].
pub fn write_replace(path: &Path, bytes: &[u8]) -> io::Result<()> {
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    let name = path
        .file_name()
        .ok_or_else(|| io::Error::new(io::ErrorKind::InvalidInput, "path has no file name"))?;
    let mut tmp_name = std::ffi::OsString::from(".");
    tmp_name.push(name);
    tmp_name.push(format!(".tmp{}", std::process::id()));
    let tmp = dir.join(tmp_name);
    let result = (|| {
        // A leftover of a killed process with the same id is replaced; create_new never
        // follows a link planted at the temporary name.
        match fs::remove_file(&tmp) {
            Err(e) if e.kind() != io::ErrorKind::NotFound => return Err(e),
            _ => {}
        }
        let mut f = OpenOptions::new().write(true).create_new(true).open(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        drop(f);
        fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = fs::remove_file(&tmp);
    }
    result
}

/// fsync a directory (makes renames and new files in it durable). A no-op where directories
/// cannot be opened (not on Unix).
pub fn sync_dir(dir: &Path) -> io::Result<()> {
    #[cfg(unix)]
    {
        File::open(dir)?.sync_all()
    }
    #[cfg(not(unix))]
    {
        let _ = dir;
        Ok(())
    }
}

/// Open for writing without following a symbolic link at `path` (a run directory's files are
/// its own; writing through a link would change a file elsewhere).
fn open_no_follow(options: &mut OpenOptions, path: &Path) -> io::Result<File> {
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        options.custom_flags(libc::O_NOFOLLOW);
    }
    #[cfg(not(unix))]
    {
        if fs::symlink_metadata(path).is_ok_and(|m| m.file_type().is_symlink()) {
            return Err(symlink_refused());
        }
    }
    options.open(path).map_err(|e| {
        if fs::symlink_metadata(path).is_ok_and(|m| m.file_type().is_symlink()) {
            symlink_refused()
        } else {
            e
        }
    })
}

fn symlink_refused() -> io::Error {
    io::Error::new(
        io::ErrorKind::InvalidInput,
        "it is a symbolic link, and run files are never written through one",
    )
}

/// Append `bytes` to `path` (created if missing) and fsync it. A symbolic link is refused.
pub fn append_synced(path: &Path, bytes: &[u8]) -> io::Result<()> {
    let mut f = open_no_follow(OpenOptions::new().create(true).append(true), path)?;
    f.write_all(bytes)?;
    f.sync_data()
}

/// Cut `path` to `len` bytes (drops rows written after the last checkpoint) and fsync it. A
/// symbolic link is refused.
pub fn truncate_synced(path: &Path, len: u64) -> io::Result<()> {
    let f = open_no_follow(OpenOptions::new().write(true), path)?;
    f.set_len(len)?;
    f.sync_all()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn write_atomic_replaces_whole_file_and_leaves_no_temp() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.txt");
        write_atomic(&p, b"first version, longer").unwrap();
        write_atomic(&p, b"second").unwrap();
        assert_eq!(fs::read(&p).unwrap(), b"second");
        let names: Vec<_> = fs::read_dir(dir.path()).unwrap().collect();
        assert_eq!(names.len(), 1);
    }

    #[cfg(unix)]
    #[test]
    fn appends_and_truncation_refuse_symbolic_links() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("elsewhere.csv");
        fs::write(&target, b"precious\n").unwrap();
        let link = dir.path().join("evaluations.csv");
        std::os::unix::fs::symlink(&target, &link).unwrap();
        let e = append_synced(&link, b"row\n").unwrap_err();
        assert!(e.to_string().contains("symbolic link"), "{e}");
        let e = truncate_synced(&link, 0).unwrap_err();
        assert!(e.to_string().contains("symbolic link"), "{e}");
        assert_eq!(fs::read(&target).unwrap(), b"precious\n");
    }

    #[test]
    fn stale_temporary_files_are_removed_and_nothing_else() {
        let dir = tempfile::tempdir().unwrap();
        for n in [
            ".checkpoint.json.tmp123",
            ".front.csv.tmp9",
            ".front.csv.tmp",
            ".notes.txt.tmp5",
            "front.csv",
        ] {
            fs::write(dir.path().join(n), b"x").unwrap();
        }
        let names = ["checkpoint.json", "front.csv"];
        assert_eq!(remove_stale_temps(dir.path(), &names).unwrap(), 2);
        let mut left: Vec<String> = fs::read_dir(dir.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().into_string().unwrap())
            .collect();
        left.sort();
        assert_eq!(left, [".front.csv.tmp", ".notes.txt.tmp5", "front.csv"]);
    }

    #[test]
    fn new_directories_are_created_whole() {
        let dir = tempfile::tempdir().unwrap();
        let deep = dir.path().join("a/b/c");
        create_dir_synced(&deep).unwrap();
        assert!(deep.is_dir());
        create_dir_synced(&deep).unwrap();
    }

    #[cfg(unix)]
    #[test]
    fn inputs_must_be_regular_files_within_the_limit() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("s.toml");
        fs::write(&p, "x = 1\n").unwrap();
        assert_eq!(read_input(&p, 100).unwrap(), "x = 1\n");
        let e = read_input(&p, 3).unwrap_err();
        assert!(e.to_string().contains("limit of 3 bytes"), "{e}");
        let e = read_input(Path::new("/dev/zero"), 1 << 20).unwrap_err();
        assert!(e.to_string().contains("not a regular file"), "{e}");
        let e = read_input(dir.path(), 1 << 20).unwrap_err();
        assert!(e.to_string().contains("directory"), "{e}");
        assert_eq!(size_words(1 << 20), "1 MiB");
    }

    #[test]
    fn append_then_truncate() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("e.csv");
        append_synced(&p, b"a\n").unwrap();
        append_synced(&p, b"b\n").unwrap();
        truncate_synced(&p, 2).unwrap();
        assert_eq!(fs::read(&p).unwrap(), b"a\n");
    }
}
