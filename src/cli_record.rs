//! Command-line edge for recordings: `record` and `report`.

use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::sync::atomic::Ordering;
use std::time::{Duration, Instant};

use firmware_protocol::StreamDecoder;
use miette::{IntoDiagnostic, Result, miette};

use crate::budget::design::{DEMO_DESIGN, DEMO_NAME};
use crate::cli_probe::{SimModelArgs, build_model, interrupt_flag, pos_time};
use crate::link::{Link, LinkEvent, host_ns_now};
use crate::measure::{EngineConfig, Feed, NoObserver, Observer, Window};
use crate::record::{EmbeddedDesign, Header, Recorder, Recording, ReplayOptions};
use crate::sim::SimProbe;

/// Options of `record`.
#[derive(clap::Args, Debug)]
pub struct RecordArgs {
    /// Serial device of the probe (omit with --sim).
    pub port: Option<PathBuf>,
    /// Record the virtual probe (its flags as for `slackmeter sim`).
    #[arg(long)]
    pub sim: bool,
    /// The virtual probe's settings (with --sim).
    #[command(flatten)]
    pub model: SimModelArgs,
    /// The recording to write (refuses to overwrite), e.g. run.smrec.
    #[arg(short = 'o', long, value_name = "FILE")]
    pub output: PathBuf,
    /// Stop after this long, e.g. 30s (otherwise at Ctrl-C).
    #[arg(long, value_parser = pos_time)]
    pub duration: Option<f64>,
    /// A note stored in the file (repeatable).
    #[arg(long)]
    pub note: Vec<String>,
    /// A real probe's port options.
    #[command(flatten)]
    pub port_options: crate::cli_probe::PortArgs,
    /// With --sim: generate as fast as possible, host times following simulated time (for
    /// making files; the content is the same as a paced run).
    #[arg(long)]
    pub fast: bool,
}

fn header(a: &RecordArgs, source: String, sim: Option<serde_json::Value>) -> Result<Header> {
    let design = match &a.model.design {
        Some(p) => Some(EmbeddedDesign {
            file: p.display().to_string(),
            text: std::fs::read_to_string(p)
                .map_err(|e| miette!("cannot read design {}: {e}", p.display()))?,
        }),
        None if a.sim => Some(EmbeddedDesign {
            file: DEMO_NAME.into(),
            text: DEMO_DESIGN.into(),
        }),
        None => None,
    };
    Ok(Header {
        tool: concat!("slackmeter ", env!("CARGO_PKG_VERSION")).into(),
        host: std::fs::read_to_string("/etc/hostname")
            .map(|s| s.trim().to_string())
            .unwrap_or_else(|_| "unknown".into()),
        start_unix_ns: host_ns_now(),
        source,
        notes: a.note.clone(),
        design,
        sim,
    })
}

fn progress_line(
    path: &str,
    secs: f64,
    rec: crate::record::RecCounts,
    dec: &StreamDecoder,
) -> String {
    let c = dec.counters;
    format!(
        "\rrecording {path}: {secs:.1} s, {:.2} MB ({:.0} kB/s), {} frames ({:.0}/s), {} lost, {} CRC errors, backlog {} kB{}   ",
        rec.file_bytes as f64 / 1e6,
        rec.data_bytes as f64 / 1e3 / secs.max(1e-9),
        c.frames,
        c.frames as f64 / secs.max(1e-9),
        c.lost_frames,
        c.crc_errors,
        rec.backlog / 1000,
        if rec.dropped > 0 {
            format!(", RECORDER DROPPED {} bytes", rec.dropped)
        } else {
            String::new()
        }
    )
}

/// `slackmeter record`.
pub fn record_cmd(a: RecordArgs) -> Result<i32> {
    if a.sim == a.port.is_some() {
        return Err(miette!(
            help = "e.g. `slackmeter record --sim -o run.smrec --duration 10s` or `slackmeter record /dev/ttyUSB0 -o run.smrec`",
            "give either a PORT or --sim"
        ));
    }
    let stop = interrupt_flag();
    let path = a.output.display().to_string();
    let mut dec = StreamDecoder::new();
    let started = Instant::now();
    let deadline = a.duration.map(|ns| Duration::from_nanos(ns as u64));
    let mut last_print = Instant::now();
    let show = std::io::stderr().is_terminal() || std::env::var_os("SLACKMETER_PROGRESS").is_some();
    if a.sim {
        let (model, notes) = build_model(&a.model)?;
        let mut shown = model.clone();
        if let Some(f) = &mut shown.fault {
            f.by_vcc.clear();
        }
        let h = header(
            &a,
            format!("virtual probe, scenario {}", a.model.scenario),
            Some(serde_json::to_value(&shown).into_diagnostic()?),
        )?;
        let t0 = h.start_unix_ns;
        let rec = Recorder::create(&a.output, &h).map_err(miette::Report::new)?;
        let mut probe = SimProbe::new(model, notes);
        probe.start();
        let end_ns = deadline.map_or(f64::INFINITY, |d| d.as_nanos() as f64);
        if a.fast && !end_ns.is_finite() {
            return Err(miette!(
                help = "add --duration, e.g. --duration 10s",
                "--fast needs --duration"
            ));
        }
        loop {
            let target = if a.fast {
                (probe.now_ns() + 10e6).min(end_ns)
            } else {
                (started.elapsed().as_nanos() as f64).min(end_ns)
            };
            probe.run_until(target);
            if probe.now_ns() >= end_ns {
                probe.flush_all();
            }
            let bytes = std::mem::take(probe.output());
            if !bytes.is_empty() {
                dec.push(&bytes, |_| {});
                let host = if a.fast {
                    t0 + probe.now_ns() as u64
                } else {
                    host_ns_now()
                };
                rec.data(host, bytes);
            }
            if probe.now_ns() >= end_ns || stop.load(Ordering::Relaxed) {
                break;
            }
            if show && last_print.elapsed() >= Duration::from_secs(1) {
                last_print = Instant::now();
                eprint!(
                    "{}",
                    progress_line(&path, probe.now_ns() * 1e-9, rec.counts(), &dec)
                );
            }
            if !a.fast {
                std::thread::sleep(Duration::from_millis(5));
            }
        }
        let counts = rec.finish().into_diagnostic()?;
        eprintln!(
            "{}",
            progress_line(&path, probe.now_ns() * 1e-9, counts, &dec).trim_start_matches('\r')
        );
        return Ok(crate::cli::EXIT_OK);
    }
    let port = a.port.clone().expect("checked");
    let h = header(&a, format!("probe on {}", port.display()), None)?;
    let rec = Recorder::create(&a.output, &h).map_err(miette::Report::new)?;
    let mut link = Link::start(a.port_options.link_config(&port), 1024);
    loop {
        if stop.load(Ordering::Relaxed) || deadline.is_some_and(|d| started.elapsed() >= d) {
            break;
        }
        match link.events.try_recv() {
            Ok(LinkEvent::Data { host_ns, bytes }) => {
                dec.push(&bytes, |_| {});
                rec.data(host_ns, bytes);
            }
            Ok(LinkEvent::Connected { probe, reconnects }) => {
                if reconnects > 0 {
                    dec.reset_sequence();
                }
                rec.link(
                    host_ns_now(),
                    format!(
                        "{{\"event\":\"connected\",\"reconnects\":{reconnects},\"firmware\":{:?}}}",
                        probe.firmware
                    ),
                );
            }
            Ok(LinkEvent::Lost { reason }) => {
                eprintln!("\nlink lost: {reason}; recording goes on when it returns");
                rec.link(
                    host_ns_now(),
                    format!("{{\"event\":\"lost\",\"reason\":{reason:?}}}"),
                );
            }
            Ok(LinkEvent::Refused { what, reason }) => {
                eprintln!("\nprobe refused {what}: {reason}");
                rec.link(
                    host_ns_now(),
                    format!("{{\"event\":\"refused\",\"what\":{what:?},\"reason\":{reason:?}}}"),
                );
            }
            Ok(LinkEvent::Failed(e)) => {
                // a file that holds only its header (the probe never answered) is not kept
                if rec
                    .finish()
                    .is_ok_and(|c| c.data_bytes == 0 && c.marks == 0)
                {
                    let _ = std::fs::remove_file(&a.output);
                }
                return Err(miette::Report::new(e));
            }
            Ok(_) => {}
            Err(tokio::sync::mpsc::error::TryRecvError::Empty) => {
                std::thread::sleep(Duration::from_millis(5))
            }
            Err(_) => break,
        }
        if show && last_print.elapsed() >= Duration::from_secs(1) {
            last_print = Instant::now();
            eprint!(
                "{}",
                progress_line(&path, started.elapsed().as_secs_f64(), rec.counts(), &dec)
            );
        }
    }
    link.events.close();
    let counts = rec.finish().into_diagnostic()?;
    eprintln!(
        "{}",
        progress_line(&path, started.elapsed().as_secs_f64(), counts, &dec)
            .trim_start_matches('\r')
    );
    Ok(crate::cli::EXIT_OK)
}

/// Options of `report`.
#[derive(clap::Args, Debug)]
pub struct ReportArgs {
    /// The recording.
    pub file: PathBuf,
    /// Print the JSON document.
    #[arg(long, conflicts_with = "markdown")]
    pub json: bool,
    /// Print Markdown.
    #[arg(long)]
    pub markdown: bool,
    /// Analyse from this many seconds into the recording.
    #[arg(long, value_parser = pos_time_or_zero)]
    pub from: Option<f64>,
    /// Analyse up to this many seconds into the recording.
    #[arg(long, value_parser = pos_time)]
    pub to: Option<f64>,
    /// Also write SVG plots into this folder (histograms, TIE, rails over time).
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
    /// Judge the clock against this design (the design embedded in the recording otherwise).
    #[arg(long)]
    pub design: Option<PathBuf>,
    /// Do not judge against any design, even an embedded one.
    #[arg(long, conflicts_with = "design")]
    pub no_design: bool,
    /// Margin required over the worst-case budget, e.g. 20% (common practice, no source).
    #[arg(long, value_parser = crate::cli_probe::fraction, default_value = "20%")]
    pub guard_band: f64,
    /// Temperature to derate at (the design's otherwise).
    #[arg(long, value_parser = crate::cli_probe::temp_arg)]
    pub temp: Option<f64>,
}

fn pos_time_or_zero(s: &str) -> std::result::Result<f64, String> {
    crate::units::parse_time_ns(s)
        .map_err(|e| e.to_string())
        .and_then(|v| {
            if v >= 0.0 {
                Ok(v)
            } else {
                Err("must not be negative".into())
            }
        })
}

/// What `analyse` returns: the recording, the engine after the replay (with its observer), its
/// session snapshot and the replay summary.
pub type Analysis<O = NoObserver> = (
    Recording,
    Feed<O>,
    crate::measure::Snapshot,
    crate::record::ReplaySummary,
);

/// Replay a recording through the engine, watched by `observer` (plots; `NoObserver` else).
pub fn analyse<O: Observer>(
    file: &std::path::Path,
    opts: ReplayOptions,
    cfg: EngineConfig,
    observer: O,
) -> Result<Analysis<O>> {
    let mut rec = Recording::open(file).map_err(miette::Report::new)?;
    let mut feed = Feed::with_observer(cfg, observer);
    let bar = (std::io::stderr().is_terminal() && rec.len > 32 << 20).then(|| {
        let b = indicatif::ProgressBar::new(rec.len);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{msg} [{bar:40}] {bytes}/{total_bytes} ({eta})",
            )
            .expect("valid template"),
        );
        b.set_message("replaying");
        b
    });
    let sum = rec
        .replay(&mut feed, opts, |at| {
            if let Some(b) = &bar {
                b.set_position(at);
            }
        })
        .map_err(miette::Report::new)?;
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let snap = feed.engine.snapshot(Window::Session);
    Ok((rec, feed, snap, sum))
}

/// `slackmeter report`.
pub fn report_cmd(a: ReportArgs) -> Result<i32> {
    let opts = ReplayOptions {
        from_s: a.from.map(|ns| ns * 1e-9),
        to_s: a.to.map(|ns| ns * 1e-9),
        speed: None,
    };
    let plots = a
        .plots
        .as_ref()
        .map(|_| crate::report::plots::PlotCollector::new());
    let (rec, feed, snap, sum) = analyse(&a.file, opts, EngineConfig::default(), plots)?;
    let file = a.file.display().to_string();
    // the design: given, or embedded in the recording
    let lib = crate::budget::Library::builtin();
    let design = if a.no_design {
        None
    } else {
        match (&a.design, &rec.parsed.header.design) {
            (Some(p), _) => {
                Some(crate::budget::Design::load(p, &lib).map_err(miette::Report::new)?)
            }
            (None, Some(e)) => Some(
                crate::budget::Design::parse(
                    crate::diag::Source::new(
                        format!("{} (embedded in {file})", e.file),
                        e.text.clone(),
                    ),
                    &lib,
                )
                .map_err(|e| miette::Report::new(*e))?,
            ),
            (None, None) => None,
        }
    };
    let margin = match &design {
        Some(d) => {
            let cfg = crate::margin::MarginConfig {
                guard_band: a.guard_band,
                temp_c: a.temp,
                vcc_v: None,
            };
            match crate::margin::evaluate(&snap, d, &lib, &cfg) {
                Ok(m) => Some(m),
                Err(e) => {
                    eprintln!("no margin: {e}");
                    None
                }
            }
        }
        None => None,
    };
    if let (Some(dir), Some(p)) = (&a.plots, feed.observer()) {
        let limits = snap
            .rails
            .iter()
            .map(|r| (r.name.clone(), r.limit_mv / 1000.0))
            .collect();
        let hists = feed.engine.clock_histograms(Window::Session);
        let mut files = crate::report::plots::write(dir, p, hists.as_ref(), &limits)
            .map_err(|e| miette!("cannot write plots into {}: {e}", dir.display()))?;
        if let (Some(d), Some(m)) = (&design, &margin) {
            let duty = m.duty;
            let curve = |corner| fmax_curve(d, &lib, corner, duty, a.temp);
            let worst = curve(crate::budget::Corner::Max);
            let typ = curve(crate::budget::Corner::Typ);
            let failure: Vec<(f64, f64, f64)> = m
                .failure
                .iter()
                .map(|f| {
                    (
                        f.onset.rail.as_ref().map_or(m.vcc_used_v, |r| r.1 / 1000.0),
                        f.onset.frequency_hz,
                        f.onset.frequency_uncertainty_hz,
                    )
                })
                .collect();
            let path = dir.join("fmax_vs_supply.svg");
            crate::report::plots::fmax_vcc_svg(
                &path,
                &[
                    ("worst-case budget (max corner)", worst),
                    ("typical budget", typ),
                ],
                Some((m.vcc_used_v, m.clock_hz)),
                &failure,
            )
            .map_err(|e| miette!("cannot write {}: {e}", path.display()))?;
            files.push(path);
        }
        for f in files {
            eprintln!("wrote {}", f.display());
        }
    }
    let mut out = std::io::stdout().lock();
    if a.json {
        let doc = crate::report::recording::doc(&file, &rec.parsed.header, &snap, &sum);
        let mut v = serde_json::to_value(&doc).into_diagnostic()?;
        if let Some(m) = &margin {
            v["margin"] = serde_json::to_value(m).into_diagnostic()?;
        }
        serde_json::to_writer_pretty(&mut out, &v).into_diagnostic()?;
        writeln!(out).into_diagnostic()?;
    } else {
        write!(
            out,
            "{}",
            crate::report::recording::render(&file, &rec.parsed.header, &snap, &sum, a.markdown)
        )
        .into_diagnostic()?;
        if let (Some(m), Some(d)) = (&margin, &design) {
            write!(out, "{}", crate::report::margin::render(m, &d.name)).into_diagnostic()?;
        }
    }
    if sum.data_bytes == 0 {
        return Err(miette!(
            help = "the file has a valid header but no readable data chunk",
            "{file}: no probe data"
        ));
    }
    Ok(match &margin {
        Some(m) if m.verdict != crate::margin::Verdict::InsideWorstCase => crate::cli::EXIT_MARGIN,
        _ => crate::cli::EXIT_OK,
    })
}

/// Options of `export`.
#[derive(clap::Args, Debug)]
pub struct ExportArgs {
    /// The recording.
    pub file: PathBuf,
    /// Write a value change dump (IEEE 1364 VCD) here.
    #[arg(long, value_name = "OUT")]
    pub vcd: Option<PathBuf>,
    /// Write a CSV here (time_s, channel, label, kind, value).
    #[arg(long, value_name = "OUT")]
    pub csv: Option<PathBuf>,
}

/// `slackmeter export`.
pub fn export_cmd(a: ExportArgs) -> Result<i32> {
    if a.vcd.is_none() && a.csv.is_none() {
        return Err(miette!(
            help = "e.g. --vcd run.vcd or --csv run.csv",
            "nothing to export: give --vcd and/or --csv"
        ));
    }
    let mut rec = Recording::open(&a.file).map_err(miette::Report::new)?;
    let s = crate::export::collect(&mut rec).map_err(miette::Report::new)?;
    if s.signals.is_empty() {
        return Err(miette!(
            "{}: the recording holds no probe self-description, so its channels are unknown",
            a.file.display()
        ));
    }
    let create = |p: &PathBuf| {
        std::fs::File::create(p)
            .map(std::io::BufWriter::new)
            .map_err(|e| miette!("cannot create {}: {e}", p.display()))
    };
    if let Some(p) = &a.vcd {
        crate::export::write_vcd(&s, create(p)?).into_diagnostic()?;
        eprintln!("wrote {} ({} events)", p.display(), s.events.len());
    }
    if let Some(p) = &a.csv {
        crate::export::write_csv(&s, create(p)?).into_diagnostic()?;
        eprintln!("wrote {} ({} rows)", p.display(), s.events.len());
    }
    Ok(crate::cli::EXIT_OK)
}

/// Options of `failures`.
#[derive(clap::Args, Debug)]
pub struct FailuresArgs {
    /// Sweep recordings (one per supply voltage), each ending in a failure.
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// The design whose f_max(VCC) the failures are set beside (the first file's embedded design
    /// otherwise).
    #[arg(long)]
    pub design: Option<PathBuf>,
    /// Also write fmax_vs_supply.svg into this folder.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

/// One sweep's failure beside the budget at its supply.
#[derive(serde::Serialize)]
struct FailureRow {
    file: String,
    vcc_v: f64,
    fail_onset_hz: f64,
    fail_onset_uncertainty_hz: f64,
    duty: f64,
    cause: String,
    fmax_worst_case_hz: f64,
    fmax_typical_hz: f64,
}

/// The budget's f_max against supply (4.0–5.5 V) at one corner and duty, for the supply plot.
fn fmax_curve(
    d: &crate::budget::Design,
    lib: &crate::budget::Library,
    corner: crate::budget::Corner,
    duty: f64,
    temp_c: Option<f64>,
) -> Vec<(f64, f64)> {
    let mut op = crate::budget::OperatingPoint::of(d);
    op.corner = corner;
    if let Some(t) = temp_c {
        op.temp_c = t;
    }
    crate::budget::sweep_vcc(d, lib, &op, 4.0, 5.5, 61)
        .into_iter()
        .map(|pt| {
            (
                pt.vcc_v,
                1e9 / crate::budget::solver::min_period_ns(
                    pt.low_required_ns,
                    pt.high_required_ns,
                    pt.period_required_ns,
                    duty.clamp(0.01, 0.99),
                ),
            )
        })
        .collect()
}

/// `slackmeter failures`: the measured f_fail(VCC) of several sweeps beside the budget's f_max(VCC).
pub fn failures_cmd(a: FailuresArgs) -> Result<i32> {
    let lib = crate::budget::Library::builtin();
    let mut design = match &a.design {
        Some(p) => Some(crate::budget::Design::load(p, &lib).map_err(miette::Report::new)?),
        None => None,
    };
    let mut rows = Vec::new();
    for f in &a.files {
        let (rec, _, snap, sum) = analyse(
            f,
            ReplayOptions::default(),
            EngineConfig::default(),
            NoObserver,
        )?;
        for dmg in &sum.damage {
            eprintln!(
                "{}: damaged at byte {}: {} ({} bytes skipped)",
                f.display(),
                dmg.offset,
                dmg.what,
                dmg.skipped
            );
        }
        if design.is_none()
            && let Some(e) = &rec.parsed.header.design
        {
            design = Some(
                crate::budget::Design::parse(
                    crate::diag::Source::new(e.file.clone(), e.text.clone()),
                    &lib,
                )
                .map_err(|e| miette::Report::new(*e))?,
            );
        }
        let d = design
            .as_ref()
            .ok_or_else(|| miette!(help = "give --design", "{} embeds no design", f.display()))?;
        let Some(o) = snap.fault_onsets.first() else {
            eprintln!(
                "{}: no failure in this recording (no fault line, and the heartbeat did not stop): left out",
                f.display()
            );
            continue;
        };
        let vcc = o.rail.as_ref().map_or(d.operating.vcc_v, |r| r.1 / 1000.0);
        let fmax = |corner| {
            let mut op = crate::budget::OperatingPoint::of(d);
            op.vcc_v = vcc;
            op.corner = corner;
            let b = crate::budget::solve(d, &lib, &op, None, None);
            1e9 / crate::budget::solver::min_period_ns(
                b.low_required_ns,
                b.high_required_ns,
                b.period_required_ns,
                o.duty.clamp(0.01, 0.99),
            )
        };
        rows.push(FailureRow {
            file: f.display().to_string(),
            vcc_v: vcc,
            fail_onset_hz: o.frequency_hz,
            fail_onset_uncertainty_hz: o.frequency_uncertainty_hz,
            duty: o.duty,
            cause: o.cause.clone(),
            fmax_worst_case_hz: fmax(crate::budget::Corner::Max),
            fmax_typical_hz: fmax(crate::budget::Corner::Typ),
        });
    }
    if rows.is_empty() {
        return Err(miette!("none of the recordings holds a failure"));
    }
    rows.sort_by(|x, y| x.vcc_v.total_cmp(&y.vcc_v));
    if a.json {
        println!("{}", serde_json::to_string_pretty(&rows).into_diagnostic()?);
    } else {
        println!(
            "{:>9} {:>26} {:>12} {:>12} {:>9}  file",
            "supply", "failure onset", "f_max worst", "f_max typ", "vs typ"
        );
        for r in &rows {
            println!(
                "{:>7.3} V {:>26} {:>12} {:>12} {:>+8.1} %  {}",
                r.vcc_v,
                format!(
                    "{} ± {}",
                    crate::units::hz(r.fail_onset_hz),
                    crate::units::hz(r.fail_onset_uncertainty_hz)
                ),
                crate::units::hz(r.fmax_worst_case_hz).to_string(),
                crate::units::hz(r.fmax_typical_hz).to_string(),
                100.0 * (r.fail_onset_hz / r.fmax_typical_hz - 1.0),
                r.file
            );
        }
    }
    if let (Some(dir), Some(d)) = (&a.plots, &design) {
        std::fs::create_dir_all(dir)
            .map_err(|e| miette!("cannot create {}: {e}", dir.display()))?;
        let duty = rows.iter().map(|r| r.duty).sum::<f64>() / rows.len() as f64;
        let pts: Vec<(f64, f64, f64)> = rows
            .iter()
            .map(|r| (r.vcc_v, r.fail_onset_hz, r.fail_onset_uncertainty_hz))
            .collect();
        let path = dir.join("fmax_vs_supply.svg");
        crate::report::plots::fmax_vcc_svg(
            &path,
            &[
                (
                    "worst-case budget (max corner)",
                    fmax_curve(d, &lib, crate::budget::Corner::Max, duty, None),
                ),
                (
                    "typical budget",
                    fmax_curve(d, &lib, crate::budget::Corner::Typ, duty, None),
                ),
            ],
            None,
            &pts,
        )
        .map_err(|e| miette!("cannot write {}: {e}", path.display()))?;
        eprintln!("wrote {}", path.display());
    }
    Ok(crate::cli::EXIT_OK)
}
