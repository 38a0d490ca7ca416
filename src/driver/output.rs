//! Writing outputs without losing a file: atomic replacement of regular files,
//! writing through devices and FIFOs, refusing links, directories and the input.

use super::*;

/// Writes `text` to `path`, never losing a file:
/// - `-` is standard output;
/// - a regular file is replaced atomically (a temporary file in the same folder,
///   then a rename), and an existing one only with `force`; its permissions are kept;
/// - an existing device or FIFO (such as `/dev/null`) is written through, never
///   replaced;
/// - a symbolic link, a directory or a socket is refused: give the real path;
/// - the input itself is never overwritten.
pub fn write_output(path: &Path, text: &str, input: &Path, force: bool) -> Result<(), String> {
    write_output_with(path, input, force, &mut |w| w.write_all(text.as_bytes()))
}

/// [`write_output`] of what `render` writes, buffered and never held whole.
pub fn write_output_with(
    path: &Path,
    input: &Path,
    force: bool,
    render: &mut dyn FnMut(&mut dyn std::io::Write) -> std::io::Result<()>,
) -> Result<(), String> {
    use std::io::Write;
    if path.as_os_str() == "-" {
        let mut out = std::io::BufWriter::new(std::io::stdout().lock());
        return render(&mut out)
            .and_then(|_| out.flush())
            .map_err(|e| format!("error: cannot write to standard output: {e}\n"));
    }
    let same = match (std::fs::canonicalize(path), std::fs::canonicalize(input)) {
        (Ok(a), Ok(b)) => a == b,
        _ => false,
    };
    if same {
        return Err(format!(
            "error: refusing to overwrite the input {}; choose another -o path\n",
            input.display()
        ));
    }
    let existing = match std::fs::symlink_metadata(path) {
        Ok(m) => Some(m),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => None,
        Err(e) => return Err(format!("error: cannot write {}: {e}\n", path.display())),
    };
    if let Some(meta) = &existing {
        let kind = meta.file_type();
        if kind.is_symlink() {
            return Err(format!(
                "error: {} is a symbolic link; tutti does not write through links, give the path it points to\n",
                path.display()
            ));
        }
        if kind.is_dir() {
            return Err(format!(
                "error: {} is a directory; give a file path\n",
                path.display()
            ));
        }
        if !kind.is_file() {
            return write_through(path, render, &kind);
        }
        if !force {
            return Err(format!(
                "error: {} exists; pass --force to replace it, or choose another -o path\n",
                path.display()
            ));
        }
    }
    let dir = path
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."));
    let fail = |e: std::io::Error| format!("error: cannot write {}: {e}\n", path.display());
    let mut builder = tempfile::Builder::new();
    builder.prefix(".tutti-").suffix(".tmp");
    #[cfg(unix)]
    {
        // A new file gets the usual 0666 less the umask, as any program's output
        // would (tempfile's own default is 0600).
        use std::os::unix::fs::PermissionsExt;
        builder.permissions(std::fs::Permissions::from_mode(0o666));
    }
    let mut tmp = builder.tempfile_in(dir).map_err(fail)?;
    {
        let mut buffered = std::io::BufWriter::new(tmp.as_file_mut());
        render(&mut buffered)
            .and_then(|_| buffered.flush())
            .map_err(fail)?;
    }
    tmp.as_file().sync_all().map_err(fail)?;
    if let Some(meta) = &existing {
        // Keep the replaced file's permissions (an unreadable temporary file is the
        // only other choice tempfile offers).
        std::fs::set_permissions(tmp.path(), meta.permissions()).map_err(fail)?;
    }
    tmp.persist(path).map_err(|e| fail(e.error))?;
    Ok(())
}

/// Writes into an existing special file (device, FIFO) without replacing it.
pub(super) fn write_through(
    path: &Path,
    render: &mut dyn FnMut(&mut dyn std::io::Write) -> std::io::Result<()>,
    kind: &std::fs::FileType,
) -> Result<(), String> {
    use std::io::Write;
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if kind.is_socket() {
            return Err(format!(
                "error: {} is a socket; give a file path\n",
                path.display()
            ));
        }
    }
    let _ = kind;
    std::fs::OpenOptions::new()
        .write(true)
        .open(path)
        .and_then(|f| {
            let mut buffered = std::io::BufWriter::new(f);
            render(&mut buffered)?;
            buffered.flush()
        })
        .map_err(|e| format!("error: cannot write {}: {e}\n", path.display()))
}
