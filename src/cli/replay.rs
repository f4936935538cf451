//! `slackmeter replay`: a recording in the live view, paced at real time × speed.

use std::path::PathBuf;

use super::design::DesignArgs;
use super::error::{CliResult, Outcome};
use super::live::{ViewFiles, show};
use crate::record::Recording;
use crate::record::format::ChunkKind;
use crate::session::SourceSpec;

/// Options of `replay`.
#[derive(clap::Args, Debug)]
pub struct ReplayArgs {
    /// The recording.
    pub file: PathBuf,
    /// The design the slack is shown against.
    #[command(flatten)]
    pub design: DesignArgs,
    /// Speed factor (1 = real time), e.g. 2, 2.0 or 2x.
    #[arg(long, default_value = "1", value_parser = speed_factor)]
    pub speed: f64,
}

/// `slackmeter replay`.
pub fn run(a: ReplayArgs) -> CliResult<Outcome> {
    let library = a.design.library()?;
    let mut rec = Recording::open(&a.file)?;
    let header = rec.parsed.header.clone();
    let t0 = header.start_unix_ns;
    // the marks' times, for `n` (a damaged end stops the scan; the replay reports it)
    let mut replay_marks = Vec::new();
    while let Ok(Some(c)) = rec.chunk_reader().next_chunk() {
        if c.kind == ChunkKind::Mark {
            replay_marks.push(c.host_ns.saturating_sub(t0) as f64 * 1e-9);
        }
    }
    let design = a.design.or_embedded(&header, &a.file, &library)?;
    let spec = SourceSpec::Replay {
        path: a.file.clone(),
        speed: a.speed,
    };
    let files = ViewFiles {
        replay_marks,
        ..ViewFiles::default()
    };
    show(
        spec,
        a.file.display().to_string(),
        design,
        library,
        files,
        "`slackmeter report FILE` (the figures as text) or `slackmeter export`",
    )
}

/// A speed factor: a positive number, with or without a trailing `x` (`2`, `2.0`, `2x`, `0.5×`).
pub fn speed_factor(s: &str) -> Result<f64, String> {
    let t = s.trim();
    let t = t.strip_suffix(['x', 'X', '×']).map_or(t, str::trim_end);
    match t.parse::<f64>() {
        Ok(v) if v > 0.0 && v.is_finite() => Ok(v),
        _ => Err(format!(
            "`{s}` is not a speed: give a positive factor, e.g. 2, 0.5 or 4x"
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::speed_factor;

    #[test]
    fn speed_takes_a_trailing_x() {
        for (s, v) in [
            ("2", 2.0),
            ("2.0", 2.0),
            ("2x", 2.0),
            ("0.5X", 0.5),
            ("4 ×", 4.0),
        ] {
            assert_eq!(speed_factor(s), Ok(v), "{s}");
        }
        for s in ["0", "-1", "x", "fast", "inf", "NaN"] {
            assert!(speed_factor(s).is_err(), "{s}");
        }
    }
}
