//! Sound-card input via cpal (feature `audio`): mono = response only, stereo = force + response.
//!
//! Samples arrive as fractions of full scale (full scale = 1.0, unit "counts" until the user
//! calibrates). The cpal stream lives on its own thread (it is not `Send` on every platform);
//! its callback never blocks: when the consumer falls behind, buffers are dropped and counted,
//! and the gap shows in the next block's `start`.

use crate::error::{Error, Result};
use crate::signal::{Block, ChannelInfo, Role, StreamInfo};
use crate::source::Source;
use cpal::traits::{DeviceTrait, HostTrait, StreamTrait};
use std::sync::Arc;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::mpsc::{Receiver, RecvTimeoutError, SyncSender, TrySendError};
use std::time::Duration;

/// Buffers in flight between the callback and the consumer.
const QUEUE: usize = 512;

/// Convert interleaved samples of any cpal format to per-channel fractions of full scale.
pub fn deinterleave<T: Copy>(
    data: &[T],
    channels: usize,
    to_f64: impl Fn(T) -> f64,
) -> Vec<Vec<f64>> {
    let frames = data.len() / channels.max(1);
    let mut out = vec![Vec::with_capacity(frames); channels];
    for (i, &s) in data.iter().take(frames * channels).enumerate() {
        out[i % channels].push(to_f64(s));
    }
    out
}

/// Full-scale conversions for the integer formats (two's complement and offset binary).
pub fn from_i16(x: i16) -> f64 {
    x as f64 / 32_768.0
}
pub fn from_u16(x: u16) -> f64 {
    (x as f64 - 32_768.0) / 32_768.0
}
pub fn from_i32(x: i32) -> f64 {
    x as f64 / 2_147_483_648.0
}
pub fn from_f32(x: f32) -> f64 {
    x as f64
}

/// Names of the input devices of the default host.
pub fn input_devices() -> Result<Vec<String>> {
    let host = cpal::default_host();
    let devices = host
        .input_devices()
        .map_err(|e| Error::new(format!("cannot list sound-card inputs: {e}")))?;
    Ok(devices.filter_map(|d| d.name().ok()).collect())
}

pub struct AudioSource {
    info: StreamInfo,
    rx: Receiver<Vec<Vec<f64>>>,
    dropped: Arc<AtomicU64>,
    dropped_seen: u64,
    position: u64,
    _keep: std::thread::JoinHandle<()>,
}

impl AudioSource {
    /// Open the named input (`""` = the default input) at `rate` Hz.
    pub fn open(name: &str, rate: u32) -> Result<Self> {
        let host = cpal::default_host();
        let device = if name.is_empty() {
            host.default_input_device()
                .ok_or_else(|| Error::new("there is no default sound-card input"))?
        } else {
            host.input_devices()
                .map_err(|e| Error::new(format!("cannot list sound-card inputs: {e}")))?
                .find(|d| d.name().is_ok_and(|n| n.contains(name)))
                .ok_or_else(|| {
                    Error::new(format!(
                        "no sound-card input named '{name}' (see `tapmodes devices`)"
                    ))
                })?
        };
        let dev_name = device.name().unwrap_or_else(|_| "sound card".into());
        let supported = device
            .supported_input_configs()
            .map_err(|e| Error::new(format!("cannot query '{dev_name}': {e}")))?
            .filter(|c| {
                c.channels() <= 2 && c.min_sample_rate().0 <= rate && rate <= c.max_sample_rate().0
            })
            .max_by_key(|c| c.channels())
            .ok_or_else(|| {
                Error::new(format!(
                    "'{dev_name}' cannot record mono or stereo at {rate} Hz"
                ))
            })?
            .with_sample_rate(cpal::SampleRate(rate));
        let n_ch = supported.channels() as usize;
        let format = supported.sample_format();
        let config: cpal::StreamConfig = supported.into();
        let (tx, rx) = std::sync::mpsc::sync_channel::<Vec<Vec<f64>>>(QUEUE);
        let (ready_tx, ready_rx) = std::sync::mpsc::channel::<std::result::Result<(), String>>();
        let dropped = Arc::new(AtomicU64::new(0));
        let d2 = dropped.clone();
        let thread = std::thread::spawn(move || {
            let push = move |tx: &SyncSender<Vec<Vec<f64>>>, block: Vec<Vec<f64>>| {
                let frames = block.first().map_or(0, Vec::len) as u64;
                if let Err(TrySendError::Full(_)) = tx.try_send(block) {
                    d2.fetch_add(frames, Ordering::Relaxed);
                }
            };
            let err = |e: cpal::StreamError| eprintln!("tapmodes: sound card: {e}");
            let t = tx.clone();
            let built = match format {
                cpal::SampleFormat::F32 => device.build_input_stream(
                    &config,
                    move |d: &[f32], _: &_| push(&t, deinterleave(d, n_ch, from_f32)),
                    err,
                    None,
                ),
                cpal::SampleFormat::I16 => device.build_input_stream(
                    &config,
                    move |d: &[i16], _: &_| push(&t, deinterleave(d, n_ch, from_i16)),
                    err,
                    None,
                ),
                cpal::SampleFormat::U16 => device.build_input_stream(
                    &config,
                    move |d: &[u16], _: &_| push(&t, deinterleave(d, n_ch, from_u16)),
                    err,
                    None,
                ),
                cpal::SampleFormat::I32 => device.build_input_stream(
                    &config,
                    move |d: &[i32], _: &_| push(&t, deinterleave(d, n_ch, from_i32)),
                    err,
                    None,
                ),
                other => {
                    let _ = ready_tx.send(Err(format!("sample format {other} is not supported")));
                    return;
                }
            };
            let stream = match built.and_then(|s| {
                s.play()
                    .map(|_| s)
                    .map_err(|e| cpal::BuildStreamError::BackendSpecific {
                        err: cpal::BackendSpecificError {
                            description: e.to_string(),
                        },
                    })
            }) {
                Ok(s) => s,
                Err(e) => {
                    let _ = ready_tx.send(Err(e.to_string()));
                    return;
                }
            };
            let _ = ready_tx.send(Ok(()));
            drop(tx);
            // Keep the stream alive until the consumer goes away.
            loop {
                std::thread::sleep(Duration::from_millis(200));
                if ready_tx.send(Ok(())).is_err() {
                    break;
                }
            }
            drop(stream);
        });
        match ready_rx.recv_timeout(Duration::from_secs(5)) {
            Ok(Ok(())) => {}
            Ok(Err(e)) => crate::fail!("cannot start recording from '{dev_name}': {e}"),
            Err(_) => crate::fail!("'{dev_name}' did not start recording within 5 s"),
        }
        let channels = (0..n_ch)
            .map(|i| ChannelInfo {
                name: if n_ch == 1 {
                    "mic".into()
                } else if i == 0 {
                    "hammer".into()
                } else {
                    "mic".into()
                },
                role: if n_ch == 1 || i == 1 {
                    Role::Response
                } else {
                    Role::Force
                },
                unit: "counts".into(),
                scale: 1.0,
                full_scale: Some(1.0),
            })
            .collect();
        Ok(AudioSource {
            info: StreamInfo {
                source: format!("audio {dev_name}"),
                sample_rate: rate as f64,
                channels,
            },
            rx,
            dropped,
            dropped_seen: 0,
            position: 0,
            _keep: thread,
        })
    }

    pub fn info_mut(&mut self) -> &mut StreamInfo {
        &mut self.info
    }
}

impl Source for AudioSource {
    fn info(&self) -> &StreamInfo {
        &self.info
    }

    fn next_block(&mut self) -> Result<Option<Block>> {
        let scales: Vec<f64> = self.info.channels.iter().map(|c| c.scale).collect();
        let chans = match self.rx.recv_timeout(Duration::from_millis(200)) {
            Ok(c) => c,
            Err(RecvTimeoutError::Timeout) => vec![Vec::new(); scales.len()],
            Err(RecvTimeoutError::Disconnected) => {
                crate::fail!("the sound card stopped delivering samples (unplugged?)")
            }
        };
        let dropped = self.dropped.load(Ordering::Relaxed);
        self.position += dropped - self.dropped_seen;
        self.dropped_seen = dropped;
        let channels: Vec<Vec<f64>> = chans
            .into_iter()
            .zip(&scales)
            .map(|(c, s)| c.into_iter().map(|v| v * s).collect())
            .collect();
        let block = Block {
            start: self.position,
            channels,
        };
        self.position += block.len() as u64;
        Ok(Some(block))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Full-scale conversions of the integer formats (two's complement; offset binary for
    /// u16): common practice, no source.
    #[test]
    fn formats_convert_to_full_scale_fractions() {
        assert_eq!(from_i16(i16::MIN), -1.0);
        assert_eq!(from_i16(16_384), 0.5);
        assert_eq!(from_u16(0), -1.0);
        assert_eq!(from_u16(32_768), 0.0);
        assert_eq!(from_i32(i32::MIN), -1.0);
        assert_eq!(from_f32(0.25), 0.25);
        let d = deinterleave(&[1i16, -1, 2, -2, 3], 2, |x| x as f64);
        assert_eq!(d, vec![vec![1.0, 2.0], vec![-1.0, -2.0]]);
    }

    /// A WAV-fed stream of blocks through the same conversion gives the samples back.
    #[test]
    fn wav_fed_blocks_round_trip() {
        let samples: Vec<i16> = (0..4000)
            .map(|i| ((i as f64 * 0.05).sin() * 20_000.0) as i16)
            .collect();
        let mut cursor = std::io::Cursor::new(Vec::new());
        {
            let spec = hound::WavSpec {
                channels: 2,
                sample_rate: 48_000,
                bits_per_sample: 16,
                sample_format: hound::SampleFormat::Int,
            };
            let mut w = hound::WavWriter::new(&mut cursor, spec).unwrap();
            for s in &samples {
                w.write_sample(*s).unwrap();
            }
            w.finalize().unwrap();
        }
        cursor.set_position(0);
        let r = hound::WavReader::new(cursor).unwrap();
        let data: Vec<i16> = r.into_samples::<i16>().map(|s| s.unwrap()).collect();
        let blocks: Vec<Vec<Vec<f64>>> = data
            .chunks(256)
            .map(|c| deinterleave(c, 2, from_i16))
            .collect();
        let left: Vec<f64> = blocks.iter().flat_map(|b| b[0].clone()).collect();
        assert_eq!(left.len(), 2000);
        for (k, v) in left.iter().enumerate() {
            assert_eq!(*v, samples[2 * k] as f64 / 32_768.0);
        }
    }
}
