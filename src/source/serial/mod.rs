//! Serial accelerometers: a port opened with `serialport`, decoded by our own protocol
//! (`codec`, specified in firmware-notes/protocol.md), delivered as blocks.

pub mod codec;
pub mod headerless;

use crate::error::{Error, Result};
use crate::signal::{Block, ChannelInfo, Role, StreamInfo};
use crate::source::{LinkCounters, Source};
use codec::{Decoded, Decoder, StreamHeader};
use std::io::Read;
use std::time::{Duration, Instant};

/// How long to wait for the stream header after opening the port.
pub const HEADER_TIMEOUT: Duration = Duration::from_secs(5);
/// Silence longer than this on a running stream is reported as a lost device.
pub const SILENCE_LIMIT: Duration = Duration::from_secs(3);

/// Anything bytes can be read from: a serial port, or a pipe in tests.
pub trait ByteLink: Send {
    /// Read available bytes; Ok(0) on timeout with nothing read.
    fn read_some(&mut self, buf: &mut [u8]) -> std::io::Result<usize>;
    fn send(&mut self, bytes: &[u8]) -> std::io::Result<()>;
}

struct PortLink(Box<dyn serialport::SerialPort>);

impl ByteLink for PortLink {
    fn read_some(&mut self, buf: &mut [u8]) -> std::io::Result<usize> {
        match self.0.read(buf) {
            Err(e) if e.kind() == std::io::ErrorKind::TimedOut => Ok(0),
            other => other,
        }
    }
    fn send(&mut self, bytes: &[u8]) -> std::io::Result<()> {
        std::io::Write::write_all(&mut self.0, bytes)
    }
}

pub struct SerialSource {
    name: String,
    link: Box<dyn ByteLink>,
    decoder: Decoder,
    header: StreamHeader,
    info: StreamInfo,
    pending: Vec<Vec<f64>>,
    /// Stream position of the next frame (frames received plus frames known lost).
    position: u64,
    /// Frames received after a gap, held for the next block, and the gap's length.
    carry: Vec<Vec<f64>>,
    gap: u64,
    last_data: Instant,
    block_len: usize,
    buf: Vec<u8>,
    /// A link failure held back until the frames received before it are delivered.
    deferred: Option<Error>,
    /// The scale the decoded values already carry, per channel; a calibration from the
    /// command line (`info.channels[c].scale`) multiplies by the ratio.
    base_scales: Vec<f64>,
    /// Headerless stream with a timestamp column: its index and the placement on the grid.
    timing: Option<(usize, headerless::Timing)>,
    /// Decoded items held back behind a gap found in the middle of a read.
    backlog: std::collections::VecDeque<Decoded>,
}

impl SerialSource {
    /// Open `path` at `baud` and wait for the stream header.
    pub fn open(path: &str, baud: u32) -> Result<Self> {
        Self::from_link(path, open_port(path, baud)?)
    }

    /// Start on any byte link (used by tests with pipes and pseudo-terminals).
    pub fn from_link(name: &str, mut link: Box<dyn ByteLink>) -> Result<Self> {
        // Ask the device to (re)send its header; devices that always send one ignore it.
        let _ = link.send(b"h");
        let mut decoder = Decoder::new();
        let mut out = Vec::new();
        let mut buf = vec![0u8; 4096];
        let t0 = Instant::now();
        let header = loop {
            if let Some(h) = decoder.header() {
                break h.clone();
            }
            if t0.elapsed() > HEADER_TIMEOUT {
                let why = decoder.diagnosis().unwrap_or_else(|| {
                    if decoder.stats().bytes == 0 {
                        "no bytes arrived: is the device streaming?".to_string()
                    } else {
                        "no stream header (# rate_hz=... channels=...) arrived".to_string()
                    }
                });
                crate::fail!(
                    "'{name}' gave no usable stream within {} s: {why}",
                    HEADER_TIMEOUT.as_secs()
                );
            }
            let n = link.read_some(&mut buf).map_err(|e| {
                Error::new(format!(
                    "cannot read serial port '{name}': {}",
                    crate::error::describe_io(&e)
                ))
            })?;
            decoder.push(&buf[..n], &mut out);
            if n == 0 {
                std::thread::sleep(Duration::from_millis(5));
            }
        };
        // What came with and after the header waits in the backlog, gaps included, and is
        // taken in order by the first `next_block`; frames before the header are dropped.
        let backlog = out
            .into_iter()
            .skip_while(|d| !matches!(d, Decoded::Header(_)))
            .collect();
        let info = info_from(name, &header);
        crate::run::validate::check_stream(&info, &format!("the stream header of '{name}'"))?;
        let base_scales = (0..info_channels(&header))
            .map(|i| header.scale(i))
            .collect();
        Ok(SerialSource {
            name: name.to_string(),
            link,
            block_len: (header.rate_hz / 50.0).ceil().max(1.0) as usize,
            decoder,
            header,
            info,
            pending: Vec::new(),
            position: 0,
            carry: Vec::new(),
            gap: 0,
            last_data: Instant::now(),
            buf,
            deferred: None,
            base_scales,
            timing: None,
            backlog,
        })
    }

    /// Open a port whose device sends bare numbers and no header (see `headerless`).
    pub fn open_headerless(
        path: &str,
        baud: u32,
        rate_hz: Option<f64>,
        columns: &headerless::Columns,
    ) -> Result<Self> {
        Self::headerless_from_link(path, open_port(path, baud)?, rate_hz, columns)
    }

    /// A headerless stream on any byte link. With a timestamp column the first 512 samples
    /// measure the rate (unless `rate_hz` is given, which then sets the grid and the
    /// measurement is only reported); without one `rate_hz` is needed and trusted.
    pub fn headerless_from_link(
        name: &str,
        mut link: Box<dyn ByteLink>,
        rate_hz: Option<f64>,
        columns: &headerless::Columns,
    ) -> Result<Self> {
        if columns.time.is_none() && rate_hz.is_none() {
            crate::fail!(
                "a stream without a header needs --rate HZ, or a timestamp column in --columns (e.g. t@us,force,accel)"
            );
        }
        // The same wake-up as for devices with a header: a sketch that prints bare numbers
        // ignores it; one that speaks our protocol starts streaming.
        let _ = link.send(b"h");
        let names: Vec<&str> = columns.names.iter().map(String::as_str).collect();
        let mut decoder = Decoder::headerless(StreamHeader::new(rate_hz.unwrap_or(1.0), &names));
        let mut buf = vec![0u8; 4096];
        let mut frames = Vec::new();
        let mut out = Vec::new();
        let wanted = if columns.time.is_some() { 512 } else { 1 };
        let t0 = Instant::now();
        while frames.len() < wanted {
            if t0.elapsed() > HEADER_TIMEOUT {
                let s = decoder.stats();
                crate::fail!(
                    "'{name}' sent {} usable lines of {} columns within {} s ({} bytes, {} lines unusable): check --columns against what the sketch prints",
                    frames.len(),
                    columns.names.len(),
                    HEADER_TIMEOUT.as_secs(),
                    s.bytes,
                    s.junk_lines
                );
            }
            let n = link.read_some(&mut buf).map_err(|e| {
                Error::new(format!(
                    "cannot read serial port '{name}': {}",
                    crate::error::describe_io(&e)
                ))
            })?;
            decoder.push(&buf[..n], &mut out);
            frames.extend(out.drain(..).filter_map(|d| match d {
                Decoded::Frame(f) => Some(f),
                Decoded::Header(_) | Decoded::Gap(_) => None,
            }));
            if n == 0 {
                std::thread::sleep(Duration::from_millis(5));
            }
        }
        let measured = columns.time.and_then(|(i, tick)| {
            let raw: Vec<f64> = frames.iter().map(|f| f[i]).collect();
            headerless::measure_period(&raw, tick).map(|p| 1.0 / p)
        });
        let rate = match (rate_hz, measured, columns.time) {
            (Some(r), _, _) => r,
            (None, Some(m), _) => m,
            (None, None, _) => crate::fail!(
                "the timestamps of '{name}' do not increase: cannot measure the rate; give --rate HZ"
            ),
        };
        let data_names = columns.data_names();
        let info = StreamInfo {
            source: format!(
                "serial {name} (no header; {})",
                match (measured, rate_hz) {
                    (Some(m), Some(r)) => format!("rate {r} Hz as given, {m:.2} Hz measured"),
                    (Some(m), None) => format!("rate {m:.2} Hz measured from the timestamps"),
                    (None, _) => format!("rate {rate} Hz as given, not measured"),
                }
            ),
            sample_rate: rate,
            channels: data_names
                .iter()
                .map(|n| ChannelInfo {
                    name: n.clone(),
                    role: Role::Unused,
                    unit: "counts".into(),
                    scale: 1.0,
                    full_scale: None,
                })
                .collect(),
        };
        crate::run::validate::check_stream(&info, &format!("the columns of '{name}'"))?;
        let header = StreamHeader::new(rate, &names);
        let mut src = SerialSource {
            name: name.to_string(),
            link,
            block_len: (rate / 50.0).ceil().max(1.0) as usize,
            decoder,
            base_scales: vec![1.0; data_names.len()],
            header,
            info,
            pending: Vec::new(),
            position: 0,
            carry: Vec::new(),
            gap: 0,
            last_data: Instant::now(),
            buf,
            deferred: None,
            timing: columns
                .time
                .map(|(i, tick)| (i, headerless::Timing::new(tick, 1.0 / rate))),
            backlog: frames.into_iter().map(Decoded::Frame).collect(),
        };
        if src.timing.is_none() {
            // Without timestamps the frames go straight in.
            src.pending = src
                .backlog
                .drain(..)
                .filter_map(|d| match d {
                    Decoded::Frame(f) => Some(f),
                    Decoded::Header(_) | Decoded::Gap(_) => None,
                })
                .collect();
        }
        Ok(src)
    }

    /// Rate, jitter and missing samples of a timestamped headerless stream.
    pub fn timing_report(&self) -> Option<String> {
        self.timing.as_ref().map(|(_, t)| t.describe())
    }

    /// A timestamped frame placed on the grid: the data values, and how many samples are
    /// missing before it; `None` for a stale frame (dropped).
    fn place(&mut self, mut f: Vec<f64>) -> Option<(Vec<f64>, u64)> {
        let Some((i, timing)) = self.timing.as_mut() else {
            return Some((f, 0));
        };
        let raw = f.remove(*i);
        match timing.place(raw) {
            headerless::Placed::Next { missing } => Some((f, missing)),
            headerless::Placed::Stale => None,
        }
    }

    /// One decoded item taken into the block being built. `Ok(true)` closes the block here:
    /// frames are missing before the item (by the frame counter, or by the timestamps of a
    /// headerless stream) and the block already holds frames, so the gap shows in the next
    /// block's `start`. Everything is placed by the stream's own counters, never by where a
    /// read happened to end.
    fn take(&mut self, d: Decoded) -> Result<bool> {
        match d {
            Decoded::Header(h) => {
                self.check_header(&h)?;
                Ok(false)
            }
            Decoded::Gap(n) => {
                if self.pending.is_empty() {
                    self.position += n;
                    return Ok(false);
                }
                self.gap += n;
                Ok(true)
            }
            Decoded::Frame(f) => {
                let Some((f, missing)) = self.place(f) else {
                    return Ok(false);
                };
                if missing > 0 && !self.pending.is_empty() {
                    self.carry = vec![f];
                    self.gap += missing;
                    return Ok(true);
                }
                self.position += missing;
                self.pending.push(f);
                Ok(false)
            }
        }
    }

    /// A header re-sent mid-run must describe the same stream.
    fn check_header(&self, h: &StreamHeader) -> Result<()> {
        if h.scales != self.header.scales || h.units != self.header.units {
            crate::fail!(
                "'{}' sent a new header with other scales or units ({}): the values would change meaning mid-run, so the capture stops; start a new run",
                self.name,
                h.scales
                    .iter()
                    .zip(&h.units)
                    .map(|(s, u)| format!("{s} {}", crate::run::validate::clean_text(u, false)))
                    .collect::<Vec<_>>()
                    .join(", ")
            );
        }
        if h.rate_hz != self.header.rate_hz || h.channels != self.header.channels {
            crate::fail!(
                "'{}' restarted with a different stream ({} Hz, channels {}): start a new run",
                self.name,
                h.rate_hz,
                crate::run::validate::clean_text(&h.channels.join(","), false)
            );
        }
        Ok(())
    }

    /// An error met while building a block: returned at once when the block is empty,
    /// otherwise held back until the frames before it are delivered (nothing taken is lost).
    fn stop(&mut self, e: Error) -> Result<()> {
        if self.pending.is_empty() {
            return Err(e);
        }
        self.deferred = Some(e);
        Ok(())
    }

    /// Channel layout, for applying calibration from the command line.
    pub fn info_mut(&mut self) -> &mut StreamInfo {
        &mut self.info
    }

    pub fn stats(&self) -> codec::LinkStats {
        self.decoder.stats()
    }
}

/// The port at `path`, with a short read timeout so the source can poll.
fn open_port(path: &str, baud: u32) -> Result<Box<dyn ByteLink>> {
    let port = serialport::new(path, baud)
        .timeout(Duration::from_millis(50))
        .open()
        .map_err(|e| {
            Error::new(format!(
                "cannot open serial port '{path}': {}",
                port_error(&e)
            ))
        })?;
    Ok(Box::new(PortLink(port)))
}

fn port_error(e: &serialport::Error) -> String {
    match e.kind() {
        serialport::ErrorKind::NoDevice => "no such device (unplugged?)".into(),
        serialport::ErrorKind::Io(std::io::ErrorKind::NotFound) => "no such device".into(),
        serialport::ErrorKind::Io(std::io::ErrorKind::PermissionDenied) => {
            "permission denied (on Linux, join the 'dialout' group)".into()
        }
        _ => e.to_string(),
    }
}

fn info_channels(h: &StreamHeader) -> usize {
    h.channels.len()
}

fn info_from(name: &str, h: &StreamHeader) -> StreamInfo {
    StreamInfo {
        source: format!("serial {name}"),
        sample_rate: h.rate_hz,
        channels: (0..h.channels.len())
            .map(|i| ChannelInfo {
                name: crate::run::validate::clean_text(&h.channels[i], false),
                role: Role::Unused,
                unit: crate::run::validate::clean_text(h.unit(i), false),
                scale: h.scale(i),
                full_scale: None,
            })
            .collect(),
    }
}

impl Source for SerialSource {
    fn info(&self) -> &StreamInfo {
        &self.info
    }

    fn link_counters(&self) -> Option<LinkCounters> {
        let s = self.decoder.stats();
        Some(LinkCounters {
            packets_ok: s.packets_ok,
            packets_lost: s.packets_lost,
            packets_corrupt: s.packets_corrupt,
            resyncs: s.resyncs,
            junk_lines: s.junk_lines,
        })
    }

    fn next_block(&mut self) -> Result<Option<Block>> {
        if let Some(e) = self.deferred.take() {
            return Err(e);
        }
        let started = Instant::now();
        // Items held back behind a gap in the previous block (or read with the header, or
        // while measuring the rate) come first.
        let mut cut = false;
        while let Some(d) = self.backlog.pop_front() {
            match self.take(d) {
                Ok(false) => {}
                Ok(true) => {
                    cut = true;
                    break;
                }
                Err(e) => {
                    self.backlog.clear();
                    self.stop(e)?;
                    cut = true;
                    break;
                }
            }
        }
        let mut out = Vec::new();
        while !cut
            && self.pending.len() < self.block_len
            && started.elapsed() < Duration::from_millis(40)
        {
            let n = match self.link.read_some(&mut self.buf) {
                Ok(n) => n,
                Err(e) => {
                    let e = Error::new(format!(
                        "the serial device '{}' stopped ({}): unplugged or reset? Hits accepted so far are saved",
                        self.name,
                        crate::error::describe_io(&e)
                    ));
                    // Deliver what arrived before the failure first: nothing taken is lost.
                    self.stop(e)?;
                    break;
                }
            };
            if n == 0 {
                if self.last_data.elapsed() > SILENCE_LIMIT {
                    crate::fail!(
                        "no data from '{}' for {} s: the device stopped streaming or was unplugged",
                        self.name,
                        SILENCE_LIMIT.as_secs()
                    );
                }
                std::thread::sleep(Duration::from_millis(2));
                continue;
            }
            self.last_data = Instant::now();
            self.decoder.push(&self.buf[..n], &mut out);
            let mut items = out.drain(..);
            while let Some(d) = items.next() {
                match self.take(d) {
                    Ok(false) => {}
                    Ok(true) => {
                        // The rest of this read waits behind the gap.
                        self.backlog.extend(items.by_ref());
                        cut = true;
                        break;
                    }
                    Err(e) => {
                        self.stop(e)?;
                        cut = true;
                        break;
                    }
                }
            }
        }
        let n_ch = self.info.channels.len();
        // A calibration given on the command line after opening scales the values too.
        let factors: Vec<f64> = (0..n_ch)
            .map(|c| self.info.channels[c].scale / self.base_scales.get(c).copied().unwrap_or(1.0))
            .collect();
        let mut channels = vec![Vec::with_capacity(self.pending.len()); n_ch];
        for f in self.pending.drain(..) {
            for (c, v) in f.into_iter().enumerate().take(n_ch) {
                channels[c].push(if factors[c] == 1.0 { v } else { v * factors[c] });
            }
        }
        let len = channels.first().map_or(0, Vec::len) as u64;
        let block = Block {
            start: self.position,
            channels,
        };
        self.position += len + std::mem::take(&mut self.gap);
        self.pending = std::mem::take(&mut self.carry);
        Ok(Some(block))
    }
}
