//! Cross-spectral density and coherence of two channels (METHODS.md §10; Bendat & Piersol,
//! *Random Data*, ch. 9; Welch 1967).
//!
//! Both channels are cut into the same segments as the single-channel [`super::Welch`]
//! (segment N, hop `D = N − round(rN)`, `K = ⌊(L − N)/D⌋ + 1`), each segment of each channel is
//! detrended and windowed on its own exactly as there (the same code), and transformed with
//! the same real FFT. With `A_k`, `B_k` the transforms of one segment of channels a and b:
//!
//! `P_ab,k = (2/(f_s S₂)) · (1/K) Σ_s conj(A_k^(s)) B_k^(s)` (factor 1 at DC and, N even, at
//! Nyquist), and `P_aa`, `P_bb` the two one-sided PSDs. This is `scipy.signal.csd(a, b)` and
//! `scipy.signal.welch` (conj on the *first* argument); the magnitude-squared coherence
//! `C_ab = |P_ab|²/(P_aa P_bb)` is `scipy.signal.coherence(a, b)` (tested to 1e-9 relative
//! against scipy 1.17.1 in `tests/cross.rs`). Mean (linear) averaging only.
//!
//! A segment position where either channel holds a non-finite sample (or one too large to
//! square) is skipped in both. With worker threads ([`CrossWelch::with_threads`]) groups of
//! consecutive segments go to workers and their sums are added in stream order: the result
//! is bit-identical for any thread count and block sizes.

use std::sync::Arc;

use realfft::RealFftPlanner;

use super::ordered_pool::{self, Next, OrderedPool};
use super::welch::Transformer;
use super::window::{k_eff_from_rho2, overlap_correlations_squared, sums};
use super::{Averaging, DspError, Result, Spectrum, WelchConfig};

/// Memory the jobs in flight may take, bytes.
const IN_FLIGHT_BYTES: usize = 32 << 20;

/// The averaged spectra of two channels: both PSDs, the cross-spectral density and (derived)
/// the coherence, on the same bins.
#[derive(Debug, Clone, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct CrossSpectrum {
    /// Channel a: its one-sided PSD (V²/Hz) and every Welch setting (K, K_eff, ENBW, …),
    /// which the other arrays share.
    pub a: Spectrum,
    /// Channel b's one-sided PSD, V²/Hz.
    pub psd_b_v2_per_hz: Vec<f64>,
    /// Real part of the one-sided cross-spectral density P_ab (conj(A)·B), V²/Hz.
    pub csd_re_v2_per_hz: Vec<f64>,
    /// Imaginary part of P_ab, V²/Hz.
    pub csd_im_v2_per_hz: Vec<f64>,
}

impl CrossSpectrum {
    /// Number of bins.
    pub fn len(&self) -> usize {
        self.a.len()
    }

    /// True if there are no bins.
    pub fn is_empty(&self) -> bool {
        self.a.is_empty()
    }

    /// Magnitude-squared coherence of bin k, `|P_ab|²/(P_aa P_bb)` in [0, 1]; 0 where either
    /// PSD is zero (scipy gives NaN there).
    pub fn coherence_at(&self, k: usize) -> f64 {
        let (Some(&paa), Some(&pbb), Some(&re), Some(&im)) = (
            self.a.psd_v2_per_hz.get(k),
            self.psd_b_v2_per_hz.get(k),
            self.csd_re_v2_per_hz.get(k),
            self.csd_im_v2_per_hz.get(k),
        ) else {
            return 0.0;
        };
        let den = paa * pbb;
        if den > 0.0 && den.is_finite() {
            (re * re + im * im) / den
        } else {
            0.0
        }
    }

    /// Coherence of every bin.
    pub fn coherence(&self) -> Vec<f64> {
        (0..self.len()).map(|k| self.coherence_at(k)).collect()
    }

    /// |P_ab| of every bin, V²/Hz.
    pub fn csd_magnitude(&self) -> Vec<f64> {
        self.csd_re_v2_per_hz
            .iter()
            .zip(&self.csd_im_v2_per_hz)
            .map(|(r, i)| r.hypot(*i))
            .collect()
    }

    /// Channel b as a [`Spectrum`] (same settings as a).
    pub fn spectrum_b(&self) -> Spectrum {
        Spectrum {
            psd_v2_per_hz: self.psd_b_v2_per_hz.clone(),
            ..self.a.clone()
        }
    }

    /// Re P_ab as a [`Spectrum`] (values may be negative: it is no PSD of one channel).
    pub fn csd_re_spectrum(&self) -> Spectrum {
        Spectrum {
            psd_v2_per_hz: self.csd_re_v2_per_hz.clone(),
            ..self.a.clone()
        }
    }
}

/// The level that the coherence of two *uncorrelated* channels exceeds with probability
/// `probability` after `k_eff` independent averages: `c₀ = 1 − p^{1/(K−1)}`, from
/// `P(Ĉ > c) = (1 − c)^{K−1}` (Bendat & Piersol ch. 9; METHODS.md §10). 1 for K ≤ 1.
pub fn coherence_noise_threshold(k_eff: f64, probability: f64) -> f64 {
    if !(k_eff.is_finite() && k_eff > 1.0 && probability > 0.0 && probability < 1.0) {
        return 1.0;
    }
    1.0 - probability.powf(1.0 / (k_eff - 1.0))
}

/// Segments per group: about 2¹⁹ samples of FFT input per channel (1 … 64), fixed by N —
/// the grouping of [`super::Welch`], so that both PSDs are bit-identical to its estimates.
fn group_len(segment: usize) -> usize {
    ((1usize << 19) / segment.max(1)).clamp(1, 64)
}

/// One transformer per channel.
struct Pair {
    a: Transformer,
    b: Transformer,
}

impl Pair {
    fn fork(&self) -> Self {
        Self {
            a: self.a.fork(),
            b: self.b.fork(),
        }
    }
}

/// A group of `count` consecutive segment positions of both channels and its sums.
struct Job {
    seq: u64,
    count: usize,
    a: Vec<f64>,
    b: Vec<f64>,
    /// Σ|A|², Σ|B|², Σ Re(conj(A)B), Σ Im(conj(A)B): four rows of `bins`.
    rows: Vec<f64>,
    accepted: usize,
}

/// Transforms every segment of `job` (sums from zero, in position order).
fn run_job(pair: &mut Pair, job: &mut Job, n: usize, hop: usize, bins: usize) {
    job.accepted = 0;
    job.rows.clear();
    job.rows.resize(4 * bins, 0.0);
    for i in 0..job.count {
        let start = i * hop;
        let (Some(sa), Some(sb)) = (job.a.get(start..start + n), job.b.get(start..start + n))
        else {
            continue;
        };
        if !(pair.a.transform(sa, &[]) && pair.b.transform(sb, &[])) {
            continue;
        }
        job.accepted += 1;
        let (aa, rest) = job.rows.split_at_mut(bins);
        let (bb, rest) = rest.split_at_mut(bins);
        let (re, im) = rest.split_at_mut(bins);
        let lanes = aa
            .iter_mut()
            .zip(bb.iter_mut())
            .zip(re.iter_mut().zip(im.iter_mut()))
            .zip(pair.a.output().iter().zip(pair.b.output()));
        for (((paa, pbb), (pre, pim)), (x, y)) in lanes {
            *paa += x.re * x.re + x.im * x.im;
            *pbb += y.re * y.re + y.im * y.im;
            // conj(x)·y
            *pre += x.re * y.re + x.im * y.im;
            *pim += x.re * y.im - x.im * y.re;
        }
    }
}

impl ordered_pool::Job for Job {
    fn seq(&self) -> u64 {
        self.seq
    }

    fn set_seq(&mut self, seq: u64) {
        self.seq = seq;
    }
}

/// Persistent workers for [`CrossWelch`] (the one ordered pool of the Welch averagers).
type Pool = OrderedPool<Job>;

/// Starts `threads` workers (forks of `main`) for groups of `span` samples per channel.
fn start_pool(
    main: &Pair,
    threads: usize,
    n: usize,
    hop: usize,
    bins: usize,
    span: usize,
) -> Option<Pool> {
    let job_bytes = (2 * span + 4 * bins) * std::mem::size_of::<f64>();
    let max_in_flight = (IN_FLIGHT_BYTES / job_bytes.max(1)).clamp(threads + 1, 2 * threads);
    let workers = (0..threads).map(|_| main.fork()).collect();
    OrderedPool::start(
        "cross-worker",
        workers,
        max_in_flight,
        move |pair: &mut Pair, job: &mut Job| run_job(pair, job, n, hop, bins),
        // A worker that panicked: the group's segments count as skipped.
        move |job: &mut Job| {
            job.accepted = 0;
            job.rows.clear();
            job.rows.resize(4 * bins, 0.0);
        },
    )
}

/// The running sums and the bookkeeping of the average.
struct Sums {
    bins: usize,
    /// Four rows of `bins` (see [`Job::rows`]).
    acc: Vec<f64>,
    segments: usize,
    skipped: usize,
}

impl Sums {
    fn add(&mut self, job: &Job) {
        for (a, r) in self.acc.iter_mut().zip(&job.rows) {
            *a += *r;
        }
        self.segments += job.accepted;
        self.skipped += job.count - job.accepted;
    }
}

/// Streaming cross-spectral Welch averager of two channels; see the module docs.
///
/// ```
/// use stillpoint::dsp::{WelchConfig, cross::CrossWelch};
/// let a: Vec<f64> = (0..4096).map(|i| ((i * 7919) % 101) as f64 / 100.0 - 0.5).collect();
/// let b: Vec<f64> = a.iter().map(|x| 2.0 * x).collect();
/// let mut cross = CrossWelch::new(WelchConfig::new(1000.0, 256))?;
/// cross.push(&a, &b);
/// cross.flush();
/// let s = cross.spectrum().expect("segments");
/// assert!((s.coherence_at(10) - 1.0).abs() < 1e-12);
/// # Ok::<(), stillpoint::dsp::DspError>(())
/// ```
pub struct CrossWelch {
    config: WelchConfig,
    n: usize,
    hop: usize,
    group: usize,
    s1: f64,
    s2: f64,
    rho2: Vec<f64>,
    main: Pair,
    pool: Option<Pool>,
    pending_a: Vec<f64>,
    pending_b: Vec<f64>,
    sums: Sums,
    /// Segment positions taken (transformed, skipped or in flight).
    positions: usize,
    /// A job buffer for the caller's thread.
    local: Option<Job>,
}

impl std::fmt::Debug for CrossWelch {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("CrossWelch")
            .field("config", &self.config)
            .field("segments", &self.sums.segments)
            .field("skipped", &self.sums.skipped)
            .finish_non_exhaustive()
    }
}

impl CrossWelch {
    /// Creates an averager (one FFT plan, both channels).
    ///
    /// # Errors
    /// [`DspError::Config`] for invalid settings or an averaging other than linear (mean).
    pub fn new(config: WelchConfig) -> Result<Self> {
        config.validate()?;
        if !matches!(config.averaging, Averaging::Linear) {
            return Err(DspError::Config(
                "the cross-spectrum is a mean (linear) average only".into(),
            ));
        }
        let n = config.segment;
        let hop = config.hop();
        let window = config.window.samples(n);
        let (s1, s2) = sums(&window);
        let rho2 = overlap_correlations_squared(&window, hop);
        let fft = RealFftPlanner::<f64>::new().plan_fft_forward(n);
        let window: Arc<[f64]> = window.into();
        let a = Transformer::new(config.detrend, Arc::clone(&window), Arc::clone(&fft));
        let b = a.fork();
        let bins = n / 2 + 1;
        Ok(Self {
            group: group_len(n),
            n,
            hop,
            s1,
            s2,
            rho2,
            main: Pair { a, b },
            pool: None,
            pending_a: Vec::new(),
            pending_b: Vec::new(),
            sums: Sums {
                bins,
                acc: vec![0.0; 4 * bins],
                segments: 0,
                skipped: 0,
            },
            positions: 0,
            local: None,
            config,
        })
    }

    /// Uses `threads` worker threads (1 = none; at most 64); bit-identical results.
    #[must_use]
    pub fn with_threads(mut self, threads: usize) -> Self {
        self.flush();
        self.pool = None;
        let threads = threads.clamp(1, 64);
        if threads >= 2 {
            self.pool = start_pool(
                &self.main,
                threads,
                self.n,
                self.hop,
                self.sums.bins,
                self.span(),
            );
        }
        self
    }

    /// The settings.
    pub fn config(&self) -> &WelchConfig {
        &self.config
    }

    /// Samples of one group of segment positions: `(G − 1)·D + N`.
    fn span(&self) -> usize {
        (self.group - 1) * self.hop + self.n
    }

    /// Segment positions still allowed by `max_averages`.
    fn room(&self) -> usize {
        self.config
            .max_averages
            .map_or(usize::MAX, |k| k.saturating_sub(self.positions))
    }

    /// True once `max_averages` segment positions have been taken.
    pub fn is_complete(&self) -> bool {
        self.room() == 0
    }

    /// Segments in the estimate (averaged so far; call [`CrossWelch::flush`] first).
    pub fn segments(&self) -> usize {
        self.sums.segments
    }

    /// Segment positions skipped because either channel held a non-finite sample.
    pub fn skipped_segments(&self) -> usize {
        self.sums.skipped
    }

    /// Feeds the next samples of both channels (taken at the same instants; the longer
    /// slice is cut to the shorter). Complete groups of segments are transformed (by the
    /// workers, if any).
    pub fn push(&mut self, a: &[f64], b: &[f64]) {
        if self.is_complete() {
            return;
        }
        let len = a.len().min(b.len());
        let mut rest_a = a.get(..len).unwrap_or(&[]);
        let mut rest_b = b.get(..len).unwrap_or(&[]);
        let span = self.span();
        // The held buffers fill up to one group's span and are then handed over as the job's
        // own buffers; only the overlap (N − D samples) is copied back: each sample is copied
        // about once, not first into the held buffer and then into a job.
        while !rest_a.is_empty() && self.room() >= self.group {
            let want = span.saturating_sub(self.pending_a.len()).min(rest_a.len());
            let (now_a, later_a) = rest_a.split_at(want);
            let (now_b, later_b) = rest_b.split_at(want);
            self.pending_a.extend_from_slice(now_a);
            self.pending_b.extend_from_slice(now_b);
            rest_a = later_a;
            rest_b = later_b;
            if self.pending_a.len() >= span {
                self.hand_over();
                self.collect(false);
            }
        }
        if self.is_complete() {
            self.pending_a.clear();
            self.pending_b.clear();
            return;
        }
        self.pending_a.extend_from_slice(rest_a);
        self.pending_b.extend_from_slice(rest_b);
    }

    /// A job buffer: a free one, or a new one.
    fn job_buffer(&mut self) -> Job {
        self.pool
            .as_mut()
            .and_then(Pool::take_free)
            .or_else(|| self.local.take())
            .unwrap_or_else(|| Job {
                seq: 0,
                count: 0,
                a: Vec::new(),
                b: Vec::new(),
                rows: Vec::new(),
                accepted: 0,
            })
    }

    /// Sends one whole group made of the held samples (at least one span): the held buffers
    /// become the job's, and the samples after the group's advance are copied back.
    fn hand_over(&mut self) {
        let mut job = self.job_buffer();
        job.count = self.group;
        let advance = self.group * self.hop;
        job.a.clear();
        job.b.clear();
        job.a
            .extend_from_slice(self.pending_a.get(advance..).unwrap_or(&[]));
        job.b
            .extend_from_slice(self.pending_b.get(advance..).unwrap_or(&[]));
        std::mem::swap(&mut job.a, &mut self.pending_a);
        std::mem::swap(&mut job.b, &mut self.pending_b);
        self.send(job);
    }

    /// Sends (or does here) the next `count` segment positions of the held samples and drops
    /// the samples they advance past.
    fn take(&mut self, count: usize) {
        let span = (count - 1) * self.hop + self.n;
        let mut job = self.job_buffer();
        job.count = count;
        job.a.clear();
        job.b.clear();
        job.a
            .extend_from_slice(self.pending_a.get(..span).unwrap_or(&[]));
        job.b
            .extend_from_slice(self.pending_b.get(..span).unwrap_or(&[]));
        let advance = (count * self.hop).min(self.pending_a.len());
        self.pending_a.drain(..advance);
        self.pending_b.drain(..advance);
        self.send(job);
    }

    /// Sends `job` to a worker (or transforms it here) and counts its positions.
    fn send(&mut self, mut job: Job) {
        self.positions += job.count;
        let bins = self.sums.bins;
        if let Some(pool) = self.pool.as_mut() {
            while pool.is_full() && Self::add_next(pool, &mut self.sums, self.group, true) {}
            match pool.send(job) {
                Ok(()) => return,
                Err(back) => job = back,
            }
            // Workers gone: add what arrived (the lost groups count as skipped), then carry
            // on here.
            while Self::add_next(pool, &mut self.sums, self.group, true) {}
            self.pool = None;
        }
        run_job(&mut self.main, &mut job, self.n, self.hop, bins);
        self.sums.add(&job);
        self.local = Some(job);
    }

    /// Adds the next job in order (waiting for it with `wait`), or counts the `group`
    /// positions of a job lost with the workers as skipped; false when there is nothing to
    /// add now.
    fn add_next(pool: &mut Pool, sums: &mut Sums, group: usize, wait: bool) -> bool {
        match pool.next(wait) {
            Next::Ready(job) => {
                sums.add(&job);
                pool.recycle(job);
                true
            }
            Next::Lost => {
                sums.skipped += group;
                true
            }
            Next::Idle => false,
        }
    }

    /// Adds finished jobs; with `wait`, waits for every job in flight.
    fn collect(&mut self, wait: bool) {
        let Some(pool) = self.pool.as_mut() else {
            return;
        };
        while Self::add_next(pool, &mut self.sums, self.group, false) {}
        if wait {
            while Self::add_next(pool, &mut self.sums, self.group, true) {}
        }
    }

    /// Waits for the workers and transforms every complete segment still waiting, so the
    /// estimate covers all samples pushed so far.
    pub fn flush(&mut self) {
        self.collect(true);
        if self.pending_a.len() >= self.n {
            let complete = (self.pending_a.len() - self.n) / self.hop + 1;
            let count = complete.min(self.room());
            if count > 0 {
                let pool = self.pool.take();
                self.take(count);
                self.pool = pool;
            }
        }
    }

    /// Drops the samples of the segment in progress (a gap in the stream).
    pub fn discard_pending(&mut self) {
        self.flush();
        self.pending_a.clear();
        self.pending_b.clear();
    }

    /// The current estimate (after [`CrossWelch::flush`]), or `None` before the first
    /// accepted segment.
    pub fn spectrum(&self) -> Option<CrossSpectrum> {
        let segments = self.sums.segments;
        if segments == 0 {
            return None;
        }
        let c = &self.config;
        let bins = self.sums.bins;
        // As [`super::Welch`]: the mean P_k = Σ/K first, then the one-sided scaling.
        let single = 1.0 / (c.sample_rate_hz * self.s2);
        let double = 2.0 * single;
        let k = segments as f64;
        let last_unpaired = if self.n.is_multiple_of(2) {
            bins - 1
        } else {
            usize::MAX
        };
        let row = |r: usize| -> Vec<f64> {
            self.sums
                .acc
                .get(r * bins..(r + 1) * bins)
                .unwrap_or(&[])
                .iter()
                .enumerate()
                .map(|(bin, v)| {
                    v / k
                        * if bin == 0 || bin == last_unpaired {
                            single
                        } else {
                            double
                        }
                })
                .collect()
        };
        let a = Spectrum {
            sample_rate_hz: c.sample_rate_hz,
            segment: self.n,
            overlap: c.overlap,
            window: c.window,
            detrend: c.detrend,
            averaging: c.averaging,
            averages: segments,
            k_eff: k_eff_from_rho2(&self.rho2, segments),
            resolution_hz: c.sample_rate_hz / self.n as f64,
            enbw_hz: c.sample_rate_hz * self.s2 / (self.s1 * self.s1),
            psd_v2_per_hz: row(0),
        };
        Some(CrossSpectrum {
            a,
            psd_b_v2_per_hz: row(1),
            csd_re_v2_per_hz: row(2),
            csd_im_v2_per_hz: row(3),
        })
    }
}

/// Cross spectrum of two whole slices (tests and small records).
///
/// # Errors
/// Invalid settings, fewer samples than one segment ([`DspError::TooShort`]), no usable
/// segment ([`DspError::NoUsableSegment`]).
pub fn cross_spectrum(a: &[f64], b: &[f64], config: &WelchConfig) -> Result<CrossSpectrum> {
    let mut w = CrossWelch::new(config.clone())?;
    w.push(a, b);
    w.flush();
    match w.spectrum() {
        Some(s) => Ok(s),
        None if w.skipped_segments() > 0 => Err(DspError::NoUsableSegment {
            skipped: w.skipped_segments(),
        }),
        None => Err(DspError::TooShort {
            samples: a.len().min(b.len()) as u64,
            segment: config.segment,
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::dsp::welch::welch;

    fn noise(len: usize, seed: u64) -> Vec<f64> {
        let mut s = seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) | 1;
        (0..len)
            .map(|_| {
                s ^= s << 13;
                s ^= s >> 7;
                s ^= s << 17;
                (s >> 11) as f64 / (1u64 << 53) as f64 - 0.5
            })
            .collect()
    }

    #[test]
    fn auto_spectra_equal_the_single_channel_welch() {
        let a = noise(10_000, 1);
        let b = noise(10_000, 2);
        let mut config = WelchConfig::new(100.0, 300);
        config.detrend = crate::dsp::Detrend::Linear;
        let s = cross_spectrum(&a, &b, &config).unwrap();
        let wa = welch(&a, &config).unwrap();
        let wb = welch(&b, &config).unwrap();
        for k in 0..s.len() {
            assert!((s.a.psd_v2_per_hz[k] / wa.psd_v2_per_hz[k] - 1.0).abs() < 1e-12);
            assert!((s.psd_b_v2_per_hz[k] / wb.psd_v2_per_hz[k] - 1.0).abs() < 1e-12);
        }
        assert_eq!(s.a.averages, wa.averages);
        assert!((s.a.k_eff - wa.k_eff).abs() < 1e-12);
        // A channel with itself: P_aa = Re P_aa, Im = 0, coherence 1.
        let own = cross_spectrum(&a, &a, &config).unwrap();
        for k in 1..own.len() - 1 {
            assert!((own.csd_re_v2_per_hz[k] / own.a.psd_v2_per_hz[k] - 1.0).abs() < 1e-12);
            assert!(own.csd_im_v2_per_hz[k].abs() < 1e-12 * own.a.psd_v2_per_hz[k]);
            assert!((own.coherence_at(k) - 1.0).abs() < 1e-12);
        }
    }

    #[test]
    fn threads_and_block_sizes_give_the_same_bits() {
        let a = noise(300_000, 3);
        let b = noise(300_000, 4);
        let config = WelchConfig::new(1.0, 1000);
        let mut one = CrossWelch::new(config.clone()).unwrap();
        one.push(&a, &b);
        one.flush();
        let mut many = CrossWelch::new(config).unwrap().with_threads(3);
        for (ca, cb) in a.chunks(7777).zip(b.chunks(7777)) {
            many.push(ca, cb);
        }
        many.flush();
        assert_eq!(one.spectrum(), many.spectrum());
        assert_eq!(one.segments(), (300_000 - 1000) / 500 + 1);
    }

    #[test]
    fn uneven_blocks_and_limits_give_the_same_bits_as_one_push() {
        // Blocks of 1 sample to several group spans, with and without workers, and an average
        // limit that falls inside a group: the same segments, summed in the same order.
        let a = noise(400_000, 8);
        let b = noise(400_000, 9);
        for max_averages in [None, Some(37), Some(600)] {
            let mut config = WelchConfig::new(1.0, 1000);
            config.max_averages = max_averages;
            let mut one = CrossWelch::new(config.clone()).unwrap();
            one.push(&a, &b);
            one.flush();
            for threads in [1, 2] {
                let mut many = CrossWelch::new(config.clone())
                    .unwrap()
                    .with_threads(threads);
                let sizes = [1, 499, 1000, 70_000, 3, 150_001];
                let mut at = 0;
                for size in sizes.iter().cycle() {
                    if at >= a.len() {
                        break;
                    }
                    let end = (at + size).min(a.len());
                    many.push(&a[at..end], &b[at..end]);
                    at = end;
                }
                many.flush();
                assert_eq!(
                    one.spectrum(),
                    many.spectrum(),
                    "{max_averages:?} {threads}"
                );
                assert_eq!(one.segments(), many.segments());
            }
        }
    }

    #[test]
    fn delayed_channel_puts_the_phase_in_the_imaginary_part() {
        // b(t) = a(t − 1 sample): P_ab = P_aa e^{−iω}, Im P_ab / Re P_ab = −tan(2πk/N).
        let x = noise(40_001, 5);
        let a = &x[1..];
        let b = &x[..40_000];
        let config = WelchConfig::new(1.0, 64);
        let s = cross_spectrum(a, b, &config).unwrap();
        let k = 5;
        let phase = s.csd_im_v2_per_hz[k].atan2(s.csd_re_v2_per_hz[k]);
        let want = -2.0 * std::f64::consts::PI * k as f64 / 64.0;
        assert!((phase - want).abs() < 0.05, "{phase} vs {want}");
    }

    #[test]
    fn non_finite_samples_skip_the_segment_in_both_channels_and_limits_hold() {
        let a = noise(5_000, 6);
        let mut b = noise(5_000, 7);
        b[10] = f64::NAN;
        let mut config = WelchConfig::new(1.0, 1000);
        let s = cross_spectrum(&a, &b, &config).unwrap();
        assert_eq!(s.a.averages, 9 - 1);
        config.max_averages = Some(3);
        let mut w = CrossWelch::new(config.clone()).unwrap();
        w.push(&a, &a);
        w.flush();
        assert_eq!(w.segments(), 3);
        config.averaging = Averaging::Median;
        assert!(CrossWelch::new(config).is_err());
    }

    #[test]
    fn noise_threshold_formula() {
        // c₀ = 1 − 0.05^{1/(K−1)}: K = 2 → 0.95, K = 101 → 1 − 0.05^{0.01}.
        assert!((coherence_noise_threshold(2.0, 0.05) - 0.95).abs() < 1e-15);
        assert!(
            (coherence_noise_threshold(101.0, 0.05) - (1.0 - 0.05f64.powf(0.01))).abs() < 1e-15
        );
        assert_eq!(coherence_noise_threshold(1.0, 0.05), 1.0);
    }
}
