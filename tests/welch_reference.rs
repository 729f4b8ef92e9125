//! The Welch averager against outside references:
//! - scipy 1.17.1 / numpy 2.4.6 `scipy.signal.welch` on a committed signal, every window ×
//!   detrend, several segment lengths (incl. 1000, 3000 and odd 999) and overlaps, mean and
//!   median averages (tests/reference/make_welch_refs.py → tests/data/welch/);
//! - T1 Parseval / white-noise level and T2 tone reading (METHODS.md §9; Heinzel et al. 2002
//!   §9, §13);
//! - T4 variance of the averaged estimate, σ/S = 1/√K_eff (Welch 1967; Percival & Walden 1993);
//! - behaviour of the streaming interface: block-size independence, exponential average,
//!   max-hold, median robustness, restart, NaN/Inf segment skipping (common practice).

#![allow(clippy::unwrap_used)] // test helpers outside #[test] functions unwrap too

use std::path::PathBuf;
use stillpoint::synth::rng::splitmix64;

use stillpoint::dsp::welch::welch;
use stillpoint::dsp::{Averaging, Detrend, Welch, WelchConfig, WindowKind};

fn data_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("tests/data/welch")
}

fn read_f64(name: &str) -> Vec<f64> {
    let bytes = std::fs::read(data_dir().join(name)).unwrap();
    bytes
        .chunks_exact(8)
        .map(|c| f64::from_le_bytes(c.try_into().unwrap()))
        .collect()
}

/// splitmix64 uniform and Box–Muller Gaussian generator (fixed seeds).
struct Rng(u64);

impl Rng {
    fn uniform(&mut self) -> f64 {
        let z = splitmix64(&mut self.0);
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }

    fn gauss(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
    }

    fn noise(&mut self, len: usize, sigma: f64) -> Vec<f64> {
        (0..len).map(|_| sigma * self.gauss()).collect()
    }
}

#[test]
fn agrees_with_scipy_welch() {
    let x = read_f64("input.f64");
    let refs = read_f64("refs.f64");
    let index = std::fs::read_to_string(data_dir().join("index.csv")).unwrap();
    assert_eq!(x.len(), 20000);
    let mut cases = 0;
    let mut overall = 0.0f64;
    for line in index.lines().skip(2) {
        let f: Vec<&str> = line.split(',').collect();
        let (name, window, segment, overlap) = (f[0], f[1], f[2], f[3]);
        let (detrend, average, first, used, offset, bins) = (f[5], f[6], f[7], f[8], f[9], f[10]);
        let segment: usize = segment.parse().unwrap();
        let mut config = WelchConfig::new(2000.0, segment);
        config.overlap = overlap.parse().unwrap();
        assert_eq!(
            segment - config.hop(),
            f[4].parse::<usize>().unwrap(),
            "{name}: overlap samples"
        );
        config.window = WindowKind::parse(window).unwrap();
        config.detrend = Detrend::parse(detrend).unwrap();
        let first: usize = first.parse().unwrap();
        let used: usize = used.parse().unwrap();
        let offset: usize = offset.parse().unwrap();
        let bins: usize = bins.parse().unwrap();
        let expect = &refs[offset..offset + bins];
        let got = match (average, name) {
            ("mean", n) if n.starts_with("mean-limit7") => {
                // Whole stream pushed; the average stops after 7 segments.
                config.max_averages = Some(7);
                let mut w = Welch::new(config).unwrap();
                w.push(&x);
                assert!(w.is_complete());
                w.spectrum().unwrap()
            }
            ("median", n) if n.starts_with("median-last6") => {
                // Whole stream pushed; the median slides over the last 6 segments.
                config.averaging = Averaging::Median;
                config.max_averages = Some(6);
                let mut w = Welch::new(config).unwrap();
                w.push(&x);
                let s = w.spectrum().unwrap();
                assert_eq!(s.averages, 6);
                s
            }
            ("median", _) => {
                config.averaging = Averaging::Median;
                welch(&x[first..first + used], &config).unwrap()
            }
            _ => welch(&x[first..first + used], &config).unwrap(),
        };
        assert_eq!(got.len(), bins, "{name}");
        let peak = expect.iter().cloned().fold(0.0, f64::max);
        let mut worst = 0.0f64;
        for (g, e) in got.psd_v2_per_hz.iter().zip(expect) {
            if *e > 1e-12 * peak {
                worst = worst.max(((g - e) / e).abs());
            } else {
                assert!((g - e).abs() <= 1e-12 * peak * 1.001, "{name}: tiny bin");
            }
        }
        assert!(worst <= 1e-9, "{name}: worst relative error {worst:e}");
        overall = overall.max(worst);
        cases += 1;
    }
    assert_eq!(cases, 102);
    println!("worst relative deviation from scipy over {cases} cases: {overall:e}");
}

#[test]
fn t1_white_noise_level_and_parseval() {
    // METHODS.md §9 T1: σ² = 1, f_s = 1 kHz, N = 1024, Hann 50 %: mean PSD = 2σ²/f_s within
    // 3/√(K_eff · bins); Σ PSD Δf = sample variance within 0.5 % (Heinzel et al. 2002 §9).
    let x = Rng(11).noise(1 << 18, 1.0);
    let s = welch(&x, &WelchConfig::new(1000.0, 1024)).unwrap();
    let inner = &s.psd_v2_per_hz[1..512];
    let mean = inner.iter().sum::<f64>() / inner.len() as f64;
    let tol = 3.0 / (s.k_eff * inner.len() as f64).sqrt();
    assert!(((mean - 2e-3) / 2e-3).abs() < tol, "mean PSD {mean}");
    let total: f64 = s.psd_v2_per_hz.iter().sum::<f64>() * s.resolution_hz;
    let m = x.iter().sum::<f64>() / x.len() as f64;
    let var = x.iter().map(|v| (v - m).powi(2)).sum::<f64>() / x.len() as f64;
    assert!(
        ((total - var) / var).abs() < 5e-3,
        "Σ PSD Δf {total} vs {var}"
    );
    // K = ⌊(L − N)/D⌋ + 1 and Hann's K_eff = 18K²/(19K − 1) (Percival & Walden 1993).
    let k = ((1 << 18) - 1024) / 512 + 1;
    assert_eq!(s.averages, k);
    let kf = k as f64;
    assert!((s.k_eff - 18.0 * kf * kf / (19.0 * kf - 1.0)).abs() < 1e-9 * kf);
    assert!((s.enbw_hz - 1.5 * 1000.0 / 1024.0).abs() < 1e-12);
}

fn tone(len: usize, rms: f64, bin: f64, n: usize) -> Vec<f64> {
    let a = rms * 2f64.sqrt();
    (0..len)
        .map(|i| a * (2.0 * std::f64::consts::PI * bin * i as f64 / n as f64 + 0.3).sin())
        .collect()
}

#[test]
fn t2_tone_reading() {
    // METHODS.md §9 T2 (Heinzel et al. 2002 §9, §13): rms 0.3 at bin 123.4, Hann:
    // Σ_{±6} PSD Δf = 0.0900 (rel. < 1e-4); the PS peak (PSD × ENBW) is 0.906 dB low.
    let n = 1024;
    let x = tone(16 * n, 0.3, 123.4, n);
    let s = welch(&x, &WelchConfig::new(n as f64, n)).unwrap();
    let sum: f64 = s.psd_v2_per_hz[117..=129].iter().sum::<f64>() * s.resolution_hz;
    assert!(((sum - 0.09) / 0.09).abs() < 1e-4, "sum {sum}");
    let peak_ps = s.psd_v2_per_hz.iter().cloned().fold(0.0, f64::max) * s.enbw_hz;
    let low_db = 10.0 * (peak_ps / 0.09).log10();
    assert!((low_db + 0.906).abs() < 0.001, "peak {low_db} dB");
    // HFT95: |peak error| ≤ 0.0044 dB at any offset (allowing 1e-4 dB for the image
    // frequency's side lobes).
    let mut c = WelchConfig::new(n as f64, n);
    c.window = WindowKind::FlatTop;
    for i in 0..=10 {
        let bin = 100.0 + i as f64 * 0.05;
        let s = welch(&tone(16 * n, 0.3, bin, n), &c).unwrap();
        let peak_ps = s.psd_v2_per_hz.iter().cloned().fold(0.0, f64::max) * s.enbw_hz;
        let err_db = 10.0 * (peak_ps / 0.09).log10();
        assert!(err_db.abs() <= 0.0045, "offset {bin}: {err_db} dB");
    }
}

#[test]
fn t4_welch_variance() {
    // METHODS.md §9 T4 (Welch 1967; Percival & Walden 1993): Hann 50 %, σ/S = 1/√K_eff with
    // K_eff = 18K²/(19K − 1), within 2 %, for K = 5, 20, 100. Small N, many records.
    let n = 64;
    let config = WelchConfig::new(1.0, n);
    let truth = 2.0; // 2σ²/f_s
    let mut rng = Rng(4);
    for (k, records) in [(5usize, 1500usize), (20, 1500), (100, 1200)] {
        let len = (k - 1) * 32 + n;
        let (mut sq, mut count) = (0.0, 0usize);
        let mut k_eff = 0.0;
        for _ in 0..records {
            let s = welch(&rng.noise(len, 1.0), &config).unwrap();
            assert_eq!(s.averages, k);
            k_eff = s.k_eff;
            for p in &s.psd_v2_per_hz[2..=30] {
                sq += (p / truth - 1.0).powi(2);
                count += 1;
            }
        }
        let measured = (sq / count as f64).sqrt();
        let kf = k as f64;
        let expect_k_eff = 18.0 * kf * kf / (19.0 * kf - 1.0);
        assert!((k_eff - expect_k_eff).abs() < 1e-9 * kf);
        let predicted = 1.0 / k_eff.sqrt();
        assert!(
            ((measured - predicted) / predicted).abs() < 0.02,
            "K = {k}: σ/S {measured} vs {predicted}"
        );
    }
}

/// PSD of each single segment (linear Welch limited to 1 segment at each start).
fn segment_psds(x: &[f64], config: &WelchConfig) -> Vec<Vec<f64>> {
    let (n, d) = (config.segment, config.hop());
    (0..=(x.len() - n) / d)
        .map(|s| {
            let mut c = config.clone();
            c.averaging = Averaging::Linear;
            welch(&x[s * d..s * d + n], &c).unwrap().psd_v2_per_hz
        })
        .collect()
}

fn all_modes() -> Vec<(Averaging, Option<usize>)> {
    vec![
        (Averaging::Linear, None),
        (Averaging::Linear, Some(9)),
        (
            Averaging::Exponential {
                time_constant_segments: 4.5,
            },
            None,
        ),
        (Averaging::Median, None),
        (Averaging::Median, Some(6)),
        (Averaging::MaxHold, None),
    ]
}

#[test]
fn streaming_in_random_blocks_is_bit_identical() {
    let mut rng = Rng(7);
    let x = rng.noise(20_000, 1.0);
    for (averaging, max_averages) in all_modes() {
        for (n, overlap, detrend) in [
            (256, 0.5, Detrend::Mean),
            (300, 0.75, Detrend::Linear),
            (128, 0.0, Detrend::None),
        ] {
            let mut c = WelchConfig::new(500.0, n);
            c.overlap = overlap;
            c.detrend = detrend;
            c.averaging = averaging;
            c.max_averages = max_averages;
            let whole = welch(&x, &c).unwrap();
            let mut w = Welch::new(c.clone()).unwrap();
            let mut at = 0;
            let mut accepted = 0;
            while at < x.len() {
                let len = ((rng.uniform() * 700.0) as usize).min(x.len() - at);
                accepted += w.push(&x[at..at + len]);
                at += len;
            }
            let s = w.spectrum().unwrap();
            assert_eq!(s, whole, "{averaging:?} {max_averages:?} n={n}");
            assert_eq!(accepted, w.segments());
        }
    }
}

#[test]
fn exponential_average_follows_its_recursion() {
    let tau = 4.0;
    let mut c = WelchConfig::new(1.0, 128);
    c.averaging = Averaging::Exponential {
        time_constant_segments: tau,
    };
    let mut rng = Rng(21);
    let mut x = rng.noise(128 * 20, 1.0);
    x.extend(rng.noise(128 * 20, 2.0));
    let per = segment_psds(&x, &c);
    // First τ segments averaged linearly, then weight 1/τ each.
    let mut e = vec![0.0; per[0].len()];
    for (s, p) in per.iter().enumerate() {
        let alpha = 1.0 / ((s + 1) as f64).min(tau);
        for (a, v) in e.iter_mut().zip(p) {
            *a += (v - *a) * alpha;
        }
    }
    let got = welch(&x, &c).unwrap();
    for (g, r) in got.psd_v2_per_hz.iter().zip(&e) {
        assert!((g - r).abs() <= 1e-12 * r.abs().max(1e-300), "{g} vs {r}");
    }
    assert_eq!(got.averages, per.len());
    // After the step to σ = 2 the level has moved most of the way to 4× (2σ²/f_s = 8).
    let level = got.psd_v2_per_hz[5..60].iter().sum::<f64>() / 55.0;
    assert!(level > 6.0 && level < 10.0, "level {level}");
    // No overlap: steady-state K_eff of an exponential average is 2τ − 1.
    let mut c0 = c.clone();
    c0.overlap = 0.0;
    let long = welch(&rng.noise(128 * 200, 1.0), &c0).unwrap();
    assert!(
        (long.k_eff - (2.0 * tau - 1.0)).abs() < 1e-6,
        "{}",
        long.k_eff
    );
    // Linear while fewer than τ segments: equals the linear K_eff.
    let short = welch(&rng.noise(256, 1.0), &c).unwrap();
    assert_eq!(short.averages, 3);
    let lin = WindowKind::Hann.k_eff(128, 64, short.averages);
    assert!(
        (short.k_eff - lin).abs() < 1e-12,
        "{} vs {lin}",
        short.k_eff
    );
}

#[test]
fn max_hold_is_the_binwise_maximum() {
    let mut c = WelchConfig::new(1.0, 64);
    c.averaging = Averaging::MaxHold;
    let x = Rng(5).noise(64 * 30, 1.0);
    let per = segment_psds(&x, &c);
    let got = welch(&x, &c).unwrap();
    for (k, g) in got.psd_v2_per_hz.iter().enumerate() {
        let max = per.iter().map(|p| p[k]).fold(f64::NEG_INFINITY, f64::max);
        assert_eq!(*g, max);
    }
}

#[test]
fn median_resists_a_burst_that_moves_the_mean() {
    let mut rng = Rng(9);
    let mut x = rng.noise(128 * 41, 1.0);
    for v in &mut x[128 * 20..128 * 21] {
        *v *= 100.0;
    }
    let mut c = WelchConfig::new(1.0, 128);
    c.overlap = 0.0;
    let mean = welch(&x, &c).unwrap();
    c.averaging = Averaging::Median;
    let median = welch(&x, &c).unwrap();
    let level = |s: &[f64]| s[5..60].iter().sum::<f64>() / 55.0;
    // Mean: (40·2 + 2·10⁴)/41 ≈ 490; median-with-bias: ≈ 2 (within its scatter).
    assert!(level(&mean.psd_v2_per_hz) > 300.0);
    assert!((level(&median.psd_v2_per_hz) - 2.0).abs() < 0.3);
}

#[test]
fn restart_forgets_the_average_but_keeps_the_position() {
    let mut rng = Rng(13);
    let junk = rng.noise(3 * 256, 50.0);
    let x = rng.noise(256 * 10, 1.0);
    let mut c = WelchConfig::new(1.0, 256);
    c.overlap = 0.0;
    for (averaging, max_averages) in all_modes() {
        c.averaging = averaging;
        c.max_averages = max_averages;
        let fresh = welch(&x, &c).unwrap();
        let mut w = Welch::new(c.clone()).unwrap();
        w.push(&junk);
        w.restart();
        assert!(w.spectrum().is_none());
        assert_eq!(w.segments(), 0);
        w.push(&x);
        assert_eq!(w.spectrum().unwrap(), fresh, "{averaging:?}");
    }
    // A complete linear average ignores data until restarted.
    c.averaging = Averaging::Linear;
    c.max_averages = Some(2);
    let mut w = Welch::new(c).unwrap();
    assert_eq!(w.push(&x), 2);
    assert!(w.is_complete());
    assert_eq!(w.push(&x), 0);
    w.restart();
    assert!(!w.is_complete());
    assert_eq!(w.push(&x), 2);
}

#[test]
fn non_finite_segments_are_skipped_and_counted() {
    let mut x = Rng(17).noise(128 * 12, 1.0);
    let c = WelchConfig::new(1.0, 128);
    let per = segment_psds(&x, &c);
    // Sample 700 lies in segments 4 and 5 (starts 512 and 640, hop 64... N = 128, D = 64):
    // segments s with 64 s ≤ 700 < 64 s + 128 → s = 10 only for… compute explicitly.
    let bad: Vec<usize> = (0..per.len())
        .filter(|s| s * 64 <= 700 && 700 < s * 64 + 128)
        .collect();
    assert_eq!(bad.len(), 2);
    for value in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
        x[700] = value;
        let mut w = Welch::new(c.clone()).unwrap();
        w.push(&x);
        assert_eq!(w.skipped_segments(), 2);
        let s = w.spectrum().unwrap();
        assert_eq!(s.averages, per.len() - 2);
        for (k, g) in s.psd_v2_per_hz.iter().enumerate() {
            let good: Vec<f64> = (0..per.len())
                .filter(|s| !bad.contains(s))
                .map(|s| per[s][k])
                .collect();
            let mean = good.iter().sum::<f64>() / good.len() as f64;
            assert!(g.is_finite());
            assert!((g - mean).abs() <= 1e-12 * mean.max(1e-300));
        }
    }
    // Large but finite samples are not mistaken for non-finite ones…
    x[700] = 1e100;
    let mut w = Welch::new(c.clone()).unwrap();
    w.push(&x);
    assert_eq!(w.skipped_segments(), 0);
    assert!(
        w.spectrum()
            .unwrap()
            .psd_v2_per_hz
            .iter()
            .all(|p| p.is_finite())
    );
    // …but samples whose power would overflow f64 are skipped: the PSD stays finite.
    x[700] = 1e200;
    let mut w = Welch::new(c).unwrap();
    w.push(&x);
    assert_eq!(w.skipped_segments(), 2);
    assert!(
        w.spectrum()
            .unwrap()
            .psd_v2_per_hz
            .iter()
            .all(|p| p.is_finite())
    );
}

#[test]
fn parallel_mode_is_bit_identical() {
    let mut rng = Rng(23);
    let mut x = rng.noise(64 * 400, 1.0);
    x[64 * 37 + 5] = f64::NAN;
    for (averaging, max_averages) in all_modes() {
        let mut c = WelchConfig::new(1.0, 128);
        c.averaging = averaging;
        c.max_averages = max_averages;
        let single = welch(&x, &c).unwrap();
        for threads in [2, 3] {
            let mut w = Welch::new(c.clone()).unwrap().with_threads(threads);
            assert_eq!(w.threads(), threads);
            // One long block (parallel batches) followed by small blocks (sequential).
            w.push(&x[..20_000]);
            w.push(&x[20_000..21_000]);
            w.push(&x[21_000..]);
            // Workers return their groups asynchronously: flush before reading the estimate.
            w.flush();
            assert_eq!(w.spectrum().unwrap(), single, "{averaging:?} {threads}");
            assert_eq!(
                w.skipped_segments(),
                if max_averages == Some(9) { 0 } else { 2 }
            );
            // Random blocks: batches that start inside the pending samples.
            let mut w = Welch::new(c.clone()).unwrap().with_threads(threads);
            let mut at = 0;
            while at < x.len() {
                let len = ((rng.uniform() * 3000.0) as usize).min(x.len() - at);
                w.push(&x[at..at + len]);
                at += len;
            }
            w.flush();
            assert_eq!(
                w.spectrum().unwrap(),
                single,
                "{averaging:?} {threads} random"
            );
        }
    }
}

/// Any sequence of pushes (random lengths), flushes, discarded partial segments and restarts
/// gives bit-identical estimates on 1 and on 3 threads, in every averaging mode: the worker
/// pool may only change when segments are averaged, never which or how.
#[test]
fn worker_pool_matches_one_thread_under_any_sequence_of_operations() {
    let mut rng = Rng(41);
    let x = rng.noise(200_000, 1.0);
    for (averaging, max_averages) in all_modes() {
        for seed in 0..4 {
            let mut ops = Rng(100 + seed);
            let mut c = WelchConfig::new(1.0, 64);
            c.averaging = averaging;
            c.max_averages = max_averages;
            let mut one = Welch::new(c.clone()).unwrap();
            let mut pool = Welch::new(c).unwrap().with_threads(3);
            let mut at = 0;
            while at < x.len() {
                let r = ops.uniform();
                if r < 0.05 {
                    one.restart();
                    pool.restart();
                } else if r < 0.1 {
                    one.discard_pending();
                    pool.discard_pending();
                } else {
                    let len = ((ops.uniform() * 9000.0) as usize).min(x.len() - at);
                    one.push(&x[at..at + len]);
                    pool.push(&x[at..at + len]);
                    at += len;
                }
                if ops.uniform() < 0.2 {
                    pool.flush();
                    assert_eq!(
                        pool.spectrum(),
                        one.spectrum(),
                        "{averaging:?} {max_averages:?} seed {seed} at {at}"
                    );
                    assert_eq!(pool.segments(), one.segments());
                    assert_eq!(pool.skipped_segments(), one.skipped_segments());
                }
            }
            pool.flush();
            assert_eq!(pool.spectrum(), one.spectrum(), "{averaging:?} end");
        }
    }
}
