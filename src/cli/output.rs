//! What a command writes: files (never one of its inputs, never an existing file unless the
//! user passes `--force`, and never an input even then), `-` for standard output where a stream
//! makes sense, and standard output itself (a closed pipe ends the command quietly).

use std::collections::VecDeque;
use std::fs::{File, OpenOptions};
use std::io::{IsTerminal, Write};
use std::path::Path;
use std::time::{Duration, Instant};

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

/// The flag every writing command takes to write over a file that exists (`--replace` is kept
/// as a hidden alias).
pub const FORCE_HINT: &str = "choose another name, or pass --force to write over it";

/// `--force`, the one flag of every command that writes files (`--replace` is a hidden alias).
#[derive(clap::Args, Debug, Clone, Copy, Default)]
pub struct ForceArgs {
    /// Write over output files that exist (never over this command's own input).
    #[arg(long, alias = "replace")]
    pub force: bool,
}

/// Refuse an output folder that exists and holds anything, unless `force`.
pub fn check_folder(dir: &Path, force: bool) -> CliResult<()> {
    let busy = std::fs::read_dir(dir).is_ok_and(|mut d| d.next().is_some());
    if busy && !force {
        return Err(CliError::input(miette!(
            help = "choose another folder, or pass --force to write the plots into it (only earlier plots are written over)",
            "{} exists and is not empty: nothing was written into it",
            dir.display()
        )));
    }
    Ok(())
}

/// Refuse to write over one of the command's own inputs.
fn refuse_input(path: &Path, inputs: &[&Path]) -> CliResult<()> {
    if let Some(input) = inputs.iter().find(|i| same_file(path, i)) {
        return Err(CliError::input(miette!(
            help = "write the output to another path",
            "{} is this command's input {}: it is not written over",
            path.display(),
            input.display()
        )));
    }
    Ok(())
}

/// Refuse an existing output file unless `force`; with `force` a regular file is removed
/// first, so a writer that creates its file new (a recording) can write there.
pub fn clear_for(path: &Path, inputs: &[&Path], force: bool) -> CliResult<()> {
    refuse_input(path, inputs)?;
    let Ok(meta) = std::fs::symlink_metadata(path) else {
        return Ok(());
    };
    if !force {
        return Err(CliError::input(miette!(
            help = FORCE_HINT,
            "{} exists: it is left as it is",
            path.display()
        )));
    }
    if !meta.is_file() {
        return Err(CliError::input(miette!(
            help = "choose another name",
            "{} exists and is not a regular file: it is left as it is, even with --force",
            path.display()
        )));
    }
    std::fs::remove_file(path).map_err(|e| {
        CliError::runtime(miette!(
            "cannot write over {}: {}",
            path.display(),
            super::error::io_words(&e)
        ))
    })
}

/// Whether an output path means standard output.
pub fn is_stdout(path: &Path) -> bool {
    path.as_os_str() == "-"
}

/// Open `path` for writing, or standard output when it is `-`: the stream behind `--csv -`.
pub fn create_or_stdout(path: &Path, inputs: &[&Path], force: bool) -> CliResult<Box<dyn Write>> {
    if is_stdout(path) {
        return Ok(Box::new(std::io::stdout().lock()));
    }
    Ok(Box::new(create(path, inputs, force)?))
}

/// Refuse binary output to a terminal: it would fill the screen with control bytes.
pub fn refuse_binary_terminal(what: &str, hint: &str) -> CliResult<()> {
    if std::io::stdout().is_terminal() {
        return Err(CliError::input(miette!(
            help = hint.to_string(),
            "{what} is binary and standard output is a terminal: nothing was written"
        )));
    }
    Ok(())
}

/// `println!` for commands: one line to standard output, `?` on a closed pipe (quiet end).
macro_rules! outln {
    ($($t:tt)*) => {
        $crate::cli::output::line(format_args!($($t)*))?
    };
}
pub(crate) use outln;

/// One line to standard output; a reader that stopped reading ends the command quietly.
pub fn line(text: std::fmt::Arguments<'_>) -> CliResult<()> {
    let mut out = std::io::stdout().lock();
    writeln!(out, "{text}").map_err(CliError::io("standard output"))
}

/// Text to standard output as it is; a closed pipe ends the command quietly.
pub fn text(text: &str) -> CliResult<()> {
    let mut out = std::io::stdout().lock();
    out.write_all(text.as_bytes())
        .and_then(|()| out.flush())
        .map_err(CliError::io("standard output"))
}

/// The width text output wraps at: `COLUMNS` when set (e.g. `COLUMNS=200` for a wide log), the
/// terminal's when standard output is one, 100 columns otherwise (a file, a pipe, a log).
pub fn width() -> usize {
    if let Some(cols) = std::env::var("COLUMNS")
        .ok()
        .and_then(|c| c.trim().parse::<usize>().ok())
        .filter(|&c| c >= 40)
    {
        return cols;
    }
    if std::io::stdout().is_terminal()
        && let Ok((cols, _)) = crossterm::terminal::size()
        && cols >= 40
    {
        return usize::from(cols);
    }
    100
}

/// `text` with every line longer than `width` columns wrapped at spaces; a continued line is
/// indented four columns past its own indentation, so tables and lists stay readable (a word
/// longer than the width, such as a long path, is kept whole on its own line).
pub fn wrapped(text: &str, width: usize) -> String {
    let mut out = String::with_capacity(text.len() + text.len() / 16);
    for line in text.split_inclusive('\n') {
        let (body, end) = match line.strip_suffix('\n') {
            Some(b) => (b, "\n"),
            None => (line, ""),
        };
        if textwrap::core::display_width(body) <= width {
            out.push_str(line);
            continue;
        }
        let lead = body.len() - body.trim_start().len();
        let indent = format!("{}    ", &body[..lead]);
        let opts = textwrap::Options::new(width)
            .subsequent_indent(&indent)
            .break_words(false)
            .word_separator(textwrap::WordSeparator::AsciiSpace)
            .word_splitter(textwrap::WordSplitter::NoHyphenation);
        out.push_str(&textwrap::fill(body, opts));
        out.push_str(end);
    }
    out
}

/// A text report to standard output, wrapped to [`width`]; a closed pipe ends quietly.
pub fn report_text(text: &str) -> CliResult<()> {
    self::text(&wrapped(text, width()))
}

/// `n` and its noun, singular or plural: "1 reconnect", "2 reconnects".
pub fn count(n: impl Into<u64>, noun: &str) -> String {
    match n.into() {
        1 => format!("1 {noun}"),
        n => format!("{n} {noun}s"),
    }
}

/// How long the recent window of the progress line's rates is.
const RATE_WINDOW_S: f64 = 5.0;
/// How often a progress line is printed when standard error is no terminal (a log).
const LOG_EVERY: Duration = Duration::from_secs(10);

/// A progress line on standard error: on a terminal redrawn in place (carriage return, cut to
/// the width), into a log one line every ten seconds; its rates are over the last five
/// seconds, so an outage shows as a falling rate, not as an average over the whole run.
pub struct Progress {
    tty: bool,
    width: usize,
    every: Duration,
    last: Option<Instant>,
    drawn: bool,
    recent: VecDeque<(f64, u64, u64)>,
}

impl Progress {
    /// A progress line redrawn every `every` on a terminal.
    pub fn new(every: Duration) -> Progress {
        let tty = std::io::stderr().is_terminal();
        let width = if tty {
            match crossterm::terminal::size() {
                Ok((c, _)) if c >= 20 => usize::from(c),
                _ => 80,
            }
        } else {
            usize::MAX
        };
        Progress::with(tty, width, if tty { every } else { LOG_EVERY })
    }

    fn with(tty: bool, width: usize, every: Duration) -> Progress {
        Progress {
            tty,
            width,
            every,
            last: None,
            drawn: false,
            recent: VecDeque::from([(0.0, 0, 0)]),
        }
    }

    /// Whether a line is due now (the first after one period).
    pub fn due(&mut self) -> bool {
        let now = Instant::now();
        match self.last {
            Some(t) if now.duration_since(t) < self.every => false,
            Some(_) => {
                self.last = Some(now);
                true
            }
            None => {
                self.last = Some(now);
                false
            }
        }
    }

    /// Note the totals at `t_s` (seconds into the run); the rates per second of both over the
    /// recent window.
    pub fn rates(&mut self, t_s: f64, a: u64, b: u64) -> (f64, f64) {
        self.recent.push_back((t_s, a, b));
        while self.recent.len() > 2
            && self
                .recent
                .get(1)
                .is_some_and(|x| t_s - x.0 >= RATE_WINDOW_S)
        {
            self.recent.pop_front();
        }
        let (t0, a0, b0) = self.recent.front().copied().unwrap_or((t_s, a, b));
        let dt = t_s - t0;
        if dt <= 0.0 {
            return (0.0, 0.0);
        }
        (
            a.saturating_sub(a0) as f64 / dt,
            b.saturating_sub(b0) as f64 / dt,
        )
    }

    /// The text a line shows: cut to the terminal's width on a terminal.
    fn fit(&self, line: &str) -> String {
        let line = line.trim();
        if self.tty && line.chars().count() >= self.width {
            let mut cut: String = line.chars().take(self.width.saturating_sub(2)).collect();
            cut.push('…');
            cut
        } else {
            line.to_string()
        }
    }

    /// Show `line`: in place on a terminal, as a new line into a log.
    pub fn show(&mut self, line: &str) {
        let text = self.fit(line);
        if self.tty {
            eprint!("\r{text}\x1b[K");
            self.drawn = true;
        } else {
            eprintln!("{text}");
        }
    }

    /// End the line in place, so a message that follows starts on its own line.
    pub fn break_line(&mut self) {
        if self.drawn {
            eprintln!();
            self.drawn = false;
        }
    }

    /// The last line, whole (wrapped by the terminal if it must), ending the progress.
    pub fn finish(&mut self, line: &str) {
        if self.drawn {
            eprint!("\r\x1b[K");
            self.drawn = false;
        }
        eprintln!("{}", line.trim());
    }
}

/// Open `path` for writing, refusing an input of this command and, unless `force`, any file
/// already there (created atomically, so a file appearing meanwhile is not replaced either).
pub fn create(path: &Path, inputs: &[&Path], force: bool) -> CliResult<File> {
    refuse_input(path, inputs)?;
    let mut o = OpenOptions::new();
    o.write(true);
    if force {
        o.create(true).truncate(true);
    } else {
        o.create_new(true);
    }
    o.open(path).map_err(|e| {
        if e.kind() == std::io::ErrorKind::AlreadyExists {
            CliError::input(miette!(
                help = FORCE_HINT,
                "{} exists: it is left as it is",
                path.display()
            ))
        } else {
            CliError::runtime(miette!(
                "cannot create {}: {}",
                path.display(),
                super::error::io_words(&e)
            ))
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    // common practice, no source: a rate over a recent window
    #[test]
    fn rates_are_over_the_recent_window() {
        let mut p = Progress::with(false, usize::MAX, Duration::from_secs(1));
        for t in 0..=10u64 {
            p.rates(t as f64, t * 1000, t);
        }
        // an outage: nothing arrives for 10 s; the whole-run average would still say 500/s
        let mut last = (1.0, 1.0);
        for t in 11..=20u64 {
            last = p.rates(t as f64, 10_000, 10);
        }
        assert_eq!(last, (0.0, 0.0));
        let (a, b) = p.rates(21.0, 15_000, 15);
        assert!(a > 0.0 && a <= 5000.0 && b > 0.0, "{a} {b}");
    }

    #[test]
    fn a_terminal_line_fits_its_width() {
        let p = Progress::with(true, 30, Duration::from_secs(1));
        let line = p.fit(&"x".repeat(100));
        assert_eq!(line.chars().count(), 29);
        assert_eq!(p.fit("short  "), "short");
        assert_eq!(count(1u32, "reconnect"), "1 reconnect");
        assert_eq!(count(0u32, "reconnect"), "0 reconnects");
        assert_eq!(count(2u32, "reconnect"), "2 reconnects");
    }

    // common practice, no source: 100 columns when the width is unknown
    #[test]
    fn long_lines_wrap_with_a_hanging_indent() {
        let long = format!("  head {}\nshort\n", "word ".repeat(60));
        let w = wrapped(&long, 40);
        assert!(w.lines().all(|l| l.chars().count() <= 40), "{w}");
        assert!(w.lines().nth(1).unwrap().starts_with("      word"), "{w}");
        assert!(w.ends_with("\nshort\n"), "{w}");
        assert_eq!(wrapped("a\nb", 40), "a\nb");
        // the words are all kept, in order
        let words = |s: &str| s.split_whitespace().map(str::to_string).collect::<Vec<_>>();
        assert_eq!(words(&w), words(&long));
    }

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
