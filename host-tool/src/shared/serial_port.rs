//! Opening a serial port the way every job here does (raw, 8N1, no flow control, a short
//! read timeout so a reader thread can look at its stop flag), and the hint printed when a
//! port cannot be opened.

use std::time::Duration;

/// Read timeout of a port: how long a reader waits for bytes before it looks at the stop flag.
pub const READ_TIMEOUT: Duration = Duration::from_millis(50);

/// Open `path` raw at `baud`, 8N1, with the read timeout.
pub fn open_port(path: &str, baud: u32) -> serialport::Result<Box<dyn serialport::SerialPort>> {
    serialport::new(path, baud)
        .data_bits(serialport::DataBits::Eight)
        .parity(serialport::Parity::None)
        .stop_bits(serialport::StopBits::One)
        .flow_control(serialport::FlowControl::None)
        .timeout(READ_TIMEOUT)
        .open()
}

/// Why `port` could not be opened, and what to try.
pub fn open_hint(port: &str, e: &serialport::Error) -> String {
    let denied = matches!(
        e.kind(),
        serialport::ErrorKind::Io(std::io::ErrorKind::PermissionDenied)
    ) || e.to_string().to_lowercase().contains("permission");
    let mut s = format!("cannot open port {port}: {e}\n");
    if denied {
        s.push_str(&format!(
            "hint: the port exists but this user may not open it: check `ls -l {port}` and \
             join the group that owns it (often `dialout` or `uucp`: \
             `sudo usermod -aG dialout $USER`, then log in again)\n"
        ));
    } else {
        s.push_str(
            "hint: `frothline ports` lists the serial ports of this machine; check the cable \
             and that the device is powered\n",
        );
    }
    s.push_str("hint: give --wait-for-port to wait until the port can be opened");
    s
}
