//! In-process fuzzing of every reader of outside files: WAV recordings, `stations.csv`, the
//! session manifest, shaft model and model study JSON. A fixed-seed mutation loop (bit flips,
//! interesting values, cut/duplicate/splice, and for text, numbers swapped for extreme tokens)
//! over seed corpora built here; every input must give `Ok` or an error — never a panic, and never
//! hang (two seconds for a reader, ten for a whole model study). Successful parses are sometimes pushed further (a decoded recording
//! through the signal chain, a shaft through the mesh refinement).
//!
//! `cargo test --test fuzz_inputs` runs a short budget; a long run sets the executions per
//! target: `TAPGRID_FUZZ_EXECS=2500000 cargo test --release --test fuzz_inputs -- --nocapture`.
//! A failing input is written to `target/fuzz-failures/` for replay.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use tapgrid::acquire::wav::{Decoder, NonFinite, SampleEncoding, write_channels};

/// xorshift64*: a fixed-seed generator, so a failure is reproducible.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_f491_4f6c_dd1d)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
}

const INTERESTING: [u64; 10] = [
    0,
    1,
    0x7f,
    0x80,
    0xff,
    0x7fff,
    0x8000,
    0xffff,
    0x7fff_ffff,
    0xffff_ffff,
];

/// Extreme tokens for numbers in JSON and CSV text.
const TOKENS: [&str; 16] = [
    "0",
    "-1",
    "1e308",
    "-1e308",
    "1e-320",
    "1e999",
    "NaN",
    "4294967296",
    "18446744073709551616",
    "-0",
    "null",
    "\"x\"",
    "[]",
    "{}",
    "true",
    "99999999999999999999999",
];

fn mutate_bytes(rng: &mut Rng, seed: &[u8], other: &[u8]) -> Vec<u8> {
    let mut v = seed.to_vec();
    for _ in 0..1 + rng.below(4) {
        if v.is_empty() {
            v.push(rng.next() as u8);
            continue;
        }
        let i = rng.below(v.len());
        match rng.below(8) {
            0 => v[i] ^= 1 << rng.below(8),
            1 => v[i] = rng.next() as u8,
            2 => {
                let x = INTERESTING[rng.below(INTERESTING.len())].to_le_bytes();
                let w = [1, 2, 4][rng.below(3)];
                for (k, b) in x.iter().take(w).enumerate() {
                    if i + k < v.len() {
                        v[i + k] = *b;
                    }
                }
            }
            3 => {
                let n = rng.below(v.len() - i + 1);
                v.drain(i..i + n);
            }
            4 => {
                let n = rng.below((v.len() - i).min(256) + 1);
                let chunk: Vec<u8> = v[i..i + n].to_vec();
                let at = rng.below(v.len() + 1);
                v.splice(at..at, chunk);
            }
            5 => v.truncate(i),
            6 => {
                let n = 1 + rng.below(16);
                let at = rng.below(v.len() + 1);
                let bytes: Vec<u8> = (0..n).map(|_| rng.next() as u8).collect();
                v.splice(at..at, bytes);
            }
            _ => {
                if !other.is_empty() {
                    let j = rng.below(other.len());
                    let n = rng.below((other.len() - j).min(512) + 1);
                    let end = (i + n).min(v.len());
                    v.splice(i..end, other[j..j + n].iter().copied());
                }
            }
        }
    }
    v
}

/// Text mutation: mostly numbers swapped for extreme tokens, sometimes raw byte damage.
fn mutate_text(rng: &mut Rng, seed: &str, other: &str) -> Vec<u8> {
    if rng.below(3) == 0 {
        return mutate_bytes(rng, seed.as_bytes(), other.as_bytes());
    }
    let mut s = seed.to_string();
    for _ in 0..1 + rng.below(3) {
        let starts: Vec<usize> = s
            .char_indices()
            .filter(|(i, c)| {
                (c.is_ascii_digit() || *c == '-')
                    && !s[..*i]
                        .chars()
                        .last()
                        .is_some_and(|p| p.is_ascii_alphanumeric() || p == '.' || p == '-')
            })
            .map(|(i, _)| i)
            .collect();
        if starts.is_empty() {
            break;
        }
        let a = starts[rng.below(starts.len())];
        let len = s[a..]
            .find(|c: char| !(c.is_ascii_digit() || "+-.eE".contains(c)))
            .unwrap_or(s.len() - a);
        let token = TOKENS[rng.below(TOKENS.len())];
        s.replace_range(a..a + len, token);
    }
    s.into_bytes()
}

/// Runs `execs` inputs through `target`; returns the failures (panics and slow inputs).
fn campaign(
    name: &str,
    seeds: &[Vec<u8>],
    text: bool,
    execs: usize,
    seed: u64,
    slow: Duration,
    target: impl Fn(&[u8], u64),
) -> Vec<String> {
    let mut rng = Rng(seed);
    let mut failures = Vec::new();
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("target/fuzz-failures");
    let started = Instant::now();
    for k in 0..execs {
        let s = &seeds[rng.below(seeds.len())];
        let o = &seeds[rng.below(seeds.len())];
        let input = if k < seeds.len() {
            seeds[k].clone()
        } else if text {
            mutate_text(
                &mut rng,
                &String::from_utf8_lossy(s),
                &String::from_utf8_lossy(o),
            )
        } else {
            mutate_bytes(&mut rng, s, o)
        };
        let salt = rng.next();
        let t0 = Instant::now();
        FUZZING.with(|f| f.set(true));
        let r = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| target(&input, salt)));
        FUZZING.with(|f| f.set(false));
        let took = t0.elapsed();
        let what = match r {
            Err(p) => Some(format!(
                "panic: {}",
                p.downcast_ref::<String>()
                    .cloned()
                    .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                    .unwrap_or_default()
            )),
            Ok(()) if took > slow => Some(format!("slow: {took:?}")),
            Ok(()) => None,
        };
        if let Some(w) = what {
            let _ = std::fs::create_dir_all(&dir);
            let p = dir.join(format!("{name}-{k}.bin"));
            let _ = std::fs::write(&p, &input);
            failures.push(format!("{name} #{k}: {w} (input {})", p.display()));
            if failures.len() > 5 {
                break;
            }
        }
    }
    eprintln!(
        "fuzz {name}: {execs} executions in {:.1} s, {} failures",
        started.elapsed().as_secs_f64(),
        failures.len()
    );
    failures
}

/// Longer than this for one input is a hang (readers and one station's chain take milliseconds).
const SLOW: Duration = Duration::from_secs(2);

fn execs() -> usize {
    std::env::var("TAPGRID_FUZZ_EXECS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(20_000)
}

thread_local! {
    static FUZZING: std::cell::Cell<bool> = const { std::cell::Cell::new(false) };
}

fn quiet_panics() {
    // Panics of fuzzed inputs are counted and reported by the campaign; their default messages
    // would only be noise. Any other panic (a failing assertion) prints as usual.
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| {
        let default = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            if !FUZZING.with(|f| f.get()) {
                default(info);
            }
        }));
    });
}

fn wav_seeds() -> Vec<Vec<u8>> {
    let dir = tempfile::tempdir().unwrap();
    let mut seeds = Vec::new();
    let fs = 4000;
    let n = 6000;
    let a: Vec<f64> = (0..n)
        .map(|i| if (1000..1008).contains(&i) { 0.5 } else { 0.0 })
        .collect();
    let b: Vec<f64> = (0..n)
        .map(|i| {
            if i < 1000 {
                0.0
            } else {
                let t = (i - 1000) as f64 / fs as f64;
                0.3 * (-30.0 * t).exp() * (2.0 * std::f64::consts::PI * 310.0 * t).sin()
            }
        })
        .collect();
    for (k, enc) in [
        SampleEncoding::Int16,
        SampleEncoding::Int24,
        SampleEncoding::Int32,
        SampleEncoding::Float32,
    ]
    .into_iter()
    .enumerate()
    {
        let p = dir.path().join(format!("s{k}.wav"));
        if k == 2 {
            write_channels(&p, fs, enc, &[&a, &b, &a]).unwrap();
        } else {
            write_channels(&p, fs, enc, &[&a, &b]).unwrap();
        }
        seeds.push(std::fs::read(&p).unwrap());
    }
    // A file with a chunk before the data (as recorders write them).
    let mut with_list = seeds[0][..36].to_vec();
    with_list.extend_from_slice(b"LIST\x04\x00\x00\x00INFO");
    with_list.extend_from_slice(&seeds[0][36..]);
    seeds.push(with_list);
    seeds
}

#[test]
fn wav_reader_and_signal_chain() {
    quiet_panics();
    let seeds = wav_seeds();
    let label = PathBuf::from("fuzz.wav");
    let failures = campaign("wav", &seeds, false, execs(), 1, SLOW, |bytes, salt| {
        let mut d = Decoder::default();
        if let Ok(info) = d.decode_slice(&label, bytes, 0, 1, NonFinite::Keep)
            && salt % 50 == 0
            && info.frames < 50_000
        {
            let setup = tapgrid::setup::Setup {
                band_hz: Some([20.0, 0.4 * info.sample_rate_hz as f64]),
                trigger: tapgrid::setup::Trigger {
                    record_length_s: Some(0.25),
                    ..Default::default()
                },
                ..Default::default()
            };
            if setup.validate().is_ok() {
                let _ = tapgrid::signal::analyze_station(
                    &d.a,
                    &d.b,
                    info.sample_rate_hz,
                    &setup,
                    &BTreeMap::new(),
                    &mut None,
                );
            }
        }
    });
    assert!(failures.is_empty(), "{failures:#?}");
}

#[test]
fn stations_csv_reader() {
    quiet_panics();
    let seeds: Vec<Vec<u8>> = [
        "station,position_m\n1,0.0\n2,0.1\n3,0.25\n",
        "\u{feff}Station,Position_m,label\n1,0,drive end\n2,0.45,middle\n3,0.9,free end\n",
        "position_m,station\n0.0,10\n0.5,11\n",
    ]
    .iter()
    .map(|s| s.as_bytes().to_vec())
    .collect();
    let label = PathBuf::from("stations.csv");
    let failures = campaign("csv", &seeds, true, execs(), 2, SLOW, |bytes, _| {
        let text = String::from_utf8_lossy(bytes);
        let _ = tapgrid::acquire::wavset::parse_stations_csv(&label, &text);
    });
    assert!(failures.is_empty(), "{failures:#?}");
}

#[test]
fn session_manifest_reader() {
    quiet_panics();
    let text = std::fs::read_to_string(
        Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft/session.json"),
    )
    .unwrap();
    // A second seed: no model, a saved fit and a few hits (so mutations reach other fields).
    let mut v: serde_json::Value = serde_json::from_str(&text).unwrap();
    v["model"] = serde_json::Value::Null;
    v["fit"] = serde_json::to_value(tapgrid::modal::ModalSettings::default()).unwrap();
    if let Some(h) = v["hits"].as_array_mut() {
        h.truncate(4);
    }
    let seeds = vec![text.into_bytes(), v.to_string().into_bytes()];
    let label = PathBuf::from("session.json");
    let failures = campaign("manifest", &seeds, true, execs(), 3, SLOW, |bytes, _| {
        let text = String::from_utf8_lossy(bytes);
        if let Ok(m) = tapgrid::session::Manifest::from_json(&label, &text) {
            let s = tapgrid::session::Session {
                dir: PathBuf::from("/nonexistent"),
                manifest: m,
            };
            let _ = s.dataset();
            let _ = s.overrides();
        }
    });
    assert!(failures.is_empty(), "{failures:#?}");
}

#[test]
fn shaft_and_study_readers() {
    quiet_panics();
    let scenario: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("assets/demo-scenario.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let shaft = scenario["shaft"].to_string();
    let manifest: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(
            Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft/session.json"),
        )
        .unwrap(),
    )
    .unwrap();
    let study = manifest["model"].to_string();
    let seeds = vec![shaft.into_bytes(), study.into_bytes()];
    let label = PathBuf::from("shaft.json");
    // A whole model study (meshes refined to convergence, a stiffness sweep of 25 solves) takes
    // about 1.5 s on a bench shaft: a hang is ten seconds.
    let slow = Duration::from_secs(10);
    let failures = campaign("shaft", &seeds, true, execs(), 4, slow, |bytes, salt| {
        let text = String::from_utf8_lossy(bytes);
        if let Ok(shaft) = tapgrid::model::run::parse_shaft(&label, &text)
            && salt % 2000 == 0
        {
            let _ = tapgrid::model::run::converged_modes(
                &shaft,
                tapgrid::model::beam::BeamTheory::Timoshenko,
                4,
                &[],
            );
        }
        if let Ok(st) = serde_json::from_str::<tapgrid::model::study::Study>(&text)
            && st.validate().is_ok()
            && salt % 20_000 == 1
        {
            let _ = tapgrid::pipeline::study(&st, None);
        }
    });
    assert!(failures.is_empty(), "{failures:#?}");
}
