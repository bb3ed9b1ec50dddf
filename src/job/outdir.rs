//! Output directories that appear whole or not at all.
//!
//! A run writes into a hidden temporary sibling of the target and renames it into place
//! at the end; a failed or interrupted run leaves the target untouched. A target that
//! exists and is not empty is only replaced with `force`. Every file goes through a
//! [`HashWriter`], so its size and SHA-256 are known without reading it back.

use std::fs::File;
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};

use sha2::{Digest, Sha256};

use crate::error::{Error, Result};

/// A writer that counts and hashes what passes through it.
pub struct HashWriter<W: Write> {
    inner: W,
    hash: Sha256,
    bytes: u64,
}

impl<W: Write> HashWriter<W> {
    /// Wraps `inner`.
    pub fn new(inner: W) -> HashWriter<W> {
        HashWriter {
            inner,
            hash: Sha256::new(),
            bytes: 0,
        }
    }

    /// Bytes written so far.
    pub fn bytes(&self) -> u64 {
        self.bytes
    }

    /// Flushes and returns (bytes, lowercase hex SHA-256).
    pub fn finish(mut self) -> std::io::Result<(u64, String)> {
        self.inner.flush()?;
        Ok((self.bytes, hex_digest(self.hash.finalize().as_slice())))
    }
}

/// Lowercase hex of a digest.
pub fn hex_digest(d: &[u8]) -> String {
    d.iter().map(|b| format!("{b:02x}")).collect()
}

/// SHA-256 of `bytes` as lowercase hex.
pub fn sha256_hex(bytes: &[u8]) -> String {
    hex_digest(Sha256::digest(bytes).as_slice())
}

/// Writes of at least this many bytes are hashed on one thread while another writes them:
/// SHA-256 runs at about the speed of a write to the page cache, so doing both in turn
/// would halve the rate. Each write is handed over whole, since every hand-over between
/// threads costs a wake-up, and on a busy machine a wake-up can cost a time slice.
const PARALLEL_HASH_BYTES: usize = 1 << 20;

impl<W: Write + Send> Write for HashWriter<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let n = if buf.len() < PARALLEL_HASH_BYTES {
            let n = self.inner.write(buf)?;
            self.hash.update(&buf[..n]);
            n
        } else {
            // The hash stays on this thread and the write is offered to another, so a
            // caller that formats its next block in parallel leaves that block and the
            // write to the same idle thread.
            let (inner, hash) = (&mut self.inner, &mut self.hash);
            let ((), written) = rayon::join(|| hash.update(buf), || inner.write_all(buf));
            written?;
            buf.len()
        };
        self.bytes += n as u64;
        Ok(n)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.inner.flush()
    }
}

/// A file being written in the temporary directory.
pub type OutFile = HashWriter<BufWriter<File>>;

/// An output directory under construction.
pub struct OutDir {
    target: PathBuf,
    tmp: PathBuf,
    committed: bool,
    stale: Vec<PathBuf>,
}

/// The marker in the names of temporary directories: `.{name}.weir-partial-{pid}`.
const PARTIAL: &str = ".weir-partial-";

/// Temporary directories of this process not yet committed, for the signal handler.
static LIVE: std::sync::Mutex<Vec<PathBuf>> = std::sync::Mutex::new(Vec::new());

/// Removes every temporary directory this process has not committed (called on SIGINT
/// or SIGTERM before exiting); returns how many were removed.
pub fn discard_partials() -> usize {
    let live = match LIVE.lock() {
        Ok(mut l) => std::mem::take(&mut *l),
        Err(p) => std::mem::take(&mut *p.into_inner()),
    };
    // Files may still be appearing while a worker writes; a few passes catch them.
    live.iter()
        .filter(|d| (0..5).any(|_| std::fs::remove_dir_all(d).is_ok() || !d.exists()))
        .count()
}

fn unregister(tmp: &Path) {
    if let Ok(mut l) = LIVE.lock() {
        l.retain(|p| p != tmp);
    }
}

/// True when `dir` holds a manifest written by weir.
fn is_weir_output(dir: &Path) -> bool {
    crate::manifest::Manifest::load(dir).is_ok()
}

/// Refuses a target that is not a directory, or that exists, is not empty and is not
/// weir's own output; `force` is needed to replace weir's own output. Nothing in
/// `protect` (the job file) may lie inside the target.
pub fn check_target(target: &Path, force: bool, protect: &[&Path]) -> Result<()> {
    if target.exists() && !target.is_dir() {
        return Err(Error::exists(format!(
            "{} exists and is not a directory; --out names a directory",
            target.display()
        )));
    }
    if let Ok(t) = target.canonicalize() {
        for p in protect {
            if p.canonicalize().is_ok_and(|p| p.starts_with(&t)) {
                return Err(Error::exists(format!(
                    "{} lies inside --out {}; a run never replaces its own job file",
                    p.display(),
                    target.display()
                )));
            }
        }
    }
    let busy = match std::fs::read_dir(target) {
        Ok(mut it) => it.next().is_some(),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => false,
        Err(e) => return Err(Error::io(target, e)),
    };
    if !busy {
        return Ok(());
    }
    if !is_weir_output(target) {
        return Err(Error::exists(format!(
            "{} is not empty and holds no weir manifest; --force replaces only weir's own output",
            target.display()
        )));
    }
    if !force {
        return Err(Error::exists(format!(
            "{} holds an earlier weir output; choose another --out or add --force to replace it",
            target.display()
        )));
    }
    Ok(())
}

/// True when process `pid` is running (Linux `/proc`; elsewhere assumed running, so a
/// live run's directory is never removed).
fn alive(pid: u32) -> bool {
    let proc = Path::new("/proc");
    !proc.is_dir() || proc.join(pid.to_string()).exists()
}

/// Removes temporary directories of earlier runs into `parent/name` whose process is gone.
fn remove_stale(parent: &Path, name: &str) -> Vec<PathBuf> {
    let prefix = format!(".{name}{PARTIAL}");
    let Ok(entries) = std::fs::read_dir(parent) else {
        return Vec::new();
    };
    let mut removed = Vec::new();
    for e in entries.flatten() {
        let file = e.file_name().to_string_lossy().to_string();
        let Some(rest) = file.strip_prefix(&prefix) else {
            continue;
        };
        let pid = rest.split('.').next().and_then(|p| p.parse::<u32>().ok());
        if pid.is_some_and(|p| p != std::process::id() && !alive(p))
            && std::fs::remove_dir_all(e.path()).is_ok()
        {
            removed.push(e.path());
        }
    }
    removed
}

impl OutDir {
    /// Starts a directory that will become `target`; `protect` lists files (the job file)
    /// that must not lie inside it.
    pub fn create(target: &Path, force: bool, protect: &[&Path]) -> Result<OutDir> {
        check_target(target, force, protect)?;
        let name = target
            .file_name()
            .ok_or_else(|| Error::input(format!("{}: not a directory name", target.display())))?
            .to_string_lossy()
            .to_string();
        let parent = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        std::fs::create_dir_all(&parent).map_err(|e| Error::io(&parent, e))?;
        let stale = remove_stale(&parent, &name);
        let tmp = parent.join(format!(".{name}{PARTIAL}{}", std::process::id()));
        if tmp.exists() {
            std::fs::remove_dir_all(&tmp).map_err(|e| Error::io(target, e))?;
        }
        std::fs::create_dir_all(&tmp).map_err(|e| Error::io(target, e))?;
        if let Ok(mut l) = LIVE.lock() {
            l.push(tmp.clone());
        }
        Ok(OutDir {
            target: target.to_path_buf(),
            tmp,
            committed: false,
            stale,
        })
    }

    /// Temporary directories of dead earlier runs that [`OutDir::create`] removed.
    pub fn stale_removed(&self) -> &[PathBuf] {
        &self.stale
    }

    /// Opens `rel` (a path relative to the directory, subfolders created) for writing.
    /// Only folders below the temporary directory are created, never the directory
    /// itself: once a signal has removed it, a worker still writing fails instead of
    /// bringing it back.
    pub fn file(&self, rel: &str) -> Result<OutFile> {
        let p = self.tmp.join(rel);
        let mut dir = self.tmp.clone();
        for part in Path::new(rel)
            .parent()
            .into_iter()
            .flat_map(Path::components)
        {
            dir.push(part);
            match std::fs::create_dir(&dir) {
                Err(e) if e.kind() != std::io::ErrorKind::AlreadyExists => {
                    return Err(Error::io(&self.shown_path(rel), e))
                }
                _ => {}
            }
        }
        let f = File::create(&p).map_err(|e| Error::io(&self.shown_path(rel), e))?;
        Ok(HashWriter::new(BufWriter::with_capacity(1 << 20, f)))
    }

    /// Writes a whole file and returns (bytes, sha256).
    pub fn write_all(&self, rel: &str, data: &[u8]) -> Result<(u64, String)> {
        let mut f = self.file(rel)?;
        f.write_all(data)
            .map_err(|e| Error::io(&self.shown_path(rel), e))?;
        f.finish().map_err(|e| Error::io(&self.shown_path(rel), e))
    }

    /// The path a file will have once the directory is in place (for error messages,
    /// which never show the temporary directory).
    pub fn shown_path(&self, rel: &str) -> PathBuf {
        self.target.join(rel)
    }

    /// Moves the finished directory into place, replacing an existing target.
    pub fn commit(mut self) -> Result<()> {
        let old = self.tmp.with_extension("old");
        let had_target = self.target.exists();
        if had_target {
            std::fs::rename(&self.target, &old).map_err(|e| Error::io(&self.target, e))?;
        }
        std::fs::rename(&self.tmp, &self.target).map_err(|e| Error::io(&self.target, e))?;
        unregister(&self.tmp);
        self.committed = true;
        if had_target {
            std::fs::remove_dir_all(&old).map_err(|e| Error::io(&self.target, e))?;
        }
        Ok(())
    }
}

impl Drop for OutDir {
    fn drop(&mut self) {
        if !self.committed {
            // Best effort: a leftover hidden directory is harmless, a half target is not;
            // the next run into the same target removes what is left.
            let _ = std::fs::remove_dir_all(&self.tmp);
            unregister(&self.tmp);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sha256_of_abc() {
        // FIPS 180-2, Appendix B.1: SHA-256("abc").
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn large_writes_hashed_beside_the_write_give_the_digest_of_the_whole() {
        let data: Vec<u8> = (0..3 * PARALLEL_HASH_BYTES as u32 + 77)
            .map(|i| (i.wrapping_mul(2_654_435_761) >> 11) as u8)
            .collect();
        let mut w = HashWriter::new(Vec::new());
        let (small, rest) = data.split_at(100);
        w.write_all(small).unwrap();
        w.write_all(rest).unwrap();
        let (bytes, sha) = w.finish().unwrap();
        assert_eq!(bytes, data.len() as u64);
        assert_eq!(sha, sha256_hex(&data));
    }

    #[test]
    fn failed_run_leaves_nothing_and_commit_replaces() {
        let base = std::env::temp_dir().join(format!("weir-outdir-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&base);
        let target = base.join("out");
        {
            let d = OutDir::create(&target, false, &[]).unwrap();
            d.write_all("a/b.txt", b"x").unwrap();
        }
        assert!(!target.exists());
        let manifest = crate::manifest::Manifest {
            format_version: crate::manifest::MANIFEST_FORMAT_VERSION,
            tool_version: "0".into(),
            job: serde_json::Value::Null,
            word_bits: 8,
            files: Vec::new(),
        };
        let d = OutDir::create(&target, false, &[]).unwrap();
        d.write_all("manifest.json", manifest.to_json().as_bytes())
            .unwrap();
        d.write_all("f.txt", b"1").unwrap();
        d.commit().unwrap();
        assert!(OutDir::create(&target, false, &[]).is_err());
        let d = OutDir::create(&target, true, &[]).unwrap();
        d.write_all("g.txt", b"2").unwrap();
        d.commit().unwrap();
        assert!(!target.join("f.txt").exists() && target.join("g.txt").exists());
        // Without a manifest, --force refuses: the directory is not weir's.
        assert!(OutDir::create(&target, true, &[]).is_err());
        let _ = std::fs::remove_dir_all(&base);
    }
}

#[cfg(test)]
mod guard_tests {
    use super::*;

    fn base(name: &str) -> PathBuf {
        let b = std::env::temp_dir().join(format!("weir-guard-{}-{name}", std::process::id()));
        let _ = std::fs::remove_dir_all(&b);
        std::fs::create_dir_all(&b).unwrap();
        b
    }

    #[test]
    fn force_never_replaces_a_file_or_foreign_directory_or_the_job() {
        let b = base("force");
        let file = b.join("copy.toml");
        std::fs::write(&file, "x").unwrap();
        let e = OutDir::create(&file, true, &[&file]).err().unwrap();
        assert!(e.to_string().contains("not a directory"), "{e}");
        assert_eq!(std::fs::read(&file).unwrap(), b"x");
        let ft = b.join("ft");
        std::fs::create_dir_all(&ft).unwrap();
        let job = ft.join("job.toml");
        std::fs::write(&job, "j").unwrap();
        std::fs::write(ft.join("notes.txt"), "n").unwrap();
        let e = OutDir::create(&ft, true, &[&job]).err().unwrap();
        assert!(e.to_string().contains("job file"), "{e}");
        let e = OutDir::create(&ft, true, &[]).err().unwrap();
        assert!(e.to_string().contains("no weir manifest"), "{e}");
        assert!(job.exists() && ft.join("notes.txt").exists());
        let _ = std::fs::remove_dir_all(&b);
    }

    #[test]
    fn stale_partials_of_dead_processes_are_removed_live_ones_kept() {
        let b = base("stale");
        // Process ids above the kernel's pid_max (at most 2^22 on Linux) are never live.
        let dead = b.join(format!(".out{PARTIAL}4194399"));
        std::fs::create_dir_all(dead.join("input")).unwrap();
        // Process 1 (init) is always running: its directory stays.
        let mine = b.join(format!(".out{PARTIAL}1"));
        std::fs::create_dir_all(&mine).unwrap();
        let d = OutDir::create(&b.join("out"), false, &[]).unwrap();
        assert_eq!(d.stale_removed(), std::slice::from_ref(&dead));
        assert!(!dead.exists() && mine.exists());
        drop(d);
        let _ = std::fs::remove_dir_all(&b);
    }
}
