//! `tapmodes ports` and `tapmodes devices`: what can be captured from.

use crate::error::{Error, Result};

/// Print the serial ports, with USB vendor/product ids where the system knows them.
pub fn ports() -> Result<()> {
    let ports = serialport::available_ports()
        .map_err(|e| Error::new(format!("cannot list serial ports: {e}")))?;
    if ports.is_empty() {
        println!("no serial ports found (is the device plugged in?)");
    }
    for p in ports {
        match p.port_type {
            serialport::SerialPortType::UsbPort(u) => println!(
                "{}  usb {:04x}:{:04x}{}{}",
                p.port_name,
                u.vid,
                u.pid,
                u.product.map_or(String::new(), |s| format!("  {s}")),
                u.serial_number
                    .map_or(String::new(), |s| format!("  serial {s}"))
            ),
            serialport::SerialPortType::PciPort => println!("{}  pci", p.port_name),
            serialport::SerialPortType::BluetoothPort => println!("{}  bluetooth", p.port_name),
            serialport::SerialPortType::Unknown => println!("{}", p.port_name),
        }
    }
    Ok(())
}

/// Print the sound-card inputs.
#[cfg(feature = "audio")]
pub fn devices() -> Result<()> {
    let names = crate::source::audio::input_devices()?;
    if names.is_empty() {
        println!("no sound-card inputs found");
    }
    for d in names {
        println!("{d}");
    }
    Ok(())
}

#[cfg(not(feature = "audio"))]
pub fn devices() -> Result<()> {
    crate::fail!(
        "this build has no sound-card support; rebuild with `cargo build --release --features audio`"
    )
}
