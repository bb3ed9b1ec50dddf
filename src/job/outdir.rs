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

impl<W: Write> Write for HashWriter<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let n = self.inner.write(buf)?;
        self.hash.update(&buf[..n]);
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
}

/// Refuses a target that exists and is not empty unless `force`.
pub fn check_target(target: &Path, force: bool) -> Result<()> {
    if force {
        return Ok(());
    }
    let busy = match std::fs::read_dir(target) {
        Ok(mut it) => it.next().is_some(),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => false,
        Err(_) => target.exists(),
    };
    if busy {
        return Err(Error::exists(format!(
            "{} exists and is not empty; choose another --out or add --force to replace it",
            target.display()
        )));
    }
    Ok(())
}

impl OutDir {
    /// Starts a directory that will become `target`.
    pub fn create(target: &Path, force: bool) -> Result<OutDir> {
        check_target(target, force)?;
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
        let tmp = parent.join(format!(".{name}.weir-partial-{}", std::process::id()));
        if tmp.exists() {
            std::fs::remove_dir_all(&tmp).map_err(|e| Error::io(&tmp, e))?;
        }
        std::fs::create_dir_all(&tmp).map_err(|e| Error::io(&tmp, e))?;
        Ok(OutDir {
            target: target.to_path_buf(),
            tmp,
            committed: false,
        })
    }

    /// Opens `rel` (a path relative to the directory, subfolders created) for writing.
    pub fn file(&self, rel: &str) -> Result<OutFile> {
        let p = self.tmp.join(rel);
        if let Some(dir) = p.parent() {
            std::fs::create_dir_all(dir).map_err(|e| Error::io(dir, e))?;
        }
        let f = File::create(&p).map_err(|e| Error::io(&p, e))?;
        Ok(HashWriter::new(BufWriter::with_capacity(1 << 20, f)))
    }

    /// Writes a whole file and returns (bytes, sha256).
    pub fn write_all(&self, rel: &str, data: &[u8]) -> Result<(u64, String)> {
        let mut f = self.file(rel)?;
        f.write_all(data)
            .map_err(|e| Error::io(&self.tmp.join(rel), e))?;
        f.finish().map_err(|e| Error::io(&self.tmp.join(rel), e))
    }

    /// The temporary path (for error messages).
    pub fn tmp_path(&self, rel: &str) -> PathBuf {
        self.tmp.join(rel)
    }

    /// Moves the finished directory into place, replacing an existing target.
    pub fn commit(mut self) -> Result<()> {
        let old = self.tmp.with_extension("old");
        let had_target = self.target.exists();
        if had_target {
            std::fs::rename(&self.target, &old).map_err(|e| Error::io(&self.target, e))?;
        }
        std::fs::rename(&self.tmp, &self.target).map_err(|e| Error::io(&self.target, e))?;
        if had_target {
            std::fs::remove_dir_all(&old).map_err(|e| Error::io(&old, e))?;
        }
        self.committed = true;
        Ok(())
    }
}

impl Drop for OutDir {
    fn drop(&mut self) {
        if !self.committed {
            // Best effort: a leftover hidden directory is harmless, a half target is not.
            let _ = std::fs::remove_dir_all(&self.tmp);
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
    fn failed_run_leaves_nothing_and_commit_replaces() {
        let base = std::env::temp_dir().join(format!("weir-outdir-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&base);
        let target = base.join("out");
        {
            let d = OutDir::create(&target, false).unwrap();
            d.write_all("a/b.txt", b"x").unwrap();
        }
        assert!(!target.exists());
        let d = OutDir::create(&target, false).unwrap();
        d.write_all("f.txt", b"1").unwrap();
        d.commit().unwrap();
        assert!(OutDir::create(&target, false).is_err());
        let d = OutDir::create(&target, true).unwrap();
        d.write_all("g.txt", b"2").unwrap();
        d.commit().unwrap();
        assert!(!target.join("f.txt").exists() && target.join("g.txt").exists());
        let _ = std::fs::remove_dir_all(&base);
    }
}
