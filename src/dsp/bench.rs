//! Throughput measurements of the Welch averager on synthetic data, for `stillpoint bench`:
//! can this machine keep up with a given sample rate and segment length?
//!
//! [`welch_throughput`] pushes a pseudo-random record through a [`Welch`] for a given wall
//! time; [`fft_floor`] runs only the real FFT (f64, same plan) on the same segment count —
//! the floor no Welch implementation with that FFT can beat (copy + transform, no window,
//! no detrend, no accumulation). Both report input samples per second, counting each
//! segment as the `D` new samples it consumes, so the two figures compare directly.

use crate::synth::rng::splitmix64;
use std::time::Instant;

use realfft::RealFftPlanner;

use super::{Result, Welch, WelchConfig};

/// One throughput measurement.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Throughput {
    /// Input samples processed (segments × hop, plus the first segment's overlap).
    pub samples: u64,
    /// Segments transformed.
    pub segments: u64,
    /// Wall time, s.
    pub elapsed_s: f64,
    /// Input samples per second.
    pub samples_per_s: f64,
    /// Worker threads used.
    pub threads: usize,
}

/// Both measurements and their ratio.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct BenchReport {
    /// The full averager.
    pub welch: Throughput,
    /// The FFT-only floor on one thread.
    pub fft_floor: Throughput,
    /// `fft_floor.samples_per_s / welch.samples_per_s` (1 = as fast as the bare FFT; below 1
    /// when the averager uses more threads than the floor).
    pub cost_over_floor: f64,
}

/// Deterministic pseudo-random samples in [−1, 1) (splitmix64).
pub(crate) fn synthetic_samples(len: usize, seed: u64) -> Vec<f64> {
    let mut s = seed;
    (0..len)
        .map(|_| {
            let z = splitmix64(&mut s);
            (z >> 11) as f64 / (1u64 << 52) as f64 - 1.0
        })
        .collect()
}

/// Length of the synthetic record: whole segments, at least ~4 M samples.
fn record_len(config: &WelchConfig) -> usize {
    let hop = config.hop();
    let segments = ((1usize << 22) / hop).max(8);
    (segments - 1) * hop + config.segment
}

/// Measures the Welch averager for about `duration_s` seconds of wall time on `threads`
/// worker threads (1 = the caller's thread only). The averaging mode of `config` is used;
/// `max_averages` is ignored (the average restarts whenever it completes).
///
/// # Errors
/// Invalid settings.
pub(crate) fn welch_throughput(
    config: &WelchConfig,
    duration_s: f64,
    threads: usize,
) -> Result<Throughput> {
    let mut config = config.clone();
    config.max_averages = None;
    let mut welch = Welch::new(config.clone())?;
    welch.set_threads(threads);
    let record = synthetic_samples(record_len(&config), 1);
    let median = matches!(config.averaging, super::Averaging::Median);
    let threads = welch.threads();
    Ok(timed_passes(
        &config,
        record.len(),
        duration_s,
        threads,
        &mut welch,
        |welch| {
            welch.push(&record);
            // Each pass starts its own segments (drop the partial tail between passes).
            welch.discard_pending();
            if median {
                welch.restart();
            }
        },
        |welch| {
            // Every pushed segment is averaged before the clock stops.
            welch.flush();
            std::hint::black_box(welch.spectrum());
        },
    ))
}

/// Runs `pass` on `averager` (one pass over a record of `len` samples per channel) until
/// `duration_s` has passed, then `finish` (averaging what is in flight) before the clock
/// stops.
fn timed_passes<A>(
    config: &WelchConfig,
    len: usize,
    duration_s: f64,
    threads: usize,
    averager: &mut A,
    mut pass: impl FnMut(&mut A),
    finish: impl FnOnce(&mut A),
) -> Throughput {
    let per_pass = ((len - config.segment) / config.hop() + 1) as u64;
    let start = Instant::now();
    let mut passes = 0u64;
    loop {
        pass(averager);
        passes += 1;
        if start.elapsed().as_secs_f64() >= duration_s {
            break;
        }
    }
    finish(averager);
    let elapsed_s = start.elapsed().as_secs_f64().max(1e-9);
    let samples = passes * len as u64;
    Throughput {
        samples,
        segments: passes * per_pass,
        elapsed_s,
        samples_per_s: samples as f64 / elapsed_s,
        threads,
    }
}

/// Measures the FFT-only floor on one thread for about `duration_s` seconds: the same record
/// cut into the same segments, each copied into the FFT input and transformed, nothing else.
///
/// # Errors
/// Invalid settings.
pub(crate) fn fft_floor(config: &WelchConfig, duration_s: f64) -> Result<Throughput> {
    config.validate()?;
    let n = config.segment;
    let hop = config.hop();
    let record = synthetic_samples(record_len(config), 1);
    let mut planner = RealFftPlanner::<f64>::new();
    let fft = planner.plan_fft_forward(n);
    let mut input = fft.make_input_vec();
    let mut output = fft.make_output_vec();
    let mut scratch = fft.make_scratch_vec();
    let start = Instant::now();
    let mut segments = 0u64;
    let mut passes = 0u64;
    let mut sink = 0.0;
    loop {
        let mut at = 0;
        while let Some(segment) = record.get(at..at + n) {
            input.copy_from_slice(segment);
            if fft
                .process_with_scratch(&mut input, &mut output, &mut scratch)
                .is_ok()
            {
                sink += output.get(1).map_or(0.0, |c| c.re);
            }
            segments += 1;
            at += hop;
        }
        passes += 1;
        if start.elapsed().as_secs_f64() >= duration_s {
            break;
        }
    }
    let elapsed_s = start.elapsed().as_secs_f64().max(1e-9);
    std::hint::black_box(sink);
    let samples = passes * record.len() as u64;
    Ok(Throughput {
        samples,
        segments,
        elapsed_s,
        samples_per_s: samples as f64 / elapsed_s,
        threads: 1,
    })
}

/// Measures the two-channel cross-spectral averager ([`super::cross::CrossWelch`]: both
/// PSDs and the cross-spectral density) for about `duration_s` seconds of wall time on
/// `threads` worker threads. `samples` and `samples_per_s` count samples *per channel*, so
/// they compare directly with [`welch_throughput`] (ideal: half of it, twice the work).
///
/// # Errors
/// Invalid settings.
pub fn cross_throughput(
    config: &WelchConfig,
    duration_s: f64,
    threads: usize,
) -> Result<Throughput> {
    let mut config = config.clone();
    config.max_averages = None;
    config.averaging = super::Averaging::Linear;
    let mut cross = super::cross::CrossWelch::new(config.clone())?.with_threads(threads);
    let a = synthetic_samples(record_len(&config), 1);
    let b = synthetic_samples(a.len(), 2);
    Ok(timed_passes(
        &config,
        a.len(),
        duration_s,
        threads.clamp(1, 64),
        &mut cross,
        |cross| {
            cross.push(&a, &b);
            cross.discard_pending();
        },
        |cross| {
            cross.flush();
            std::hint::black_box(cross.spectrum());
        },
    ))
}

/// The window's averager (the caller's thread only) without and with the per-interval
/// spectra of its history ([`Welch::set_intervals`], intervals of 1 s of samples but at
/// least N + 3 hops, as the window cuts them), each for about `duration_s`: what the history
/// costs. Linear averaging.
///
/// # Errors
/// Invalid settings.
pub fn window_history_throughput(
    config: &WelchConfig,
    duration_s: f64,
) -> Result<(Throughput, Throughput)> {
    let mut config = config.clone();
    config.max_averages = None;
    config.averaging = super::Averaging::Linear;
    let record = synthetic_samples(record_len(&config), 1);
    let hop = config.hop() as u64;
    let interval = (config.sample_rate_hz.round() as u64).max(config.segment as u64 + 3 * hop);
    let run = |intervals: bool| -> Result<Throughput> {
        let mut welch = Welch::new(config.clone())?;
        if intervals {
            welch.set_intervals(interval, 0);
        }
        Ok(timed_passes(
            &config,
            record.len(),
            duration_s,
            1,
            &mut welch,
            |welch| {
                welch.push(&record);
                welch.discard_pending();
                std::hint::black_box(welch.take_intervals());
            },
            |welch| {
                std::hint::black_box(welch.spectrum());
            },
        ))
    };
    let plain = run(false)?;
    let with_history = run(true)?;
    Ok((plain, with_history))
}

/// Runs both measurements, each for about `duration_s`.
///
/// # Errors
/// Invalid settings.
pub fn compare(config: &WelchConfig, duration_s: f64, threads: usize) -> Result<BenchReport> {
    let floor = fft_floor(config, duration_s)?;
    let welch = welch_throughput(config, duration_s, threads)?;
    Ok(BenchReport {
        welch,
        fft_floor: floor,
        cost_over_floor: floor.samples_per_s / welch.samples_per_s.max(1e-300),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bench_reports_sane_figures() {
        let config = WelchConfig::new(1.0, 256);
        let r = compare(&config, 0.02, 1).unwrap();
        assert!(r.welch.segments > 0 && r.fft_floor.segments > 0);
        assert!(r.welch.samples_per_s.is_finite() && r.welch.samples_per_s > 0.0);
        assert!(r.cost_over_floor.is_finite() && r.cost_over_floor > 0.0);
        assert!(welch_throughput(&WelchConfig::new(0.0, 256), 0.01, 1).is_err());
        let c = cross_throughput(&config, 0.02, 2).unwrap();
        assert!(c.segments > 0 && c.samples_per_s.is_finite() && c.samples_per_s > 0.0);
        let x = synthetic_samples(1000, 3);
        assert!(x.iter().all(|v| (-1.0..1.0).contains(v)));
    }
}
