//! Shared helpers for behaviour tests: temporary directories and running the binary.

#![allow(dead_code)]

use std::path::{Path, PathBuf};
use std::process::Command;

/// A fresh, empty temporary directory for one test, removed when dropped.
pub struct TempDir(pub PathBuf);

impl TempDir {
    /// A directory unique to this process and `name`.
    pub fn new(name: &str) -> TempDir {
        let p = std::env::temp_dir().join(format!("weir-test-{}-{name}", std::process::id()));
        let _ = std::fs::remove_dir_all(&p);
        std::fs::create_dir_all(&p).expect("create temp dir");
        TempDir(p)
    }

    /// A path inside the directory.
    pub fn join(&self, rel: &str) -> PathBuf {
        self.0.join(rel)
    }

    /// Writes a file inside the directory and returns its path.
    pub fn write(&self, rel: &str, text: &str) -> PathBuf {
        let p = self.join(rel);
        if let Some(d) = p.parent() {
            std::fs::create_dir_all(d).expect("create dir");
        }
        std::fs::write(&p, text).expect("write file");
        p
    }
}

impl Drop for TempDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// What a run of the binary printed and returned.
pub struct Output {
    /// Exit code.
    pub code: i32,
    /// Standard output.
    pub stdout: String,
    /// Standard error.
    pub stderr: String,
}

/// Runs `weir` with `args` in `cwd`.
pub fn weir_in(cwd: &Path, args: &[&str]) -> Output {
    let out = Command::new(env!("CARGO_BIN_EXE_weir"))
        .args(args)
        .current_dir(cwd)
        .output()
        .expect("run weir");
    Output {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Runs `weir` with `args` in the repository root.
pub fn weir(args: &[&str]) -> Output {
    weir_in(Path::new(env!("CARGO_MANIFEST_DIR")), args)
}

/// A path inside the repository.
pub fn repo(rel: &str) -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join(rel)
}

/// Every file below `dir` as (relative path, bytes), sorted.
pub fn tree(dir: &Path) -> Vec<(String, Vec<u8>)> {
    fn walk(base: &Path, d: &Path, out: &mut Vec<(String, Vec<u8>)>) {
        for e in std::fs::read_dir(d).expect("read dir") {
            let p = e.expect("entry").path();
            if p.is_dir() {
                walk(base, &p, out);
            } else {
                let rel = p
                    .strip_prefix(base)
                    .expect("inside")
                    .to_string_lossy()
                    .replace('\\', "/");
                out.push((rel, std::fs::read(&p).expect("read")));
            }
        }
    }
    let mut out = Vec::new();
    walk(dir, dir, &mut out);
    out.sort();
    out
}

/// True when `program` can be started; panics instead of skipping when
/// `WEIR_REQUIRE_EXTERNAL=1`.
pub fn have(program: &str) -> bool {
    let ok = Command::new(program).arg("--version").output().is_ok()
        || Command::new(program).arg("-V").output().is_ok();
    if !ok {
        if std::env::var("WEIR_REQUIRE_EXTERNAL").as_deref() == Ok("1") {
            panic!("{program} not found and WEIR_REQUIRE_EXTERNAL=1");
        }
        println!("skipped: {program} not found");
    }
    ok
}
