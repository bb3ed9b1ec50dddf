//! The command line: parses flags, calls the library, prints tables and sets the exit code
//! (0 ok, 1 mismatch, 2 bad input or usage, 3 a file-system failure such as a full disk or
//! a denied permission, 130/143 stopped by SIGINT/SIGTERM). Nothing below this module
//! prints or exits.

/// Prints to standard output like `println!`, but a closed pipe (`weir inspect | head`)
/// ends the program quietly instead of panicking.
macro_rules! say {
    ($($t:tt)*) => {
        $crate::cli::emit(&format!($($t)*))
    };
}

pub mod args;
mod bench;
mod bench_join;
mod check;
mod gen;
mod gen_join;
mod plan;
mod report;
mod run;

use std::process::ExitCode;

use clap::Parser;
use indicatif::{ProgressBar, ProgressStyle};

use args::{Cli, Command};

/// What a command reports back to `main`.
pub enum Outcome {
    /// Success.
    Ok,
    /// The command ran and found a difference (check, inspect).
    Mismatch,
}

/// Set once a signal arrived: the signal thread owns the exit from then on.
static STOPPING: std::sync::atomic::AtomicBool = std::sync::atomic::AtomicBool::new(false);

/// Waits for the signal thread's exit when a signal arrived, so that an error caused by
/// the partial output vanishing under a running command does not exit first.
fn yield_to_signal() {
    while STOPPING.load(std::sync::atomic::Ordering::SeqCst) {
        std::thread::sleep(std::time::Duration::from_millis(50));
    }
}

/// On SIGINT or SIGTERM: removes the partial output and exits 130 (128 + 2) or 143
/// (128 + 15).
fn on_signals() {
    use signal_hook::consts::{SIGINT, SIGTERM};
    let Ok(mut signals) = signal_hook::iterator::Signals::new([SIGINT, SIGTERM]) else {
        return;
    };
    std::thread::spawn(move || {
        if let Some(sig) = signals.forever().next() {
            STOPPING.store(true, std::sync::atomic::Ordering::SeqCst);
            let removed = weir::job::outdir::discard_partials();
            let what = if sig == SIGINT {
                "interrupted"
            } else {
                "terminated"
            };
            if removed > 0 {
                eprintln!("weir: {what}; the partial output was removed, nothing was written");
            } else {
                eprintln!("weir: {what}");
            }
            std::process::exit(128 + sig);
        }
    });
}

/// Parses arguments, runs the command and maps the result to an exit code.
pub fn main() -> ExitCode {
    on_signals();
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    let result = dispatch(cli.command);
    yield_to_signal();
    match result {
        Ok(Outcome::Ok) => ExitCode::SUCCESS,
        Ok(Outcome::Mismatch) => ExitCode::from(1),
        Err(e) => {
            eprintln!("weir: error: {e}");
            match e.kind() {
                weir::ErrorKind::Io => ExitCode::from(3),
                _ => ExitCode::from(2),
            }
        }
    }
}

fn dispatch(cmd: Command) -> weir::Result<Outcome> {
    match cmd {
        Command::Run(a) => run::run(a),
        Command::Demo(a) => run::demo(a),
        Command::Inspect(a) => check::inspect(a),
        Command::Check(a) => check::check(a),
        Command::Gen(a) => gen::gen(a),
        Command::Calibrate(a) => bench::calibrate(a),
        Command::Bench(a) => bench::bench(a),
        Command::Plan(a) => plan::plan(a),
        Command::Report(a) => report::report(a),
    }
}

/// Writes `text` and a newline to standard output; exits with success when the reader
/// has gone away (a broken pipe is not an error of ours).
pub fn emit(text: &str) {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    if let Err(e) = writeln!(out, "{text}").and_then(|()| out.flush()) {
        if e.kind() == std::io::ErrorKind::BrokenPipe {
            std::process::exit(0);
        }
        eprintln!("weir: error: writing to standard output: {e}");
        std::process::exit(2);
    }
}

/// Sets the worker thread count for the whole process.
pub fn set_threads(threads: Option<usize>) -> weir::Result<()> {
    if let Some(n) = threads {
        if n == 0 {
            return Err(weir::Error::input("--threads must be at least 1"));
        }
        rayon::ThreadPoolBuilder::new()
            .num_threads(n)
            .build_global()
            .map_err(|e| weir::Error::input(format!("--threads {n}: {e}")))?;
    }
    Ok(())
}

/// A progress bar on stderr (drawn only on a terminal).
pub fn progress(total: u64, what: &str) -> ProgressBar {
    let pb = ProgressBar::new(total);
    pb.set_style(
        ProgressStyle::with_template("{msg:>12} [{bar:30}] {pos}/{len} {elapsed_precise}")
            .expect("valid template")
            .progress_chars("=> "),
    );
    pb.set_message(what.to_string());
    pb
}
