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
/// the error lists the ports there are.
pub fn check_present(path: &Path) -> Result<(), LinkError> {
    if path.exists() {
        Ok(())
    } else {
        Err(LinkError::NotFound {
            path: path.display().to_string(),
            hint: ports_hint(),
        })
    }
}

pub(super) fn open_port(cfg: &LinkConfig) -> Result<Port, LinkError> {
    check_present(&cfg.path)?;
    let path = cfg.path.display().to_string();
    let port = serialport::new(path.clone(), cfg.baud)
        .timeout(Duration::from_millis(20))
        .open()
        .map_err(|e| match e.kind {
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
            _ => LinkError::Open {
                path: path.clone(),
                reason: e.description,
            },
        })?;
    let mut port = port;
    // pseudo-terminals refuse modem-control calls ("not a typewriter"): that is fine
    let _ = port.write_data_terminal_ready(true);
    Ok(port)
}
