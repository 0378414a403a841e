//! The capture worker at 192 kHz × 2 channels: a generator with a hit every second feeds the
//! engine for 10 simulated minutes (as fast as the engine takes it); stations of 5 accepted
//! hits follow one another, each hit analysed and saved (session in /dev/shm when present).
//! Reports dropped samples, the worker's CPU share of real time and the hit-to-verdict latency.
//!
//! `cargo bench --bench capture`

use std::time::{Duration, Instant};

use tapgrid::acquire::source::Source;
use tapgrid::capture::generator::Generator;
use tapgrid::capture::{Engine, Event};
use tapgrid::session::Part;
use tapgrid::setup::Setup;

fn cpu_seconds() -> f64 {
    // utime + stime of this process from /proc (Linux), in clock ticks of 1/100 s.
    let s = std::fs::read_to_string("/proc/self/stat").unwrap_or_default();
    let f: Vec<&str> = s
        .rsplit(')')
        .next()
        .unwrap_or("")
        .split_whitespace()
        .collect();
    let t = |i: usize| f.get(i).and_then(|v| v.parse::<f64>().ok()).unwrap_or(0.0);
    (t(11) + t(12)) / 100.0
}

fn main() {
    let rate: u32 = std::env::var("TAPGRID_BENCH_RATE")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(192_000);
    let minutes: f64 = std::env::var("TAPGRID_BENCH_MINUTES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(10.0);
    let seconds = minutes * 60.0;
    let root = if std::path::Path::new("/dev/shm").is_dir() {
        std::path::PathBuf::from("/dev/shm")
    } else {
        std::env::temp_dir()
    };
    let dir = root.join(format!("tapgrid-capture-bench-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    let setup = Setup {
        trigger: tapgrid::setup::Trigger {
            // Hits a second apart need records shorter than a second.
            record_length_s: Some(0.75),
            ..Default::default()
        },
        band_hz: Some([10.0, 5000.0]),
        ..Setup::default()
    };
    let mut source = Generator::new(rate, 1.0, seconds, 4096, false);
    let mut engine = Engine::open(&dir, setup, Part::default(), rate).expect("session");
    let mut station = 1;
    engine.arm(station, None).expect("arm");
    let mut latencies = Vec::new();
    let mut buf = Vec::with_capacity(8192);
    let cpu0 = cpu_seconds();
    let t0 = Instant::now();
    loop {
        buf.clear();
        match source.read(&mut buf, Duration::from_millis(1)) {
            Ok(()) => {}
            Err(_) => break,
        }
        for ev in engine.push(&buf).expect("capture") {
            if let Event::Hit(h) = ev {
                latencies.push(h.latency_s);
            }
        }
        if engine.accepted() >= 5 {
            station += 1;
            engine.arm(station, None).expect("arm");
        }
    }
    let wall = t0.elapsed().as_secs_f64();
    let cpu = cpu_seconds() - cpu0;
    latencies.sort_by(f64::total_cmp);
    let produced = source.produced();
    let expected = (seconds * rate as f64) as u64;
    println!(
        "capture at {rate} Hz × 2 ch, {minutes} simulated min, {} hits on {} stations",
        latencies.len(),
        station
    );
    println!(
        "  dropped samples: {} (fed {produced} of {expected} frames)",
        expected - produced
    );
    println!(
        "  worker CPU: {cpu:.1} s for {seconds:.0} s of signal = {:.1} % of real time (wall {wall:.1} s)",
        100.0 * cpu / seconds
    );
    if !latencies.is_empty() {
        println!(
            "  record end → verdict saved: median {:.1} ms, worst {:.1} ms",
            latencies[latencies.len() / 2] * 1e3,
            latencies[latencies.len() - 1] * 1e3
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
}
