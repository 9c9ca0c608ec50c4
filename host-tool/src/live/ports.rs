//! `frothline ports`: the serial ports this machine offers.

/// One line per port: name and what kind of port it is.
pub fn list() -> Result<Vec<String>, serialport::Error> {
    let ports = serialport::available_ports()?;
    Ok(ports
        .into_iter()
        .map(|p| {
            let kind = match p.port_type {
                serialport::SerialPortType::UsbPort(u) => format!(
                    "USB {:04x}:{:04x}{}{}",
                    u.vid,
                    u.pid,
                    u.manufacturer.map(|m| format!(" {m}")).unwrap_or_default(),
                    u.product.map(|m| format!(" {m}")).unwrap_or_default()
                ),
                serialport::SerialPortType::PciPort => "PCI".into(),
                serialport::SerialPortType::BluetoothPort => "Bluetooth".into(),
                serialport::SerialPortType::Unknown => "other".into(),
            };
            format!("{:<24} {kind}", p.port_name)
        })
        .collect())
}
