//! `stillpoint bench`: can this machine keep up with a given rate and segment? Measures the
//! Welch averager's sustained throughput and the bare-FFT floor ([`crate::dsp::bench`]) and
//! the window's per-frame plot preparation ([`crate::model::bench_plot_prep`]); quotes
//! medians of several runs.

use std::io::{self, Write};
use std::process::ExitCode;

use anyhow::{Context, Result};
use serde::Serialize;

use crate::dsp::{WelchConfig, bench};

use super::args::{BenchArgs, LiveChoice, LiveTransport};
use super::bench_live::{self, FIFO_SECONDS, LiveRun};
use super::config;

/// Measurement runs whose median is quoted.
const RUNS: usize = 5;
/// Frame budget of the window at 60 frames per second (ms), for the plot preparation.
const FRAME_BUDGET_MS: f64 = 1000.0 / 60.0;

/// What `stillpoint bench --json` prints.
#[derive(Debug, Serialize)]
struct BenchOutput {
    rate_hz: f64,
    segment: usize,
    window: String,
    overlap: f64,
    threads: usize,
    runs: usize,
    /// Median sustained Welch throughput, input samples per second.
    throughput_samples_per_s: f64,
    /// throughput / rate.
    headroom: f64,
    /// headroom > 1.
    keeps_up: bool,
    /// Channels measured (`--channels`): 2 adds the cross-spectral averager.
    channels: usize,
    /// Median throughput of the two-channel cross-spectral averager, samples per second
    /// *per channel* (`--channels 2`).
    cross_throughput_samples_per_s: Option<f64>,
    /// cross / single-channel throughput on the same samples per channel (ideal 0.5:
    /// twice the transforms).
    cross_ratio: Option<f64>,
    /// Median throughput of the window's averager (one thread, linear), samples per second.
    window_samples_per_s: f64,
    /// The same with the per-interval spectra of the window's history.
    window_history_samples_per_s: f64,
    /// Their ratio (1 = the history costs nothing).
    window_history_ratio: f64,
    /// Median FFT-only floor on one thread, samples per second.
    fft_floor_samples_per_s: f64,
    /// throughput / floor (1 = as fast as the bare FFT on one thread).
    ratio_to_floor: f64,
    /// Median time to prepare a 10⁶-bin spectrum for drawing, ms.
    plot_prep_ms: f64,
    /// plot_prep_ms within one 60 fps frame.
    plot_prep_fits_frame: bool,
    /// The whole live path fed by a generator process (`--live`): for each transport, one
    /// run as fast as it goes and one paced at `rate_hz`.
    live: Vec<LiveRun>,
    /// Live measurements that could not run, one line each.
    live_errors: Vec<String>,
}

/// Runs `stillpoint bench`.
///
/// # Errors
/// Bad options (segment, overlap), stdout closed.
pub fn run(args: &BenchArgs) -> Result<ExitCode> {
    if let Some(to) = args.emit {
        let rate = args.emit_paced.then_some(args.rate);
        bench_live::run_generator(to, rate, args.seconds, args.channels as usize)?;
        return Ok(ExitCode::SUCCESS);
    }
    let welch_args = super::args::WelchArgs {
        segment: Some(args.segment),
        overlap: args.overlap,
        window: args.window,
        detrend: super::args::DetrendArg::Mean,
        averages: None,
        averaging: super::args::AveragingArg::Mean,
        time_constant: 16.0,
    };
    let welch: WelchConfig = config::welch_config(&welch_args, args.rate, None)?;
    let threads = args
        .threads
        .map_or_else(config::worker_threads, |t| t as usize);
    let slice_s = args.seconds / (2 * RUNS) as f64;
    let mut welch_rates = Vec::with_capacity(RUNS);
    let mut floor_rates = Vec::with_capacity(RUNS);
    let mut cross_rates = Vec::with_capacity(RUNS);
    let mut window_rates = Vec::with_capacity(RUNS);
    let mut history_rates = Vec::with_capacity(RUNS);
    let mut history_ratios = Vec::with_capacity(RUNS);
    let channels = args.channels as usize;
    for _ in 0..RUNS {
        let report = bench::compare(&welch, slice_s, threads)?;
        welch_rates.push(report.welch.samples_per_s);
        floor_rates.push(report.fft_floor.samples_per_s);
        // Interleaved with the single-channel runs, so both see the same machine load.
        if channels == 2 {
            cross_rates.push(bench::cross_throughput(&welch, slice_s, threads)?.samples_per_s);
        }
        let (plain, history) = bench::window_history_throughput(&welch, slice_s / 2.0)?;
        window_rates.push(plain.samples_per_s);
        history_rates.push(history.samples_per_s);
        history_ratios.push(history.samples_per_s / plain.samples_per_s.max(1e-300));
    }
    let cross_throughput =
        (channels == 2).then(|| crate::dsp::median::median(&mut cross_rates).unwrap_or(0.0));
    let throughput = crate::dsp::median::median(&mut welch_rates).unwrap_or(0.0);
    let floor = crate::dsp::median::median(&mut floor_rates).unwrap_or(0.0);
    let plot_prep_ms = crate::model::bench_plot_prep(RUNS).as_secs_f64() * 1e3;
    // With two channels the rate is per channel and the cross-spectral averager must keep up.
    let headroom = cross_throughput.unwrap_or(throughput) / args.rate;
    let transports: &[LiveTransport] = match args.live {
        LiveChoice::None => &[],
        LiveChoice::Pipe => &[LiveTransport::Pipe],
        LiveChoice::Tcp => &[LiveTransport::Tcp],
        LiveChoice::Both => &[LiveTransport::Pipe, LiveTransport::Tcp],
    };
    let live_s = (args.seconds / 2.0).max(0.5);
    let mut live = Vec::with_capacity(2 * transports.len());
    let mut live_errors = Vec::new();
    for &transport in transports {
        for rate in [None, Some(args.rate)] {
            // A live path this machine cannot run (no loopback, no process spawning) is
            // reported, not fatal: the averager's figures still stand.
            match bench_live::measure(transport, &welch, threads, rate, live_s, channels) {
                Ok(run) => live.push(run),
                Err(e) => {
                    let text = format!("live {transport:?} measurement failed: {e:#}");
                    super::warn(&text);
                    live_errors.push(text);
                }
            }
        }
    }
    let output = BenchOutput {
        rate_hz: args.rate,
        segment: welch.segment,
        window: welch.window.name().to_string(),
        overlap: welch.overlap,
        threads,
        runs: RUNS,
        throughput_samples_per_s: throughput,
        channels,
        cross_throughput_samples_per_s: cross_throughput,
        cross_ratio: cross_throughput.map(|c| c / throughput.max(1e-300)),
        headroom,
        keeps_up: headroom > 1.0,
        window_samples_per_s: crate::dsp::median::median(&mut window_rates).unwrap_or(0.0),
        window_history_samples_per_s: crate::dsp::median::median(&mut history_rates).unwrap_or(0.0),
        window_history_ratio: crate::dsp::median::median(&mut history_ratios).unwrap_or(0.0),
        fft_floor_samples_per_s: floor,
        ratio_to_floor: throughput / floor,
        plot_prep_ms,
        plot_prep_fits_frame: plot_prep_ms <= FRAME_BUDGET_MS,
        live,
        live_errors,
    };
    let stdout = io::stdout();
    let mut out = stdout.lock();
    if args.json {
        let text = serde_json::to_string_pretty(&output).context("cannot encode the result")?;
        writeln!(out, "{text}").context("cannot write to stdout")?;
    } else {
        write_text(&mut out, &output).context("cannot write to stdout")?;
    }
    Ok(ExitCode::SUCCESS)
}

/// A number with up to 6 decimals and no trailing zeros (`10`, `0.25`).
fn trimmed(value: f64) -> String {
    let text = format!("{value:.6}");
    text.trim_end_matches('0').trim_end_matches('.').to_string()
}

/// The human-readable report.
fn write_text(out: &mut dyn Write, r: &BenchOutput) -> io::Result<()> {
    writeln!(
        out,
        "Welch averager: segment {} samples, {} window, {} % overlap, {} thread{} (medians of {} runs)",
        r.segment,
        r.window,
        r.overlap * 100.0,
        r.threads,
        if r.threads == 1 { "" } else { "s" },
        r.runs
    )?;
    writeln!(
        out,
        "  sustained throughput   {:.1} MS/s",
        r.throughput_samples_per_s / 1e6
    )?;
    writeln!(
        out,
        "  requested rate         {} MS/s  → headroom {:.1}×",
        trimmed(r.rate_hz / 1e6),
        r.headroom
    )?;
    writeln!(out, "  keeps up: {}", if r.keeps_up { "yes" } else { "no" })?;
    writeln!(
        out,
        "  FFT-only floor         {:.1} MS/s (1 thread); averager at {:.2}× the floor",
        r.fft_floor_samples_per_s / 1e6,
        r.ratio_to_floor
    )?;
    if let (Some(cross), Some(ratio)) = (r.cross_throughput_samples_per_s, r.cross_ratio) {
        writeln!(
            out,
            "  two channels + cross-spectrum {:.1} MS/s per channel → {:.2}× the one-channel figure (ideal 0.5)",
            cross / 1e6,
            ratio
        )?;
    }
    writeln!(
        out,
        "  window's averager (1 thread) {:.1} MS/s; with the per-interval history {:.1} MS/s → {:.3}×",
        r.window_samples_per_s / 1e6,
        r.window_history_samples_per_s / 1e6,
        r.window_history_ratio
    )?;
    writeln!(
        out,
        "Window plot preparation (10⁶-bin spectrum → screen columns): {:.2} ms per frame ({} a 60 fps frame of {:.1} ms)",
        r.plot_prep_ms,
        if r.plot_prep_fits_frame {
            "fits"
        } else {
            "exceeds"
        },
        FRAME_BUDGET_MS
    )?;
    if !r.live.is_empty() {
        writeln!(
            out,
            "Live path: raw f32 from a generator process → acquisition thread → averager \
             ({} thread{}{})",
            r.threads,
            if r.threads == 1 { "" } else { "s" },
            if r.channels == 2 {
                "; two interleaved channels with cross-spectrum, rates per channel"
            } else {
                ""
            }
        )?;
    }
    for run in &r.live {
        match run.paced_rate_hz {
            None => writeln!(
                out,
                "  {:<4} as fast as it goes   {:.1} MS/s over {:.1} s  → headroom {:.1}×",
                run.transport,
                run.samples_per_s / 1e6,
                run.elapsed_s,
                run.samples_per_s / r.rate_hz
            )?,
            Some(rate) => writeln!(
                out,
                "  {:<4} paced at {} MS/s     {} samples lost at the source ({} ms FIFO), {} dropped blocks, {:.1} MS/s averaged",
                run.transport,
                trimmed(rate / 1e6),
                run.samples_lost_at_source,
                trimmed(FIFO_SECONDS * 1e3),
                run.dropped_blocks,
                run.samples_per_s / 1e6
            )?,
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn trimmed_drops_trailing_zeros() {
        assert_eq!(trimmed(10.0), "10");
        assert_eq!(trimmed(0.25), "0.25");
    }
}
