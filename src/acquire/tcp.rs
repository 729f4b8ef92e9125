//! Raw samples from a TCP server (`tcp://HOST:PORT`): the digitiser (or a relay) listens and
//! we connect and read the byte stream; frames split across reads are joined.
//!
//! Without reconnection (headless use) a peer that closes the connection ends the stream.
//! With reconnection (the window) a lost connection is retried with a growing back-off
//! ([`FIRST_BACKOFF`] doubling to [`MAX_BACKOFF`]), each successful reconnection is counted
//! in [`ReaderStats::reconnects`](super::ReaderStats::reconnects), and the partial frame held
//! from the old connection is dropped.

use std::io::{self, Read};
use std::net::{SocketAddr, TcpStream, ToSocketAddrs};
use std::thread;
use std::time::{Duration, Instant};

use super::frames::{ByteSource, Fill, FrameReader};
use super::raw::RawFormat;
use super::{AcquireError, ReaderStats, Result, SampleReader};

/// How long one connection attempt may take.
const CONNECT_TIMEOUT: Duration = Duration::from_secs(3);
/// Socket read timeout: the longest a read waits before the deadline is checked again.
const READ_SLICE: Duration = Duration::from_millis(50);
/// First wait before reconnecting.
pub const FIRST_BACKOFF: Duration = Duration::from_millis(100);
/// Longest wait between reconnection attempts.
pub const MAX_BACKOFF: Duration = Duration::from_secs(2);

fn connect(address: &str) -> Result<TcpStream> {
    let error = |source: io::Error| AcquireError::Connect {
        address: address.to_string(),
        source,
    };
    let addrs: Vec<SocketAddr> = address.to_socket_addrs().map_err(error)?.collect();
    let mut last = io::Error::new(
        io::ErrorKind::NotFound,
        "the host name resolves to no address",
    );
    for addr in addrs {
        match TcpStream::connect_timeout(&addr, CONNECT_TIMEOUT) {
            Ok(stream) => {
                stream.set_read_timeout(Some(READ_SLICE)).map_err(error)?;
                // Best effort: latency matters more than throughput for small blocks.
                let _ = stream.set_nodelay(true);
                return Ok(stream);
            }
            Err(e) => last = e,
        }
    }
    Err(error(last))
}

struct TcpSource {
    address: String,
    stream: Option<TcpStream>,
    reconnect: bool,
    backoff: Duration,
    next_attempt: Instant,
}

impl TcpSource {
    fn lost(&mut self) {
        self.stream = None;
        self.next_attempt = Instant::now() + self.backoff;
    }
}

impl ByteSource for TcpSource {
    fn fill(&mut self, buf: &mut [u8], deadline: Option<Instant>) -> Result<Fill> {
        loop {
            let Some(stream) = self.stream.as_mut() else {
                let now = Instant::now();
                if now >= self.next_attempt {
                    match connect(&self.address) {
                        Ok(stream) => {
                            self.stream = Some(stream);
                            self.backoff = FIRST_BACKOFF;
                            return Ok(Fill::Restarted);
                        }
                        Err(_) => {
                            self.backoff = (self.backoff * 2).min(MAX_BACKOFF);
                            self.next_attempt = Instant::now() + self.backoff;
                        }
                    }
                }
                let now = Instant::now();
                let mut nap = self
                    .next_attempt
                    .saturating_duration_since(now)
                    .min(READ_SLICE);
                if let Some(d) = deadline {
                    if d <= now {
                        return Ok(Fill::Idle);
                    }
                    nap = nap.min(d - now);
                }
                thread::sleep(nap);
                continue;
            };
            match stream.read(buf) {
                Ok(0) => {
                    if !self.reconnect {
                        return Ok(Fill::End { truncated: false });
                    }
                    self.lost();
                }
                Ok(n) => return Ok(Fill::Bytes(n)),
                Err(e)
                    if matches!(
                        e.kind(),
                        io::ErrorKind::WouldBlock | io::ErrorKind::TimedOut
                    ) =>
                {
                    if deadline.is_some_and(|d| Instant::now() >= d) {
                        return Ok(Fill::Idle);
                    }
                }
                Err(e) if e.kind() == io::ErrorKind::Interrupted => {}
                Err(e) => {
                    if !self.reconnect {
                        return Err(AcquireError::Connect {
                            address: self.address.clone(),
                            source: e,
                        });
                    }
                    self.lost();
                }
            }
        }
    }
}

/// Raw samples from a TCP connection, as a [`SampleReader`].
pub struct TcpReader {
    frames: FrameReader,
    format: RawFormat,
    description: String,
}

impl TcpReader {
    /// Connects to `address` (`HOST:PORT`, without `tcp://`) and reads raw samples of
    /// `format`. With `reconnect`, a lost connection is retried (see the module docs) instead
    /// of ending the stream.
    ///
    /// # Errors
    /// [`AcquireError::Connect`] naming the address if the first connection fails (refused,
    /// unknown host, timeout); [`AcquireError::Config`] for an inconsistent `format`.
    pub fn connect(address: &str, format: RawFormat, reconnect: bool) -> Result<Self> {
        format.validate()?;
        let stream = connect(address)?;
        let source = TcpSource {
            address: address.to_string(),
            stream: Some(stream),
            reconnect,
            backoff: FIRST_BACKOFF,
            next_attempt: Instant::now(),
        };
        let mode = if reconnect { ", reconnecting" } else { "" };
        Ok(Self {
            frames: FrameReader::new(Box::new(source), format.layout()),
            format,
            description: format!("tcp://{address}{mode}, raw {}", format.describe()),
        })
    }
}

impl SampleReader for TcpReader {
    fn sample_rate_hz(&self) -> f64 {
        self.format.sample_rate_hz
    }

    fn read_block(&mut self, out: &mut [f64]) -> Result<usize> {
        loop {
            if let Some(n) = self.frames.read(out, None)? {
                return Ok(n);
            }
        }
    }

    fn read_block_timeout(&mut self, out: &mut [f64], timeout: Duration) -> Result<Option<usize>> {
        self.frames.read(out, Instant::now().checked_add(timeout))
    }

    fn stats(&self) -> ReaderStats {
        self.frames.stats
    }

    fn describe(&self) -> String {
        self.description.clone()
    }

    fn channels_delivered(&self) -> usize {
        self.frames.channels_delivered()
    }

    fn pair_with(&mut self, channel_b: usize) -> Result<()> {
        self.frames.pair_with(channel_b)?;
        self.description.push_str(&format!(" and {channel_b}"));
        Ok(())
    }

    fn is_live(&self) -> bool {
        true
    }
}
