//! Building and running C programs against the generated C library: the library (`ltrm.h`, `ltrm.c`)
//! written into a scratch folder with the test's own sources, compiled with the machine's C compiler (`CC`,
//! else `cc`) under `-std=c99 -Wall -Wextra -Werror -pedantic`, and run with text on stdin.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use logtrim_host::emit::c;

/// A scratch folder with the library in it, removed when dropped.
pub struct CBuild {
    pub dir: PathBuf,
    cc: String,
}

impl CBuild {
    /// A folder for `label` with `ltrm.h` and `ltrm.c`, or `None` (after saying so) when there is no C
    /// compiler on this machine.
    pub fn new(label: &str) -> Option<CBuild> {
        let cc = std::env::var("CC").unwrap_or_else(|_| "cc".into());
        if Command::new(&cc).arg("--version").output().is_err() {
            eprintln!("SKIPPED: no C compiler ({cc}) found; the generated C was not compiled");
            return None;
        }
        // One folder per build: the tests of one binary run in parallel, each with its own.
        static NEXT: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
        let k = NEXT.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        let dir = std::env::temp_dir().join(format!("logtrim-c-{label}-{}-{k}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(dir.join("ltrm.h"), c::library_header()).unwrap();
        std::fs::write(dir.join("ltrm.c"), c::library_source()).unwrap();
        Some(CBuild { dir, cc })
    }

    /// Writes a file into the folder.
    pub fn write(&self, name: &str, text: &[u8]) -> PathBuf {
        let p = self.dir.join(name);
        std::fs::write(&p, text).unwrap();
        p
    }

    /// Compiles the library with `sources` (files in the folder) into an executable.
    pub fn compile(&self, sources: &[&str]) -> PathBuf {
        let exe = self.dir.join("driver");
        let mut cmd = Command::new(&self.cc);
        cmd.args(["-std=c99", "-Wall", "-Wextra", "-Werror", "-pedantic", "-O1", "-o"]).arg(&exe);
        cmd.arg(self.dir.join("ltrm.c"));
        for s in sources {
            cmd.arg(self.dir.join(s));
        }
        let out = cmd.output().unwrap();
        assert!(out.status.success(), "cc failed:\n{}", String::from_utf8_lossy(&out.stderr));
        exe
    }

    /// Runs an executable with arguments and stdin; its stdout.
    pub fn run(exe: &Path, args: &[&str], stdin: String) -> String {
        let mut child =
            Command::new(exe).args(args).stdin(Stdio::piped()).stdout(Stdio::piped()).spawn().unwrap();
        // Feed stdin from another thread: the driver's output would otherwise fill its pipe and stall both.
        let mut w = child.stdin.take().unwrap();
        let feeder = std::thread::spawn(move || {
            use std::io::Write;
            w.write_all(stdin.as_bytes())
        });
        let out = child.wait_with_output().unwrap();
        feeder.join().unwrap().unwrap();
        assert!(out.status.success(), "the C driver failed: {}", String::from_utf8_lossy(&out.stderr));
        String::from_utf8(out.stdout).unwrap()
    }
}

impl Drop for CBuild {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.dir);
    }
}
