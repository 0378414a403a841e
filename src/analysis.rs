//! Runs the signal chain over a whole test (the recordings of its stations), station by station
//! in parallel, and collects the results. Where the recordings come from (a WAV set, a session)
//! is decided above, in `pipeline`.

use std::collections::BTreeMap;
use std::path::PathBuf;
use std::sync::Mutex;
use std::sync::atomic::{AtomicUsize, Ordering};

use crate::acquire::InputError;
use crate::acquire::wav::{Decoder, NonFinite};
use crate::acquire::wavset::{PositionSource, WavSet};
use crate::setup::Setup;
use crate::signal::carryover::{self, RingingPoles};
use crate::signal::hits::level_of;
use crate::signal::station::lend_free_decays;
use crate::signal::{StationPlans, StationResult, analyze_station_in_test, taps};

/// Progress of a long analysis on stderr, for the command line (`TAPGRID_PROGRESS=1`, or any
/// analysis of more than 8 stations when stderr is a terminal).
struct Progress {
    total: usize,
    done: AtomicUsize,
    on: bool,
}

impl Progress {
    fn new(total: usize) -> Self {
        use std::io::IsTerminal;
        let on = std::env::var_os("TAPGRID_PROGRESS").is_some_and(|v| v != "0")
            || (total > 8 && std::io::stderr().is_terminal());
        Self {
            total,
            done: AtomicUsize::new(0),
            on,
        }
    }

    fn station_done(&self, station: u32) {
        let k = self.done.fetch_add(1, Ordering::Relaxed) + 1;
        if self.on {
            eprintln!("analysing: station {station} done ({k} of {})", self.total);
        }
    }
}

/// One station's recording to analyse.
#[derive(Debug, Clone, PartialEq)]
pub struct StationSource {
    /// Station number.
    pub station: u32,
    /// Position, m.
    pub position_m: f64,
    /// Where the position came from.
    pub position_source: PositionSource,
    /// The recording.
    pub path: PathBuf,
    /// Saved overrides: hit index → accept.
    pub overrides: BTreeMap<usize, bool>,
}

/// A test to analyse.
#[derive(Debug, Clone, PartialEq)]
pub struct Dataset {
    /// Stations in ascending order.
    pub stations: Vec<StationSource>,
    /// Where it came from (folder of the WAV set or session).
    pub origin: PathBuf,
}

impl Dataset {
    /// From a WAV set folder.
    pub fn from_wavset(set: &WavSet) -> Self {
        Self {
            stations: set
                .stations
                .iter()
                .map(|s| StationSource {
                    station: s.station,
                    position_m: s.position_m,
                    position_source: s.position_source,
                    path: s.path.clone(),
                    overrides: BTreeMap::new(),
                })
                .collect(),
            origin: set.dir.clone(),
        }
    }
}

/// One analysed station.
#[derive(Debug, Clone, PartialEq)]
pub struct StationAnalysis {
    /// Station number.
    pub station: u32,
    /// Position, m.
    pub position_m: f64,
    /// Where the position came from.
    pub position_source: PositionSource,
    /// Recording analysed.
    pub path: PathBuf,
    /// Chain output.
    pub result: StationResult,
}

/// The analysed test.
#[derive(Debug, Clone, PartialEq)]
pub struct Analysis {
    /// Setup used.
    pub setup: Setup,
    /// Sample rate, Hz.
    pub sample_rate_hz: u32,
    /// Stations in ascending order.
    pub stations: Vec<StationAnalysis>,
    /// What the analysis decided for the whole test and why (record length from the tapping,
    /// stations it could not use), in words.
    pub notes: Vec<String>,
}

impl Analysis {
    /// Noise, in words, when it limits the test: the median over the stations (with two or more
    /// hits averaged) of the share of lines with γ² ≥ 0.9 (common practice) below 80 %.
    pub fn noise_finding(&self) -> Option<String> {
        let shares: Vec<f64> = self
            .stations
            .iter()
            .filter_map(|s| s.result.frf.as_ref())
            .filter(|f| f.hits_averaged >= 2 && !f.coherence.is_empty())
            .map(|f| {
                f.coherence.iter().filter(|&&g| g >= 0.9).count() as f64 / f.coherence.len() as f64
            })
            .collect();
        let median = crate::numeric::median(shares)?;
        (median < 0.8).then(|| {
            format!(
                "noise: at a typical station only {:.0} % of the band has coherence of 0.9 or more; \
                 tap harder (within the input range), average more hits, check the cables and the \
                 accelerometer mounting, or narrow the band to where the force is",
                100.0 * median
            )
        })
    }

    /// The force spectrum's usable band against the analysis band, in words, once for the test
    /// (or per station where only some stations are short of the band).
    pub fn usable_band_finding(&self) -> Option<String> {
        let [lo, hi] = self.setup.band(self.sample_rate_hz);
        let short: Vec<(u32, f64, Option<f64>)> = self
            .stations
            .iter()
            .filter_map(|s| {
                let top = s.result.usable_band_hz?[1];
                (top < hi).then_some((s.station, top, s.result.first_null_hz))
            })
            .collect();
        if short.is_empty() {
            return None;
        }
        let tops: Vec<f64> = short.iter().map(|s| s.1).collect();
        let (mn, mx) = tops
            .iter()
            .fold((f64::INFINITY, 0.0f64), |(a, b), &t| (a.min(t), b.max(t)));
        let null = crate::numeric::median(short.iter().filter_map(|s| s.2).collect())
            .map(|f| format!(", its first null near {f:.0} Hz"))
            .unwrap_or_default();
        let which = if short.len() == self.stations.len() {
            "at every station".to_string()
        } else {
            let list: Vec<String> = short.iter().map(|s| s.0.to_string()).collect();
            format!("at station(s) {}", list.join(", "))
        };
        let range = if mx - mn < 0.5 {
            format!("{mn:.0} Hz")
        } else {
            format!("{mn:.0}–{mx:.0} Hz")
        };
        Some(format!(
            "usable band: the force spectrum falls {:.0} dB below its largest value at {range} \
             {which}{null}, inside the {lo:.0}–{hi:.0} Hz band. The hits are kept; lines above \
             that count less in the fit and modes there are marked. A harder tip or a lighter \
             hammer would widen the usable band",
            self.setup.quality.rolloff_db
        ))
    }

    /// Things a person should know about the result as a whole.
    pub fn warnings(&self) -> Vec<String> {
        let mut w = Vec::new();
        if self
            .stations
            .iter()
            .any(|s| s.position_source == PositionSource::Spacing)
        {
            w.push(format!(
                "no stations.csv: positions assumed as station × {} m",
                self.setup.spacing_m
            ));
        }
        let [_, hi] = self.setup.band(self.sample_rate_hz);
        if hi > 0.45 * self.sample_rate_hz as f64 {
            w.push(format!(
                "the band reaches {hi} Hz, above 0.45 × the sample rate: an audio interface's \
                 anti-alias filter rolls off there and bends the FRF (common practice: stay below \
                 {:.0} Hz)",
                0.45 * self.sample_rate_hz as f64
            ));
        }
        w.extend(self.notes.iter().cloned());
        w.extend(self.usable_band_finding());
        w.extend(self.noise_finding());
        for s in &self.stations {
            for n in &s.result.notes {
                w.push(format!("station {}: {n}", s.station));
            }
        }
        for s in &self.stations {
            let n = s.result.frf.as_ref().map_or(0, |f| f.hits_averaged);
            if n == 0 {
                w.push(format!("station {}: no accepted hit, no FRF", s.station));
            } else if n == 1 {
                w.push(format!(
                    "station {}: one accepted hit; its coherence is 1 by definition and says nothing",
                    s.station
                ));
            }
        }
        w
    }
}

/// Runs `work` on every station on up to `available_parallelism` named threads; each thread
/// keeps its own state `S` (FFT plan, decode buffers) across the stations it takes. Results come
/// back in station order.
fn per_station<S: Default + Send, T: Send>(
    data: &Dataset,
    work: impl Fn(&mut S, &StationSource) -> T + Sync,
) -> Vec<T> {
    let all: Vec<&StationSource> = data.stations.iter().collect();
    per_source(&all, work)
}

/// [`per_station`] over some of a test's stations.
fn per_source<S: Default + Send, T: Send>(
    stations: &[&StationSource],
    work: impl Fn(&mut S, &StationSource) -> T + Sync,
) -> Vec<T> {
    per_source_pooled(stations, Vec::new(), work).0
}

/// [`per_source`] whose workers start from the states in `pool` (defaults when it runs out), and
/// hand their states back: the next pass reuses their buffers instead of faulting in fresh
/// memory (a station's decode buffers are megabytes).
fn per_source_pooled<S: Default + Send, T: Send>(
    stations: &[&StationSource],
    pool: Vec<S>,
    work: impl Fn(&mut S, &StationSource) -> T + Sync,
) -> (Vec<T>, Vec<S>) {
    let next = AtomicUsize::new(0);
    let out: Mutex<Vec<Option<T>>> = Mutex::new((0..stations.len()).map(|_| None).collect());
    let pool = Mutex::new(pool);
    let workers = std::thread::available_parallelism()
        .map_or(1, |n| n.get())
        .min(stations.len().max(1));
    std::thread::scope(|scope| {
        for w in 0..workers {
            let (next, out, work, pool) = (&next, &out, &work, &pool);
            std::thread::Builder::new()
                .name(format!("tapgrid-analysis-{w}"))
                .spawn_scoped(scope, move || {
                    crate::numeric::as_parallel_worker(|| {
                        let mut state = pool
                            .lock()
                            .ok()
                            .and_then(|mut p| p.pop())
                            .unwrap_or_default();
                        loop {
                            let i = next.fetch_add(1, Ordering::Relaxed);
                            let Some(&src) = stations.get(i) else {
                                break;
                            };
                            let r = work(&mut state, src);
                            if let Ok(mut g) = out.lock() {
                                g[i] = Some(r);
                            }
                        }
                        if let Ok(mut p) = pool.lock() {
                            p.push(state);
                        }
                    })
                })
                .expect("spawning an analysis thread");
        }
    });
    let results = out
        .into_inner()
        .unwrap_or_default()
        .into_iter()
        .map(|r| r.expect("every station was taken by a worker"))
        .collect();
    (results, pool.into_inner().unwrap_or_default())
}

/// Decodes every recording with the same threads as [`run`] and nothing else; returns the frames
/// decoded. The benchmark's baseline: the chain cannot be faster than reading its input.
pub fn decode_all(data: &Dataset, setup: &Setup) -> Result<usize, InputError> {
    let frames = per_station(data, |dec: &mut Decoder, src| {
        decode(dec, src, setup).map(|info| info.frames)
    });
    frames.into_iter().sum()
}

/// A station's recording, channels A and B as the setup names them.
fn decode(
    dec: &mut Decoder,
    src: &StationSource,
    setup: &Setup,
) -> Result<crate::acquire::wav::WavInfo, InputError> {
    dec.decode_with(
        &src.path,
        setup.channel_a.index,
        setup.channel_b.index,
        NonFinite::Keep,
    )
}

#[derive(Default)]
struct Worker {
    decoder: Decoder,
    plans: StationPlans,
}

/// What a quick look at every recording says about the test as a whole.
struct Survey {
    sample_rate_hz: u32,
    /// Trigger samples of each station's taps.
    strikes: Vec<Vec<usize>>,
}

fn survey(data: &Dataset, setup: &Setup) -> Option<Survey> {
    let scans = per_station(data, |dec: &mut Decoder, src| {
        let info = dec
            .decode_first(
                &src.path,
                setup.channel_a.index,
                setup.channel_b.index,
                NonFinite::Keep,
            )
            .ok()?;
        let fs = info.sample_rate_hz;
        let level = level_of(&dec.a, setup.trigger.level);
        let strikes = taps::find_strikes(&dec.a, level, setup.trigger.slope, fs);
        Some((fs, strikes))
    });
    let fs = scans.iter().flatten().map(|s| s.0).next()?;
    let strikes = scans
        .into_iter()
        .map(|s| match s {
            Some((f, t)) if f == fs => t,
            _ => Vec::new(),
        })
        .collect();
    Some(Survey {
        sample_rate_hz: fs,
        strikes,
    })
}

/// A hint when the recordings look like the other layout: in the hammer layout, channel A that
/// keeps ringing after most taps (every hit then reads as struck twice) is an accelerometer, not
/// a force gauge — a roving-accelerometer test opened with the default layout.
fn layout_hint(setup: &Setup, stations: &[StationAnalysis]) -> Option<String> {
    if setup.layout != crate::setup::Layout::Hammer {
        return None;
    }
    let hits: Vec<&crate::signal::HitReport> =
        stations.iter().flat_map(|s| s.result.hits.iter()).collect();
    let double = hits
        .iter()
        .filter(|h| h.reasons.contains(&crate::signal::Reason::DoubleHit))
        .count();
    (hits.len() >= 4 && double * 10 >= hits.len() * 6).then(|| {
        format!(
            "{double} of {} hits read as struck twice: channel A keeps ringing after each tap, as \
             a reference accelerometer does, not a force gauge. If this is a roving-accelerometer \
             test, analyse it in the sensor layout (--layout sensor; in the window: Test setup, \
             roving accelerometer)",
            hits.len()
        )
    })
}

/// The record that fits this test, for a setup that leaves record length and hold-off open: the
/// default length unless the taps come faster than it (then the longest that ends before the
/// next tap, see [`taps::record_for_spacing`]). Returns the setup to use and notes on what was
/// chosen.
fn fit_setup_to_test(data: &Dataset, setup: &Setup) -> (Setup, Vec<String>) {
    let mut out = setup.clone();
    let mut notes = Vec::new();
    let Some(sv) = survey(data, setup) else {
        return (out, notes);
    };
    let fs = sv.sample_rate_hz;
    let spacings: Vec<usize> = sv
        .strikes
        .iter()
        .flat_map(|t| t.windows(2).map(|w| w[1] - w[0]).collect::<Vec<_>>())
        .collect();
    let Some(spacing) = taps::typical_short_spacing(&spacings) else {
        return (out, notes);
    };
    let n0 = setup.record_samples(fs);
    let n = taps::record_for_spacing(n0, spacing, setup.trigger.pretrigger_fraction, fs);
    if n < n0 {
        out.trigger.record_length_s = Some(n as f64 / fs as f64);
        notes.push(format!(
            "taps came {:.2} s apart (the shortest ordinary spacing), less than the default \
             record of {:.3} s: records of {n} samples ({:.3} s, {:.3} Hz lines) were used \
             so that each ends before the next tap; leave more time between taps for finer \
             lines",
            spacing as f64 / fs as f64,
            n0 as f64 / fs as f64,
            n as f64 / fs as f64,
            fs as f64 / n as f64
        ));
    }
    (out, notes)
}

/// What one station's pass gave: its sample rate and result, or the error naming its file.
type StationOutcome = Result<(u32, Result<StationResult, String>), InputError>;

/// Decodes and analyses every station with `setup`. With `stop_on_fast_taps`, the pass stops
/// (`None`) at the first station with two taps closer than the record allows, or with non-finite
/// samples (whose taps a survey of the raw recording may count differently): the record must then
/// be chosen from every tap of the test first.
fn station_pass(
    data: &Dataset,
    setup: &Setup,
    stop_on_fast_taps: bool,
) -> Option<Vec<StationOutcome>> {
    let stop = std::sync::atomic::AtomicBool::new(false);
    let progress = Progress::new(data.stations.len());
    let analyse = |w: &mut Worker,
                   src: &StationSource,
                   ringing: RingingPoles,
                   kept: Option<&Decoded>|
     -> Option<StationOutcome> {
        if stop.load(Ordering::Relaxed) {
            return None;
        }
        let (fs, a, b) = match kept {
            Some(k) => (k.fs, &k.a[..], &k.b[..]),
            None => match decode(&mut w.decoder, src, setup) {
                Ok(i) => (i.sample_rate_hz, &w.decoder.a[..], &w.decoder.b[..]),
                Err(e) => return Some(Err(e)),
            },
        };
        let r = analyze_station_in_test(a, b, fs, setup, &src.overrides, &mut w.plans, ringing);
        if stop_on_fast_taps {
            let n0 = setup.record_samples(fs);
            let fast = r.as_ref().is_ok_and(|res| {
                res.tap_samples.windows(2).any(|t| {
                    taps::record_for_spacing(n0, t[1] - t[0], setup.trigger.pretrigger_fraction, fs)
                        < n0
                })
            });
            let damaged = match &r {
                Ok(res) => res.non_finite_samples > 0,
                Err(_) => !crate::numeric::finite(a) || !crate::numeric::finite(b),
            };
            if fast || damaged {
                stop.store(true, Ordering::Relaxed);
                return None;
            }
        }
        progress.station_done(src.station);
        Some(Ok((fs, r)))
    };
    let n = data.stations.len();
    if !setup.remove_carryover || n < 2 * PILOTS {
        return per_station(data, |w: &mut Worker, src| {
            analyse(w, src, RingingPoles::Own, None)
        })
        .into_iter()
        .collect();
    }
    // The part's ringing poles are estimated once, from free decays lent by a few stations spread
    // along the part (so that no mode sits at a node of all of them), and every station fits
    // its carried-over ringing with those; each station estimating its own would repeat the
    // same estimate. The pilots are chosen by position in the list, so the result does not
    // depend on which thread finishes first.
    let pilot_at: Vec<usize> = (0..PILOTS)
        .map(|j| (2 * j + 1) * n / (2 * PILOTS))
        .collect();
    let pilots: Vec<&StationSource> = pilot_at.iter().map(|&i| &data.stations[i]).collect();
    // A pilot's recording is kept for its own analysis below, unless it is long.
    let kept: Vec<Mutex<Option<Decoded>>> = pilots.iter().map(|_| Mutex::new(None)).collect();
    let (lent, workers) = per_source_pooled(&pilots, Vec::new(), |w: &mut Worker, src| {
        let dec = &mut w.decoder;
        let info = decode(dec, src, setup).ok()?;
        let fs = info.sample_rate_hz;
        let decays = lend_free_decays(&dec.a, &dec.b, fs, setup, &mut w.plans).ok()?;
        if info.frames <= KEEP_FRAMES
            && let Some(j) = pilots.iter().position(|p| std::ptr::eq(*p, src))
            && let Ok(mut slot) = kept[j].lock()
        {
            *slot = Some(Decoded {
                fs,
                a: std::mem::take(&mut dec.a),
                b: std::mem::take(&mut dec.b),
            });
        }
        Some((fs, decays))
    });
    let fs = lent.iter().flatten().map(|l| l.0).next();
    let decays: Vec<Vec<f64>> = lent
        .into_iter()
        .flatten()
        .filter(|l| Some(l.0) == fs)
        .flat_map(|l| l.1)
        .collect();
    let poles = fs.and_then(|fs| carryover::test_poles(&decays, fs, setup.band(fs)));
    let ringing = match &poles {
        Some(p) => RingingPoles::Test(p),
        None => RingingPoles::Own,
    };
    // The pilots first: their kept buffers then serve the workers for the rest.
    let order: Vec<usize> = pilot_at
        .iter()
        .copied()
        .chain((0..n).filter(|i| !pilot_at.contains(i)))
        .collect();
    let ordered: Vec<&StationSource> = order.iter().map(|&i| &data.stations[i]).collect();
    let (done, _) = per_source_pooled(&ordered, workers, |w: &mut Worker, src| {
        let mine = pilots
            .iter()
            .position(|p| std::ptr::eq(*p, src))
            .and_then(|j| kept[j].lock().ok()?.take());
        let r = analyse(w, src, ringing, mine.as_ref());
        // A pilot's buffers become the worker's when it has none yet.
        if let Some(m) = mine
            && w.decoder.a.capacity() == 0
        {
            (w.decoder.a, w.decoder.b) = (m.a, m.b);
        }
        r
    });
    let mut out: Vec<Option<Option<StationOutcome>>> = (0..n).map(|_| None).collect();
    for (i, r) in order.into_iter().zip(done) {
        out[i] = Some(r);
    }
    out.into_iter().flatten().collect()
}

/// A recording's two channels as decoded, kept from one pass to the next.
struct Decoded {
    fs: u32,
    a: Vec<f64>,
    b: Vec<f64>,
}

/// Pilots' recordings up to this many frames are kept between the passes (4 × 2 × 8 B × this
/// = 128 MB at most); longer ones are decoded again.
const KEEP_FRAMES: usize = 2_000_000;

/// Stations that lend free decays to a test's estimate of its ringing poles.
const PILOTS: usize = 4;

/// Decodes and analyses every station, using up to `available_parallelism` threads.
///
/// A station whose recording cannot be read is an error naming the file; a station whose
/// recording holds nothing usable (no tap found) is reported in the notes and the others are
/// analysed; only when no station is usable is that an error.
pub fn run(data: &Dataset, setup: &Setup) -> Result<Analysis, InputError> {
    setup
        .validate()
        .map_err(|m| InputError::new(&data.origin, format!("bad setup: {m}")))?;
    if data.stations.is_empty() {
        return Err(InputError::new(&data.origin, "holds no station recordings"));
    }
    // Where the setup leaves the record open, the default is tried first: a station whose taps
    // come faster than it (or that holds damaged samples) stops that pass, and the record is then
    // chosen from a survey of every tap of the test (`fit_setup_to_test`). Most tests are tapped
    // slower than the record, and pay for no survey.
    let choose_record =
        setup.trigger.record_length_s.is_none() && setup.trigger.holdoff_s.is_none();
    let t0 = std::time::Instant::now();
    let first = station_pass(data, setup, choose_record);
    let (setup, mut notes, results) = match first {
        Some(results) => (setup.clone(), Vec::new(), results),
        None => {
            let (setup, notes) = fit_setup_to_test(data, setup);
            if std::env::var_os("TAPGRID_TIMING").is_some() {
                eprintln!(
                    "timing: taps faster than the default record, surveyed at {:.3} s",
                    t0.elapsed().as_secs_f64()
                );
            }
            let results =
                station_pass(data, &setup, false).expect("a pass that cannot stop always finishes");
            (setup, notes, results)
        }
    };
    let setup = &setup;
    let mut stations = Vec::with_capacity(results.len());
    let mut rate = None;
    let mut first_problem: Option<InputError> = None;
    for (src, r) in data.stations.iter().zip(results) {
        let (fs, result) = r?;
        let result = match result {
            Ok(res) => res,
            Err(m) => {
                notes.push(format!(
                    "station {} ({}): {m}; the station is left out",
                    src.station,
                    src.path.display()
                ));
                first_problem.get_or_insert_with(|| InputError::new(&src.path, m));
                continue;
            }
        };
        match rate {
            None => rate = Some((fs, src.path.clone())),
            Some((r0, ref p0)) if r0 != fs => {
                return Err(InputError::new(
                    &src.path,
                    format!(
                        "sample rate {fs} Hz differs from {r0} Hz in {}",
                        p0.display()
                    ),
                ));
            }
            _ => {}
        }
        stations.push(StationAnalysis {
            station: src.station,
            position_m: src.position_m,
            position_source: src.position_source,
            path: src.path.clone(),
            result,
        });
    }
    if stations.is_empty()
        && let Some(e) = first_problem
    {
        return Err(e);
    }
    if let Some(n) = layout_hint(setup, &stations) {
        notes.push(n);
    }
    Ok(Analysis {
        setup: setup.clone(),
        sample_rate_hz: rate.map_or(0, |r| r.0),
        stations,
        notes,
    })
}
