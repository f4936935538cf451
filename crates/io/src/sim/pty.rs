//! Serving the virtual probe on a pseudo-terminal: a real serial device node for the host.
//!
//! The server opens a pty pair, sets the device side raw and keeps it open (so a host can
//! come and go), optionally points a stable symlink at it (reopen a new server at the same
//! path and a host reconnects there), and paces the simulation to wall time.

use std::ffi::CStr;
use std::fs::File;
use std::io::{self, Read, Write};
use std::os::fd::FromRawFd;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use super::probe::SimProbe;

/// Most wire bytes held for a slow host before whole frames are dropped (and reported).
pub const BACKLOG_CAP: usize = 8 << 20;

/// How long a timed run waits, once its time is up, for the host to take what is left.
const DRAIN_GRACE: Duration = Duration::from_secs(1);

/// A pseudo-terminal serving the virtual probe.
pub struct PtyServer {
    master: File,
    _device: File,
    device_path: PathBuf,
    link: Option<PathBuf>,
}

/// Totals of a serving session.
#[derive(Clone, Copy, Debug, Default)]
pub struct ServeStats {
    /// Wire bytes written to the host.
    pub bytes: u64,
    /// Frames dropped because the host did not read.
    pub dropped_frames: u64,
    /// Simulated time, s.
    pub sim_s: f64,
    /// Bytes still unsent when a timed run ended (no host took them).
    pub unsent_bytes: u64,
}

/// An I/O error that only means "nothing more this round": would block, interrupted, or EIO
/// (no one holds the device open).
fn not_now(e: &io::Error) -> bool {
    matches!(
        e.kind(),
        io::ErrorKind::WouldBlock | io::ErrorKind::Interrupted
    ) || e.raw_os_error() == Some(libc::EIO)
}

fn cvt(r: libc::c_int) -> io::Result<libc::c_int> {
    if r < 0 {
        Err(io::Error::last_os_error())
    } else {
        Ok(r)
    }
}

/// Whether `path` is a symlink to a pseudo-terminal's device node (what a virtual probe's
/// `--link` makes; a stale one from a server that ended may be replaced).
fn is_pty_link(path: &Path) -> bool {
    std::fs::symlink_metadata(path).is_ok_and(|m| m.file_type().is_symlink())
        && std::fs::read_link(path).is_ok_and(|t| t.starts_with("/dev/pts/"))
}

/// A link path may be (re)pointed when nothing is there or a pseudo-terminal link is: anything
/// else (a file, a folder, another symlink) is refused with an `AlreadyExists` error.
pub fn check_link_path(link: &Path) -> io::Result<()> {
    match std::fs::symlink_metadata(link) {
        Err(e) if e.kind() == io::ErrorKind::NotFound => Ok(()),
        Err(e) => Err(e),
        Ok(_) if is_pty_link(link) => Ok(()),
        Ok(m) => Err(io::Error::new(
            io::ErrorKind::AlreadyExists,
            format!(
                "{} exists and is {}, not a pseudo-terminal link a virtual probe made: it is left as it is",
                link.display(),
                if m.is_dir() {
                    "a folder"
                } else if m.file_type().is_symlink() {
                    "a symlink to something else"
                } else {
                    "a file"
                }
            ),
        )),
    }
}

impl PtyServer {
    /// Open a pty pair; `link` is a path to (re)point at the device node (refused when
    /// something other than a pseudo-terminal link is there: see [`check_link_path`]).
    pub fn open(link: Option<&Path>) -> io::Result<PtyServer> {
        if let Some(l) = link {
            check_link_path(l)?;
        }
        // SAFETY: plain libc calls on a descriptor we own; errors are checked.
        unsafe {
            let fd = cvt(libc::posix_openpt(libc::O_RDWR | libc::O_NOCTTY))?;
            let master = File::from_raw_fd(fd);
            cvt(libc::grantpt(fd))?;
            cvt(libc::unlockpt(fd))?;
            let mut buf = [0 as libc::c_char; 128];
            cvt(libc::ptsname_r(fd, buf.as_mut_ptr(), buf.len()))?;
            let device_path =
                PathBuf::from(CStr::from_ptr(buf.as_ptr()).to_string_lossy().into_owned());
            let dev_c = std::ffi::CString::new(device_path.as_os_str().as_encoded_bytes())
                .map_err(io::Error::other)?;
            let dfd = cvt(libc::open(dev_c.as_ptr(), libc::O_RDWR | libc::O_NOCTTY))?;
            let device = File::from_raw_fd(dfd);
            // raw mode on the device side: no echo, no line editing, all 256 byte values pass
            let mut t: libc::termios = std::mem::zeroed();
            cvt(libc::tcgetattr(dfd, &mut t))?;
            libc::cfmakeraw(&mut t);
            cvt(libc::tcsetattr(dfd, libc::TCSANOW, &t))?;
            let flags = cvt(libc::fcntl(fd, libc::F_GETFL))?;
            cvt(libc::fcntl(fd, libc::F_SETFL, flags | libc::O_NONBLOCK))?;
            let server = PtyServer {
                master,
                _device: device,
                device_path,
                link: link.map(Path::to_path_buf),
            };
            if let Some(l) = &server.link {
                // a new symlink beside it, named for this process (creating it fails rather
                // than replace anything), then renamed over the path checked above
                let name = l.file_name().unwrap_or_default().to_string_lossy();
                let tmp = l.with_file_name(format!(".{name}.{}.tmp-link", std::process::id()));
                if is_pty_link(&tmp) {
                    let _ = std::fs::remove_file(&tmp);
                }
                std::os::unix::fs::symlink(&server.device_path, &tmp)?;
                check_link_path(l).inspect_err(|_| {
                    let _ = std::fs::remove_file(&tmp);
                })?;
                std::fs::rename(&tmp, l)?;
            }
            Ok(server)
        }
    }

    /// The path a host should open (the symlink when one was asked for).
    pub fn path(&self) -> &Path {
        self.link.as_deref().unwrap_or(&self.device_path)
    }

    /// The controlling side (non-blocking; EIO while no host holds the device open), for a
    /// server other than the virtual probe, e.g. a proxy that damages a link on purpose.
    pub fn master(&mut self) -> &mut File {
        &mut self.master
    }

    /// The device node itself (/dev/pts/N).
    pub fn device_path(&self) -> &Path {
        &self.device_path
    }

    /// Serve until `stop` is set or `duration_s` of simulated time has passed.
    pub fn serve(
        &mut self,
        probe: &mut SimProbe,
        stop: &AtomicBool,
        duration_s: Option<f64>,
    ) -> io::Result<ServeStats> {
        let start = Instant::now();
        let t0 = probe.now_ns();
        let mut stats = ServeStats::default();
        let mut backlog: Vec<u8> = Vec::new();
        // whether the bytes written so far end inside a frame
        let mut mid_frame = false;
        let mut rx = [0u8; 4096];
        let mut done_at: Option<Instant> = None;
        while !stop.load(Ordering::Relaxed) {
            // host → probe
            loop {
                match self.master.read(&mut rx) {
                    Ok(0) => break,
                    Ok(n) => probe.handle_host(&rx[..n]),
                    Err(e) if not_now(&e) => break,
                    Err(e) => return Err(e),
                }
            }
            // simulated time follows the wall clock
            let target = t0 + start.elapsed().as_nanos() as f64;
            let target = match duration_s {
                Some(d) => target.min(t0 + d * 1e9),
                None => target,
            };
            probe.run_until(target);
            backlog.append(probe.output());
            if backlog.len() > BACKLOG_CAP {
                // drop the oldest whole frames and let the probe report it; the rest of a frame
                // already partly written stays, so the host never sees a frame cut in two
                let keep = if mid_frame {
                    backlog
                        .iter()
                        .position(|&b| b == 0)
                        .map_or(backlog.len(), |i| i + 1)
                } else {
                    0
                };
                let cut = (backlog.len() - BACKLOG_CAP / 2).max(keep);
                let end = backlog[cut..]
                    .iter()
                    .position(|&b| b == 0)
                    .map_or(backlog.len(), |i| cut + i + 1);
                let frames = backlog[keep..end].iter().filter(|&&b| b == 0).count() as u32;
                backlog.drain(keep..end);
                stats.dropped_frames += u64::from(frames);
                probe.note_dropped(frames);
            }
            while !backlog.is_empty() {
                match self.master.write(&backlog) {
                    Ok(0) => break,
                    Ok(n) => {
                        stats.bytes += n as u64;
                        mid_frame = backlog[n - 1] != 0;
                        backlog.drain(..n);
                    }
                    Err(e) if not_now(&e) => break,
                    Err(e) => return Err(e),
                }
            }
            stats.sim_s = (probe.now_ns() - t0) * 1e-9;
            if duration_s.is_some_and(|d| stats.sim_s >= d - 1e-3) {
                // done: leave once the host has taken the rest, or after a second without a
                // reader (nobody holds the device open, or it stopped reading)
                let since = *done_at.get_or_insert_with(Instant::now);
                if backlog.is_empty() || since.elapsed() > DRAIN_GRACE {
                    stats.unsent_bytes = backlog.len() as u64;
                    break;
                }
            }
            std::thread::sleep(Duration::from_millis(2));
        }
        let _ = self.master.flush();
        Ok(stats)
    }
}

impl Drop for PtyServer {
    fn drop(&mut self) {
        if let Some(l) = &self.link
            && std::fs::read_link(l).is_ok_and(|t| t == self.device_path)
        {
            let _ = std::fs::remove_file(l);
        }
    }
}
