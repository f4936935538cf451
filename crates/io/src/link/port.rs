//! Serial ports: listing them, and opening one with errors that say what to do.

use std::io;
use std::path::Path;
use std::time::Duration;

use super::types::{LinkConfig, LinkError};

/// Serial ports the system lists, with their identification (not pseudo-terminals).
pub fn list_ports() -> Vec<(String, String)> {
    // the port listing can panic when the sysfs folder it scans is missing
    let found = std::panic::catch_unwind(serialport::available_ports);
    match found {
        Ok(Ok(ports)) => ports
            .into_iter()
            .map(|p| {
                let what = match p.port_type {
                    serialport::SerialPortType::UsbPort(u) => format!(
                        "USB {:04x}:{:04x} {} {}{}",
                        u.vid,
                        u.pid,
                        u.manufacturer.unwrap_or_default(),
                        u.product.unwrap_or_default(),
                        u.serial_number
                            .map(|s| format!(" (serial {s})"))
                            .unwrap_or_default()
                    ),
                    serialport::SerialPortType::PciPort => "PCI".into(),
                    serialport::SerialPortType::BluetoothPort => "Bluetooth".into(),
                    serialport::SerialPortType::Unknown => "unknown type".into(),
                };
                (p.port_name, what)
            })
            .collect(),
        _ => Vec::new(),
    }
}

fn ports_hint() -> String {
    let ports = list_ports();
    if ports.is_empty() {
        "no serial ports are listed on this system; is the probe plugged in? (`slackmeter ports` lists them; a virtual probe: `slackmeter sim --pty`)".into()
    } else {
        let list: Vec<String> = ports.iter().map(|(n, w)| format!("{n} ({w})")).collect();
        format!("ports here: {}", list.join(", "))
    }
}

pub(super) type Port = Box<dyn serialport::SerialPort>;

/// Refuse a port path where there is no device (a mistyped path, not a probe being plugged in):
/// the error lists the ports there are. A path that is no character device (a regular file, a
/// folder, a pipe) is refused as not a serial device; nothing is opened here.
pub fn check_present(path: &Path) -> Result<(), LinkError> {
    use std::os::unix::fs::FileTypeExt;
    let Ok(meta) = std::fs::metadata(path) else {
        return Err(LinkError::NotFound {
            path: path.display().to_string(),
            hint: ports_hint(),
        });
    };
    let t = meta.file_type();
    let what = if t.is_char_device() {
        return Ok(());
    } else if t.is_dir() {
        "a folder"
    } else if t.is_file() {
        "a regular file"
    } else if t.is_fifo() {
        "a named pipe"
    } else if t.is_socket() {
        "a socket"
    } else {
        "a block device"
    };
    Err(LinkError::NotSerial {
        path: path.display().to_string(),
        what: what.into(),
    })
}

/// Whether the character device at `path` is a terminal (serial ports and pseudo-terminals
/// are; /dev/null is not). Opened without becoming the controlling terminal and without
/// waiting; asked only after the serial port failed to open, so a probe's board is not reset
/// by a second open.
fn is_terminal(path: &Path) -> bool {
    use std::io::IsTerminal;
    use std::os::unix::fs::OpenOptionsExt;
    std::fs::OpenOptions::new()
        .read(true)
        .custom_flags(libc::O_NOCTTY | libc::O_NONBLOCK)
        .open(path)
        .is_ok_and(|f| f.is_terminal())
}

pub(super) fn open_port(cfg: &LinkConfig) -> Result<Port, LinkError> {
    check_present(&cfg.path)?;
    let path = cfg.path.display().to_string();
    let port = serialport::new(path.clone(), cfg.baud)
        .timeout(Duration::from_millis(20))
        .open_native()
        .map_err(|e| match e.kind {
            kind if !matches!(
                kind,
                serialport::ErrorKind::NoDevice
                    | serialport::ErrorKind::Io(io::ErrorKind::PermissionDenied)
                    | serialport::ErrorKind::Io(io::ErrorKind::NotFound)
            ) && cfg.path.exists()
                && !is_terminal(&cfg.path) =>
            {
                LinkError::NotSerial {
                    path: path.clone(),
                    what: "a character device that is not a terminal".into(),
                }
            }
            serialport::ErrorKind::NoDevice => LinkError::NotFound {
                path: path.clone(),
                hint: ports_hint(),
            },
            serialport::ErrorKind::Io(io::ErrorKind::PermissionDenied) => {
                LinkError::Permission { path: path.clone() }
            }
            serialport::ErrorKind::Io(io::ErrorKind::NotFound) => LinkError::NotFound {
                path: path.clone(),
                hint: ports_hint(),
            },
            serialport::ErrorKind::Io(io::ErrorKind::ResourceBusy) => LinkError::Open {
                path: path.clone(),
                reason: "the port is in use by another program (close it; `fuser PATH` names it)"
                    .into(),
            },
            _ => LinkError::Open {
                path: path.clone(),
                reason: e.description,
            },
        })?;
    // a character device that opens but is no terminal (/dev/null, /dev/zero) is no port
    {
        use std::os::fd::AsRawFd;
        // SAFETY: isatty only inspects the descriptor, which `port` keeps open
        if unsafe { libc::isatty(port.as_raw_fd()) } != 1 {
            return Err(LinkError::NotSerial {
                path,
                what: "a character device that is not a terminal".into(),
            });
        }
    }
    let mut port: Port = Box::new(port);
    // pseudo-terminals refuse modem-control calls ("not a typewriter"): that is fine
    let _ = port.write_data_terminal_ready(true);
    Ok(port)
}
