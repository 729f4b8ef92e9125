//! The live half of `stillpoint bench`: the whole headless path (raw f32 bytes → acquisition
//! thread → decode → Welch with worker threads) fed by a generator in a *second process*, over
//! a pipe (what `stillpoint spectrum -` reads) or loopback TCP (`tcp://HOST:PORT`).
//!
//! The generator is this same binary started with the hidden option
//! `bench --emit pipe|tcp` ([`run_generator`]). It loops over a pseudo-random buffer of f32
//! samples, so it costs little more than its `write` calls. Two measurements per transport:
//!
//! - **as fast as possible**: the generator writes without pacing; we read for a fixed wall
//!   time and count the samples averaged (the pipe or socket applies back-pressure, so this
//!   is the rate the receiving side sustains);
//! - **paced at the requested rate**: the generator behaves like a digitiser with a FIFO of
//!   [`FIFO_SECONDS`] of samples: samples are produced on a clock; whatever does not fit in
//!   the FIFO because the receiver is slow is *lost* and counted. Zero lost samples means the
//!   receiver kept up with that rate.

use std::io::{self, BufRead, BufReader, Read, Write};
use std::net::{TcpListener, TcpStream};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use anyhow::{Context, Result, bail};
use serde::{Deserialize, Serialize};

use crate::acquire::{
    self, Endian, RawFormat, RawReader, SampleFormat, SampleReader, SourceConfig,
};
use crate::dsp::WelchConfig;

use super::args::LiveTransport;
use super::pipeline;

/// FIFO of the simulated digitiser in the paced run, seconds of samples.
pub const FIFO_SECONDS: f64 = 0.05;
/// Samples per `write` call of the generator.
const CHUNK_SAMPLES: usize = 1 << 16;
/// Samples in the generator's looped buffer.
const BUFFER_SAMPLES: usize = 1 << 20;
/// How long the generator waits for the receiver to connect (TCP).
const ACCEPT_TIMEOUT: Duration = Duration::from_secs(20);

/// What the generator process reports on its stderr when it ends (one JSON line).
#[derive(Debug, Clone, Copy, Default, Serialize, Deserialize)]
pub struct GeneratorReport {
    /// Samples (frames, with several channels) written to the pipe or socket.
    pub samples_written: u64,
    /// Samples (frames) the simulated digitiser produced but could not hold (paced runs only).
    pub samples_lost: u64,
    /// Wall time from the first write to the last, s.
    pub elapsed_s: f64,
}

/// One live measurement.
#[derive(Debug, Clone, Serialize)]
pub struct LiveRun {
    /// "pipe" or "tcp".
    pub transport: &'static str,
    /// Requested rate of a paced run (Hz); `None`: as fast as possible.
    pub paced_rate_hz: Option<f64>,
    /// Interleaved channels in the stream (2: averaged with their cross-spectrum).
    pub channels: usize,
    /// Samples (per channel) that went through the averager.
    pub samples_averaged: u64,
    /// Wall time from starting the source to the last segment averaged, s.
    pub elapsed_s: f64,
    /// samples_averaged / elapsed_s (per channel).
    pub samples_per_s: f64,
    /// Samples (per channel) the generator lost because its FIFO overflowed (paced runs).
    pub samples_lost_at_source: u64,
    /// Blocks the acquisition thread dropped (always 0: the headless path blocks instead).
    pub dropped_blocks: u64,
    /// Periodograms averaged.
    pub segments: usize,
}

/// Runs the generator (`stillpoint bench --emit pipe|tcp`): raw little-endian f32 to stdout
/// (`pipe`) or to the first TCP client of a loopback listener whose port is printed on
/// stdout first, paced at `rate` or (`None`) as fast as possible, for `seconds`; `channels`
/// interleaved channels (`rate` and the report in frames).
///
/// # Errors
/// The listener cannot be made or nobody connects; a write fails other than by the reader
/// going away.
pub fn run_generator(
    to: LiveTransport,
    rate: Option<f64>,
    seconds: f64,
    channels: usize,
) -> Result<()> {
    let report = match to {
        LiveTransport::Pipe => {
            let stdout = io::stdout();
            let mut out = stdout.lock();
            generate(&mut out, rate, seconds, channels)?
        }
        LiveTransport::Tcp => {
            let listener = TcpListener::bind("127.0.0.1:0").context("cannot listen on loopback")?;
            let port = listener.local_addr().context("no local address")?.port();
            {
                let stdout = io::stdout();
                let mut out = stdout.lock();
                writeln!(out, "{port}").context("cannot write the port")?;
                out.flush().context("cannot write the port")?;
            }
            let mut stream = accept_one(&listener)?;
            let report = generate(&mut stream, rate, seconds, channels)?;
            let _ = stream.shutdown(std::net::Shutdown::Both);
            report
        }
    };
    let line = serde_json::to_string(&report).context("cannot encode the report")?;
    writeln!(io::stderr().lock(), "{line}").context("cannot write the report")?;
    Ok(())
}

fn accept_one(listener: &TcpListener) -> Result<TcpStream> {
    listener
        .set_nonblocking(true)
        .context("cannot poll the listener")?;
    let deadline = Instant::now() + ACCEPT_TIMEOUT;
    loop {
        match listener.accept() {
            Ok((stream, _)) => {
                stream
                    .set_nonblocking(false)
                    .context("cannot configure the connection")?;
                return Ok(stream);
            }
            Err(e) if e.kind() == io::ErrorKind::WouldBlock && Instant::now() < deadline => {
                std::thread::sleep(Duration::from_millis(2));
            }
            Err(e) => return Err(e).context("nobody connected to the generator"),
        }
    }
}

/// Writes f32 samples: unpaced (`rate` = None) until `seconds` pass or the reader goes away;
/// paced: `rate × seconds` samples on a clock, with a FIFO of [`FIFO_SECONDS`].
///
/// With `channels` > 1 the stream is interleaved frames: `rate` is frames per second, and
/// writes and losses are whole frames (a digitiser loses frames, never half of one); the
/// report counts frames.
fn generate(
    out: &mut dyn Write,
    rate: Option<f64>,
    seconds: f64,
    channels: usize,
) -> Result<GeneratorReport> {
    let samples = crate::dsp::bench::synthetic_samples(BUFFER_SAMPLES, 7);
    let bytes: Vec<u8> = samples
        .iter()
        .flat_map(|&s| (s as f32).to_le_bytes())
        .collect();
    let channels = channels.max(1);
    let frame_bytes = 4 * channels;
    // Frames per write (the FIFO's least size, so its time does not shrink with channels);
    // the looped buffer is a whole number of frames.
    let chunk_frames = CHUNK_SAMPLES;
    let bytes = bytes
        .get(..bytes.len() - bytes.len() % frame_bytes)
        .unwrap_or(&[])
        .to_vec();
    let chunk_bytes = chunk_frames * frame_bytes;
    let mut report = GeneratorReport::default();
    let mut offset = 0_usize;
    let start = Instant::now();
    let total = rate.map(|r| (r * seconds) as u64);
    let fifo = rate.map_or(0, |r| (r * FIFO_SECONDS).max(chunk_frames as f64) as u64);
    // Paced: samples produced by the clock so far, whether written or lost.
    let mut produced_done = 0_u64;
    loop {
        let now = start.elapsed().as_secs_f64();
        let want = match (rate, total) {
            (Some(r), Some(total)) => {
                if produced_done >= total {
                    break;
                }
                let produced = ((r * now) as u64).min(total);
                let backlog = produced - produced_done;
                if backlog > fifo {
                    // The FIFO overflowed while we waited on the reader: those are gone.
                    report.samples_lost += backlog - fifo;
                    produced_done += backlog - fifo;
                }
                let backlog = produced - produced_done;
                if backlog < (chunk_frames as u64).min(total - produced_done) {
                    std::thread::sleep(Duration::from_micros(100));
                    continue;
                }
                (backlog as usize).min(chunk_frames)
            }
            _ => {
                if now >= seconds {
                    break;
                }
                chunk_frames
            }
        };
        if offset + want * frame_bytes > bytes.len() {
            offset = 0;
        }
        let piece = bytes
            .get(offset..offset + want * frame_bytes)
            .unwrap_or(&[]);
        offset = (offset + chunk_bytes) % bytes.len();
        match out.write_all(piece) {
            Ok(()) => {}
            Err(e)
                if matches!(
                    e.kind(),
                    io::ErrorKind::BrokenPipe | io::ErrorKind::ConnectionReset
                ) =>
            {
                break;
            }
            Err(e) => return Err(e).context("generator write failed"),
        }
        report.samples_written += want as u64;
        produced_done += want as u64;
    }
    let _ = out.flush();
    report.elapsed_s = start.elapsed().as_secs_f64();
    Ok(report)
}

/// The generator child and the sample reader connected to it.
struct Link {
    child: Child,
    reader: Box<dyn SampleReader>,
}

/// Starts the generator and opens the receiving reader; with `channels` 2 the generator's
/// stream is read as interleaved pairs (its sample rate is `channels × rate`) and the reader
/// delivers both channels.
fn start_link(
    transport: LiveTransport,
    rate: Option<f64>,
    seconds: f64,
    channels: usize,
) -> Result<Link> {
    let exe = std::env::current_exe().context("cannot find this program to start the generator")?;
    let mut command = Command::new(exe);
    command
        .arg("bench")
        .arg("--emit")
        .arg(match transport {
            LiveTransport::Pipe => "pipe",
            LiveTransport::Tcp => "tcp",
        })
        .arg("--seconds")
        .arg(seconds.to_string())
        .arg("--channels")
        .arg(channels.to_string())
        .stdin(Stdio::null())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    if let Some(rate) = rate {
        command
            .arg("--emit-paced")
            .arg("--rate")
            .arg(rate.to_string());
    }
    let mut child = command
        .spawn()
        .context("cannot start the generator process")?;
    let Some(stdout) = child.stdout.take() else {
        let _ = child.kill();
        bail!("the generator has no output pipe");
    };
    // The bench does not need the real rate: the averager's settings do not depend on it.
    let nominal_rate = rate.unwrap_or(1e8);
    let reader: Box<dyn SampleReader> = match transport {
        LiveTransport::Pipe => {
            let format = RawFormat {
                sample_format: SampleFormat::F32,
                endian: Endian::Little,
                channels,
                channel: 0,
                sample_rate_hz: nominal_rate,
                volts_per_unit: 1.0,
            };
            let mut reader = RawReader::new(stdout, format)?;
            if channels == 2 {
                reader.pair_with(1)?;
            }
            Box::new(reader)
        }
        LiveTransport::Tcp => {
            let mut line = String::new();
            let mut lines = BufReader::new(stdout);
            if lines.read_line(&mut line).is_err() || line.trim().parse::<u16>().is_err() {
                let _ = child.kill();
                let _ = child.wait();
                bail!("the generator did not say which port it listens on");
            }
            let mut config = SourceConfig::new(acquire::SourceSpec::Tcp(format!(
                "127.0.0.1:{}",
                line.trim()
            )));
            config.sample_format = Some(SampleFormat::F32);
            config.rate_hz = Some(nominal_rate);
            config.channels = channels;
            config.cross_channel = (channels == 2).then_some(1);
            match acquire::open(&config) {
                Ok(reader) => reader,
                Err(e) => {
                    // Do not leave the generator waiting for a connection.
                    let _ = child.kill();
                    let _ = child.wait();
                    return Err(e.into());
                }
            }
        }
    };
    Ok(Link { child, reader })
}

/// Reads the generator's report from its stderr after it exited.
fn finish_link(mut child: Child) -> Result<GeneratorReport> {
    let mut text = String::new();
    if let Some(mut stderr) = child.stderr.take() {
        let _ = stderr.read_to_string(&mut text);
    }
    let status = child.wait().context("the generator process was lost")?;
    let last = text.lines().rev().find(|l| l.starts_with('{'));
    match last.map(serde_json::from_str::<GeneratorReport>) {
        Some(Ok(report)) => Ok(report),
        _ => bail!(
            "the generator ended ({status}) without its report: {}",
            text.lines().next().unwrap_or("no output")
        ),
    }
}

/// Streams from a generator process through the real headless path and measures it.
/// `rate`: pace the generator at that rate (a digitiser with a FIFO); `None`: as fast as it
/// goes, for `seconds` of wall time.
///
/// # Errors
/// The generator cannot be started or does not report; the stream fails.
pub fn measure(
    transport: LiveTransport,
    welch: &WelchConfig,
    threads: usize,
    rate: Option<f64>,
    seconds: f64,
    channels: usize,
) -> Result<LiveRun> {
    let Link { mut child, reader } = start_link(transport, rate, seconds, channels)?;
    let stop_after = match rate {
        Some(_) => None,
        None => Some(Duration::from_secs_f64(seconds)),
    };
    let start = Instant::now();
    let streamed = pipeline::average_stream(reader, welch, channels, threads, stop_after);
    let elapsed_s = start.elapsed().as_secs_f64();
    let streamed = match streamed {
        Ok(s) => s,
        Err(e) => {
            let _ = child.kill();
            let _ = child.wait();
            return Err(e);
        }
    };
    let report = finish_link(child)?;
    Ok(LiveRun {
        transport: match transport {
            LiveTransport::Pipe => "pipe",
            LiveTransport::Tcp => "tcp",
        },
        paced_rate_hz: rate,
        channels,
        samples_averaged: streamed.samples_averaged,
        elapsed_s,
        samples_per_s: streamed.samples_averaged as f64 / elapsed_s.max(1e-9),
        samples_lost_at_source: report.samples_lost,
        dropped_blocks: streamed.dropped_blocks,
        segments: streamed.segments,
    })
}
