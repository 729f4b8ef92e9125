//! Stream faults at the pipeline level: what the window's acquisition ([`AcqOptions::window`],
//! drop-and-count) feeding the Welch averager, and the [`Engine`] itself, do when a TCP peer
//! disconnects and comes back, a followed file is truncated or rotated, a stream stalls, or
//! the input closes. Each fault must show in the status (reader counters, `Stopped(reason)`,
//! the engine's warnings/`ended`), the pipeline must keep running where that makes sense, and
//! every sample read is either delivered or counted as dropped.
//!
//! The readers themselves (byte-exact volts across a reconnect, reopen after truncation) are
//! tested in tests/sources.rs; here only the layers above them.

#![allow(clippy::unwrap_used)]

use std::io::Write;
use std::net::TcpListener;
use std::path::Path;
use std::thread;
use std::time::{Duration, Instant};
use stillpoint::synth::rng::splitmix64;

use stillpoint::acquire::{
    AcqCommand, AcqEvent, AcqOptions, AcqStatus, Acquisition, SampleFormat, SourceConfig,
    SourceSpec,
};
use stillpoint::dsp::{Welch, WelchConfig};
use stillpoint::model::{Engine, EngineConfig, EngineStatus};

const RATE_HZ: f64 = 50_000.0;
const SEGMENT: usize = 1024;

/// Deterministic samples (splitmix64 → uniform in ±1 V), `n` of them from `seed`.
fn samples(n: usize, seed: u64) -> Vec<f64> {
    let mut state = seed;
    (0..n)
        .map(|_| {
            let z = splitmix64(&mut state);
            (z >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
        })
        .collect()
}

fn f64_bytes(x: &[f64]) -> Vec<u8> {
    x.iter().flat_map(|v| v.to_le_bytes()).collect()
}

fn f32_bytes(x: &[f64]) -> Vec<u8> {
    x.iter().flat_map(|v| (*v as f32).to_le_bytes()).collect()
}

fn raw_config(spec: SourceSpec, format: SampleFormat) -> SourceConfig {
    let mut c = SourceConfig::new(spec);
    c.sample_format = Some(format);
    c.rate_hz = Some(RATE_HZ);
    c
}

/// The window's acquisition options (drop-and-count, never waits on the consumer).
fn window_options() -> AcqOptions {
    AcqOptions {
        block_samples: 1000,
        status_interval: Duration::from_millis(50),
        ..AcqOptions::window()
    }
}

/// The consumer side of the pipeline: blocks into a Welch averager, statuses kept.
struct Pipeline {
    acq: Acquisition,
    welch: Welch,
    received: u64,
    status: Option<AcqStatus>,
    stopped: Option<Option<String>>,
    statuses: usize,
    /// Gap notices received (each discards the segment in progress).
    gaps: u64,
}

impl Pipeline {
    fn open(config: &SourceConfig) -> Self {
        let reader = stillpoint::acquire::open(config).unwrap();
        let acq = Acquisition::spawn(reader, window_options(), None).unwrap();
        Self {
            acq,
            welch: Welch::new(WelchConfig::new(RATE_HZ, SEGMENT)).unwrap(),
            received: 0,
            status: None,
            stopped: None,
            statuses: 0,
            gaps: 0,
        }
    }

    /// Handles events until `done` holds, the stream stops, or `timeout` passes (a hang).
    fn run_until(&mut self, timeout: Duration, mut done: impl FnMut(&Self) -> bool) -> bool {
        let t0 = Instant::now();
        while t0.elapsed() < timeout {
            if done(self) {
                return true;
            }
            if self.stopped.is_some() {
                return false;
            }
            match self.acq.events().recv_timeout(Duration::from_millis(100)) {
                Ok(AcqEvent::Block(b)) => {
                    self.received += b.len() as u64;
                    self.welch.push(&b);
                }
                Ok(AcqEvent::Gap { .. }) => {
                    // As the engine does: no segment spans the gap.
                    self.gaps += 1;
                    self.welch.discard_pending();
                }
                Ok(AcqEvent::Status(s)) => {
                    self.statuses += 1;
                    self.status = Some(s);
                }
                Ok(AcqEvent::Stopped(e)) => self.stopped = Some(e.map(|e| e.to_string())),
                Err(_) => {}
            }
        }
        done(self)
    }

    fn reconnects(&self) -> u64 {
        self.status.as_ref().map_or(0, |s| s.reader.reconnects)
    }

    /// Every sample read was delivered or counted as dropped.
    fn check_accounting(&self) {
        let s = self.status.as_ref().unwrap();
        assert_eq!(
            self.received + s.dropped_samples,
            s.reader.samples,
            "samples unaccounted for: {s:?}"
        );
    }

    /// Segments a continuous stream of `n` samples gives (hop N/2).
    fn expected_segments(n: u64) -> usize {
        let (n, seg, hop) = (n as usize, SEGMENT, SEGMENT / 2);
        if n < seg { 0 } else { (n - seg) / hop + 1 }
    }

    /// Shuts down and reads to the final `Stopped`.
    fn shutdown(mut self) -> Self {
        assert!(self.acq.send(AcqCommand::Shutdown));
        let stopped = self.run_until(Duration::from_secs(20), |_| false) || self.stopped.is_some();
        assert!(stopped, "no Stopped within 20 s of a shutdown");
        self
    }
}

/// A TCP peer drops the connection twice (once mid-sample) and comes back; the window's
/// pipeline (reconnect on) keeps running, counts the reconnects in its status, delivers
/// every whole sample into the averager, and is still running after the peer is gone for
/// good.
#[test]
fn tcp_peer_disconnects_and_reconnects_while_the_average_runs() {
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let address = listener.local_addr().unwrap().to_string();
    let parts = [samples(20_000, 1), samples(15_000, 2), samples(25_000, 3)];
    let total: u64 = parts.iter().map(|p| p.len() as u64).sum();
    let sent = parts.clone();
    let server = thread::spawn(move || {
        for (i, part) in sent.iter().enumerate() {
            let (mut conn, _) = listener.accept().unwrap();
            let mut bytes = f64_bytes(part);
            if i == 0 {
                bytes.extend_from_slice(&[1, 2, 3]); // a partial sample before the drop
            }
            conn.write_all(&bytes).unwrap();
            // closed here (the peer "crashes")
        }
    });
    let mut config = raw_config(SourceSpec::Tcp(address), SampleFormat::F64);
    config.reconnect = true;
    let mut p = Pipeline::open(&config);
    let ok = p.run_until(Duration::from_secs(30), |p| {
        p.received == total && p.reconnects() >= 2
    });
    server.join().unwrap();
    assert!(
        ok,
        "received {} of {total}, reconnects {}, stopped {:?}",
        p.received,
        p.reconnects(),
        p.stopped
    );
    assert_eq!(p.reconnects(), 2);
    assert_eq!(p.status.as_ref().unwrap().reader.partial_frame_bytes, 3);
    // Each reconnection is announced as a gap before the new connection's first block, so
    // the averager starts a fresh segment there: segments are those of each connection.
    assert_eq!(p.gaps, 2);
    assert_eq!(
        p.welch.segments(),
        parts
            .iter()
            .map(|part| Pipeline::expected_segments(part.len() as u64))
            .sum::<usize>()
    );
    assert!(
        p.welch
            .spectrum()
            .unwrap()
            .psd_v2_per_hz
            .iter()
            .all(|v| v.is_finite())
    );
    // The peer is gone: the pipeline keeps retrying (statuses keep coming), it does not end.
    let before = p.statuses;
    let still = !p.run_until(Duration::from_millis(600), |p| p.stopped.is_some());
    assert!(
        still,
        "pipeline ended when the peer went away: {:?}",
        p.stopped
    );
    assert!(p.statuses > before, "no status while reconnecting");
    let p = p.shutdown();
    assert_eq!(p.stopped, Some(None));
    p.check_accounting();
    assert_eq!(p.status.unwrap().dropped_blocks, 0);
}

/// The engine on the same kind of flaky peer: the reconnects appear in the window's status
/// line (warnings) and the stream keeps being averaged; it never reports "ended".
/// (See [`engine_publishes_a_status_change_without_new_segments`] for what happens when the
/// reconnect is the last thing that changes.)
#[test]
fn engine_status_shows_tcp_reconnects() {
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let address = listener.local_addr().unwrap().to_string();
    // The second connection trickles its samples (1000 every 30 ms), so segments keep
    // completing after the reconnect and the engine publishes frames that carry it.
    let server = thread::spawn(move || {
        for seed in 1..=2 {
            let (mut conn, _) = listener.accept().unwrap();
            for chunk in samples(30_000, seed).chunks(1000) {
                conn.write_all(&f64_bytes(chunk)).unwrap();
                if seed == 2 {
                    thread::sleep(Duration::from_millis(30));
                }
            }
        }
        // then the listener is closed: the engine retries
    });
    let mut source = raw_config(SourceSpec::Tcp(address), SampleFormat::F64);
    source.reconnect = true;
    let mut cfg = EngineConfig::new(source);
    cfg.welch.segment = SEGMENT;
    cfg.publish_interval = Duration::from_millis(20);
    let engine = Engine::start(cfg, Box::new(|| {})).unwrap();
    let status = wait_status(&engine, Duration::from_secs(30), |s| {
        s.samples == 60_000 && s.warnings.iter().any(|w| w.contains("reconnect"))
    });
    server.join().unwrap();
    assert_eq!(status.samples, 60_000, "{status:?}");
    assert!(
        status.warnings.iter().any(|w| w == "1 reconnects"),
        "{:?}",
        status.warnings
    );
    assert!(status.ended.is_none() && !status.failed, "{status:?}");
    assert!(status.averages > 0);
    assert_eq!(status.dropped_blocks, 0);
    // The reconnection is a gap: the engine started a new segment there and says so.
    assert_eq!(status.gaps, 1, "{status:?}");
}

/// A status change that arrives after the last completed segment — here the reconnect of a
/// peer whose data all came in one burst — still reaches the window: the engine publishes a
/// frame when the acquisition counters or reader warnings change (regression test for the
/// stale status line found by this file; fixed in src/model/engine.rs).
#[test]
fn engine_publishes_a_status_change_without_new_segments() {
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let address = listener.local_addr().unwrap().to_string();
    let server = thread::spawn(move || {
        for seed in 1..=2 {
            let (mut conn, _) = listener.accept().unwrap();
            conn.write_all(&f64_bytes(&samples(30_000, seed))).unwrap();
        }
    });
    let mut source = raw_config(SourceSpec::Tcp(address), SampleFormat::F64);
    source.reconnect = true;
    let mut cfg = EngineConfig::new(source);
    cfg.welch.segment = SEGMENT;
    cfg.publish_interval = Duration::from_millis(20);
    let engine = Engine::start(cfg, Box::new(|| {})).unwrap();
    let status = wait_status(&engine, Duration::from_secs(10), |s| {
        s.warnings.iter().any(|w| w.contains("reconnect"))
    });
    server.join().unwrap();
    assert!(
        status.warnings.iter().any(|w| w == "1 reconnects"),
        "status line never showed the reconnect: {status:?}"
    );
}

/// Follows frames until `done` holds on the newest status; returns that status (or the last
/// one seen at the timeout).
fn wait_status(
    engine: &Engine,
    timeout: Duration,
    mut done: impl FnMut(&EngineStatus) -> bool,
) -> EngineStatus {
    let t0 = Instant::now();
    let mut last = EngineStatus::default();
    while t0.elapsed() < timeout {
        if let Some(f) = engine.recv_frame_timeout(Duration::from_millis(200)) {
            last = f.status;
            if done(&last) {
                break;
            }
        }
    }
    last
}

fn append(path: &Path, bytes: &[u8]) {
    let mut f = std::fs::OpenOptions::new()
        .append(true)
        .create(true)
        .open(path)
        .unwrap();
    f.write_all(bytes).unwrap();
}

/// A followed raw file grows, is truncated (a logger restarts) and rotated (renamed away, a
/// new file in its place): the pipeline counts both reopenings, keeps running, and receives
/// every sample written.
#[test]
fn followed_file_truncated_then_rotated_keeps_the_pipeline_running() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("live.f32");
    let a = samples(30_000, 11);
    let b = samples(10_000, 12);
    let c = samples(12_000, 13);
    std::fs::write(&path, f32_bytes(&a[..20_000])).unwrap();
    let mut config = raw_config(SourceSpec::Path(path.clone()), SampleFormat::F32);
    config.follow = true;
    let mut p = Pipeline::open(&config);
    assert!(p.run_until(Duration::from_secs(20), |p| p.received == 20_000));
    append(&path, &f32_bytes(&a[20_000..]));
    assert!(p.run_until(Duration::from_secs(20), |p| p.received == 30_000));
    // Truncated and rewritten shorter.
    std::fs::write(&path, f32_bytes(&b)).unwrap();
    let ok = p.run_until(Duration::from_secs(20), |p| {
        p.received == 40_000 && p.reconnects() >= 1
    });
    assert!(
        ok,
        "after truncation: {} received, {:?}",
        p.received, p.status
    );
    // Rotated: renamed away, a fresh file in its place.
    std::fs::rename(&path, dir.path().join("live.f32.1")).unwrap();
    thread::sleep(Duration::from_millis(200));
    std::fs::write(&path, f32_bytes(&c)).unwrap();
    let ok = p.run_until(Duration::from_secs(20), |p| {
        p.received == 52_000 && p.reconnects() >= 2
    });
    assert!(
        ok,
        "after rotation: {} received, {:?}",
        p.received, p.status
    );
    assert_eq!(p.reconnects(), 2);
    assert!(p.stopped.is_none());
    // Both reopenings are gaps: no segment spans a seam between files.
    assert_eq!(p.gaps, 2);
    assert_eq!(
        p.welch.segments(),
        [30_000, 10_000, 12_000]
            .map(Pipeline::expected_segments)
            .iter()
            .sum::<usize>()
    );
    let p = p.shutdown();
    assert_eq!(p.stopped, Some(None));
    // The last status before Stopped has the final counters.
    p.check_accounting();
    assert_eq!(p.received, 52_000);
}

/// A TCP peer stalls for 1.5 s mid-stream and then carries on, then closes (reconnect off,
/// as headless runs do): during the stall the pipeline stays alive and keeps sending
/// statuses, nothing is lost, and the close ends it with `Stopped(None)` after the last sample.
#[test]
fn stalled_stream_resumes_and_a_closed_one_stops_cleanly() {
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let address = listener.local_addr().unwrap().to_string();
    let x = samples(40_000, 21);
    let sent = x.clone();
    let server = thread::spawn(move || {
        let (mut conn, _) = listener.accept().unwrap();
        conn.write_all(&f64_bytes(&sent[..25_000])).unwrap();
        conn.flush().unwrap();
        thread::sleep(Duration::from_millis(1500));
        conn.write_all(&f64_bytes(&sent[25_000..])).unwrap();
    });
    let config = raw_config(SourceSpec::Tcp(address), SampleFormat::F64);
    let mut p = Pipeline::open(&config);
    assert!(p.run_until(Duration::from_secs(20), |p| p.received == 25_000));
    let statuses = p.statuses;
    let segments = p.welch.segments();
    // Stalled: no data, no end, but statuses.
    assert!(
        !p.run_until(Duration::from_millis(700), |p| p.received > 25_000
            || p.stopped.is_some())
    );
    assert!(p.statuses > statuses, "no status during a stall");
    assert_eq!(p.welch.segments(), segments);
    // Resumes, then the peer closes: everything arrives, then Stopped(None).
    let ended = p.run_until(Duration::from_secs(20), |p| p.stopped.is_some());
    server.join().unwrap();
    assert!(ended, "no Stopped after the peer closed");
    assert_eq!(p.stopped, Some(None));
    assert_eq!(p.received, 40_000);
    assert_eq!(p.welch.segments(), Pipeline::expected_segments(40_000));
    let s = p.status.clone().unwrap();
    assert_eq!(
        s.reader.samples, 40_000,
        "final status missing or stale: {s:?}"
    );
    p.check_accounting();
    assert!(
        p.acq.is_finished() || {
            thread::sleep(Duration::from_millis(500));
            p.acq.is_finished()
        }
    );
}

/// The engine on a TCP stream that closes (EOF): the window's engine reconnects TCP sources
/// (issue 14), so the status says it is waiting for the source (not a failure, not ended),
/// keeps the last spectrum, and does not count the close as lost data.
#[test]
fn engine_reports_a_closed_stream() {
    let listener = TcpListener::bind("127.0.0.1:0").unwrap();
    let address = listener.local_addr().unwrap().to_string();
    let server = thread::spawn(move || {
        let (mut conn, _) = listener.accept().unwrap();
        conn.write_all(&f64_bytes(&samples(20_000, 31))).unwrap();
    });
    let source = raw_config(SourceSpec::Tcp(address), SampleFormat::F64);
    let mut cfg = EngineConfig::new(source);
    cfg.welch.segment = SEGMENT;
    cfg.publish_interval = Duration::from_millis(20);
    let engine = Engine::start(cfg, Box::new(|| {})).unwrap();
    let status = wait_status(&engine, Duration::from_secs(60), |s| {
        s.samples == 20_000 && s.averages > 0 && s.waiting_s.is_some()
    });
    server.join().unwrap();
    assert_eq!(status.ended, None, "{status:?}");
    assert!(status.waiting_s.is_some(), "{status:?}");
    assert!(!status.failed);
    assert_eq!(status.samples, 20_000);
    assert_eq!(status.dropped_blocks, 0);
    assert!(status.averages > 0);
}

/// A recording read to its end (as fast as possible) says "end of recording", not a failure,
/// with every sample counted.
#[test]
fn engine_reports_end_of_recording() {
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("rec.f32");
    std::fs::write(&path, f32_bytes(&samples(20_000, 41))).unwrap();
    let source = raw_config(SourceSpec::Path(path), SampleFormat::F32);
    let mut cfg = EngineConfig::new(source);
    cfg.welch.segment = SEGMENT;
    cfg.playback_speed = None;
    cfg.publish_interval = Duration::from_millis(20);
    let engine = Engine::start(cfg, Box::new(|| {})).unwrap();
    let status = wait_status(&engine, Duration::from_secs(30), |s| s.ended.is_some());
    assert_eq!(
        status.ended.as_deref(),
        Some("end of recording"),
        "{status:?}"
    );
    assert!(!status.failed);
    assert_eq!(status.samples, 20_000);
}
