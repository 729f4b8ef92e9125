//! Raw samples from a TCP server (`tcp://HOST:PORT`): the digitiser (or a relay) listens and
//! we connect and read the byte stream; frames split across reads are joined.
//!
//! Without reconnection (headless use) a peer that closes the connection ends the stream;
//! so does a reset (or a keepalive timeout) once bytes have arrived, counted in
//! [`ReaderStats::connection_reset`](super::ReaderStats::connection_reset) so the caller can
//! warn; before any byte it is an [`AcquireError::Lost`]. TCP keepalive is on (probes after
//! [`KEEPALIVE_IDLE`] of silence), so a peer that vanished without closing is noticed.
//! With reconnection (the window) a lost connection is retried with a growing back-off
//! ([`FIRST_BACKOFF`] doubling to [`MAX_BACKOFF`]), each successful reconnection is counted
//! in [`ReaderStats::reconnects`](super::ReaderStats::reconnects), and the partial frame held
//! from the old connection is dropped.

use std::io::{self, Read};
use std::net::{SocketAddr, TcpStream, ToSocketAddrs};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
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
/// Silence after which TCP keepalive probes start (then every 5 s on Linux and macOS, as
/// many probes as the system's default before the connection is declared dead).
pub(crate) const KEEPALIVE_IDLE: Duration = Duration::from_secs(10);

/// Turns TCP keepalive on (best effort: a platform that refuses it only loses the probes).
fn set_keepalive(stream: &TcpStream) {
    let keepalive = socket2::TcpKeepalive::new().with_time(KEEPALIVE_IDLE);
    #[cfg(any(target_os = "linux", target_os = "macos"))]
    let keepalive = keepalive.with_interval(Duration::from_secs(5));
    let _ = socket2::SockRef::from(stream).set_tcp_keepalive(&keepalive);
}

/// True for read errors that mean the connection is gone (reset, aborted, keepalive timeout).
/// On Unix a read timeout is `WouldBlock`, so `TimedOut` there is a keepalive failure.
fn is_lost(kind: io::ErrorKind) -> bool {
    use io::ErrorKind as K;
    matches!(
        kind,
        K::ConnectionReset | K::ConnectionAborted | K::BrokenPipe | K::NotConnected
    ) || (cfg!(unix) && kind == K::TimedOut)
}

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
                set_keepalive(&stream);
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
    /// Bytes received over all connections.
    received: u64,
    /// Set when the stream ended by a reset after data (shared with the reader's stats).
    reset: Arc<AtomicBool>,
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
                Ok(n) => {
                    self.received += n as u64;
                    return Ok(Fill::Bytes(n));
                }
                Err(e) if !self.reconnect && is_lost(e.kind()) => {
                    if self.received == 0 {
                        return Err(AcquireError::Lost {
                            address: self.address.clone(),
                            source: e,
                        });
                    }
                    self.reset.store(true, Ordering::SeqCst);
                    return Ok(Fill::End { truncated: false });
                }
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
                        return Err(AcquireError::Io(io::Error::new(
                            e.kind(),
                            format!(
                                "reading from tcp://{} after {} bytes failed: {e}",
                                self.address, self.received
                            ),
                        )));
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
    reset: Arc<AtomicBool>,
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
        let reset = Arc::new(AtomicBool::new(false));
        let source = TcpSource {
            address: address.to_string(),
            stream: Some(stream),
            reconnect,
            backoff: FIRST_BACKOFF,
            next_attempt: Instant::now(),
            received: 0,
            reset: Arc::clone(&reset),
        };
        let mode = if reconnect { ", reconnecting" } else { "" };
        Ok(Self {
            frames: FrameReader::new(Box::new(source), format.layout()),
            format,
            description: format!("tcp://{address}{mode}, raw {}", format.describe()),
            reset,
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
        ReaderStats {
            connection_reset: self.reset.load(Ordering::SeqCst),
            ..self.frames.stats
        }
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
