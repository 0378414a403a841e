//! Live capture through a real ALSA stack, no sound card: alsa-lib's `file` PCM plugin reads a
//! FIFO that a writer thread fills at the sample rate (bit-exact, paced by the plugin's `null`
//! slave), and `tapgrid capture` records from it through cpal. Checks: the saved records equal
//! the fed samples bit for bit, the FRF equals `analyze` on the same recording, twenty `kill -9`
//! at random instants lose no reported hit, and the faults (device gone, disk full, unwritable
//! folder) end with a clear message and no lost hit.

#![allow(clippy::unwrap_used, clippy::expect_used)]

use std::io::{BufRead, BufReader, Write};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use tapgrid::acquire::wav::read_two_channels;
use tapgrid::analysis::{self, Dataset};
use tapgrid::capture::checksum;
use tapgrid::session::Session;
use tapgrid::sim::Scenario;

const RATE: u32 = 48_000;
const CHUNK: usize = 1024;

/// A FIFO-fed ALSA device named `tg`, its config, and the writer thread feeding it.
struct Rig {
    dir: tempfile::TempDir,
    stop: Arc<AtomicBool>,
    pause: Arc<AtomicBool>,
    writer: Option<std::thread::JoinHandle<()>>,
}

impl Rig {
    /// Feeds `lead_s` of silence, then `a`/`b` (looped when `looped`), then silence.
    fn new(a: Vec<f32>, b: Vec<f32>, lead_s: f64, looped: bool) -> Self {
        let dir = tempfile::tempdir().unwrap();
        let fifo = dir.path().join("in.fifo");
        assert!(
            Command::new("mkfifo")
                .arg(&fifo)
                .status()
                .unwrap()
                .success()
        );
        let conf = dir.path().join("asound.conf");
        std::fs::write(
            &conf,
            format!(
                "pcm.tg_file {{ type file slave.pcm \"null\" file \"/dev/null\" infile \"{}\" format \"raw\" }}\n\
                 pcm.tg {{ type plug slave {{ pcm \"tg_file\" format FLOAT_LE channels 2 rate {RATE} }}\n\
                 hint {{ show on description \"tapgrid test capture\" }} }}\n",
                fifo.display()
            ),
        )
        .unwrap();
        let stop = Arc::new(AtomicBool::new(false));
        let pause = Arc::new(AtomicBool::new(false));
        let (s2, p2) = (stop.clone(), pause.clone());
        let writer = std::thread::spawn(move || {
            // Read-write so opening never waits for a reader.
            let mut f = std::fs::OpenOptions::new()
                .read(true)
                .write(true)
                .open(&fifo)
                .unwrap();
            let lead = (lead_s * RATE as f64) as usize;
            let mut i = 0usize;
            let mut t0 = Instant::now();
            let mut sent = 0usize;
            let mut buf = Vec::with_capacity(CHUNK * 8);
            while !s2.load(Ordering::Relaxed) {
                if p2.load(Ordering::Relaxed) {
                    std::thread::sleep(Duration::from_millis(5));
                    t0 = Instant::now();
                    sent = 0;
                    continue;
                }
                buf.clear();
                for _ in 0..CHUNK {
                    let (x, y) = if i < lead {
                        (0.0, 0.0)
                    } else {
                        let k = i - lead;
                        let k = if looped { k % a.len() } else { k };
                        (
                            a.get(k).copied().unwrap_or(0.0),
                            b.get(k).copied().unwrap_or(0.0),
                        )
                    };
                    buf.extend_from_slice(&x.to_le_bytes());
                    buf.extend_from_slice(&y.to_le_bytes());
                    i += 1;
                }
                if f.write_all(&buf).is_err() {
                    return;
                }
                sent += CHUNK;
                let due = t0 + Duration::from_secs_f64(sent as f64 / RATE as f64);
                match due.checked_duration_since(Instant::now()) {
                    Some(d) => std::thread::sleep(d),
                    // Blocked on a full pipe while no one read: start the clock again.
                    None if Instant::now() - due > Duration::from_millis(200) => {
                        t0 = Instant::now();
                        sent = 0;
                    }
                    None => {}
                }
            }
        });
        Self {
            dir,
            stop,
            pause,
            writer: Some(writer),
        }
    }

    fn capture(&self, session: &Path, hits: usize, extra: &[&str]) -> Command {
        let conf = self.dir.path().join("asound.conf");
        let mut c = Command::new(env!("CARGO_BIN_EXE_tapgrid"));
        c.env(
            "ALSA_CONFIG_PATH",
            format!("/usr/share/alsa/alsa.conf:{}", conf.display()),
        )
        .args([
            "capture",
            "--device",
            "alsa:tg",
            "--buffer",
            "1024",
            "--station",
            "1",
        ])
        .arg("--session")
        .arg(session)
        .args(["--hits", &hits.to_string()])
        .args([
            "--band",
            "10:3000",
            "--sensitivity",
            "2.25mV/N,1.02mV/(m/s^2)",
        ])
        .args(extra);
        c
    }
}

impl Drop for Rig {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
        // Unblock a writer waiting on a full pipe.
        let fifo = self.dir.path().join("in.fifo");
        if let Ok(mut f) = std::fs::OpenOptions::new().read(true).open(&fifo) {
            let mut sink = vec![0u8; 1 << 20];
            let _ = std::io::Read::read(&mut f, &mut sink);
        }
        if let Some(w) = self.writer.take() {
            let _ = w.join();
        }
    }
}

/// A simulated station recording (3 hits), float32 so its samples are exact in f32.
fn recording(hits: usize) -> (PathBuf, tempfile::TempDir, Vec<f32>, Vec<f32>) {
    let tmp = tempfile::tempdir().unwrap();
    let mut sc = Scenario::pump_shaft();
    sc.stations_m = vec![0.0, 0.45];
    sc.drive_station = 1;
    sc.reference_station = 1;
    sc.hits_per_station = hits;
    sc.rig.sample_rate_hz = RATE;
    sc.rig.encoding = tapgrid::acquire::wav::SampleEncoding::Float32;
    sc.double_hits.clear();
    sc.overloads.clear();
    sc.write(tmp.path()).unwrap();
    let wav = tmp.path().join("station-01.wav");
    let two = read_two_channels(&wav, 0, 1).unwrap();
    let a = two.a.iter().map(|&v| v as f32).collect();
    let b = two.b.iter().map(|&v| v as f32).collect();
    (wav, tmp, a, b)
}

fn wait(mut child: Child, limit: Duration) -> (i32, String, String) {
    let t0 = Instant::now();
    loop {
        if let Some(st) = child.try_wait().unwrap() {
            let mut out = String::new();
            let mut err = String::new();
            if let Some(mut o) = child.stdout.take() {
                std::io::Read::read_to_string(&mut o, &mut out).unwrap();
            }
            if let Some(mut e) = child.stderr.take() {
                std::io::Read::read_to_string(&mut e, &mut err).unwrap();
            }
            return (st.code().unwrap_or(-1), out, err);
        }
        if t0.elapsed() > limit {
            let _ = child.kill();
            panic!("capture did not finish in {limit:?}");
        }
        std::thread::sleep(Duration::from_millis(50));
    }
}

/// Where `needle`'s first hammer pulse starts in `hay` minus where it starts in `needle`.
fn offset(hay: &[f32], needle: &[f32]) -> isize {
    let first = |x: &[f32]| x.iter().position(|v| v.abs() > 0.02).unwrap() as isize;
    first(hay) - first(needle)
}

#[test]
fn captured_hits_are_the_fed_samples_and_give_the_same_frf() {
    let (wav, _tmp, a, b) = recording(3);
    let rig = Rig::new(a.clone(), b.clone(), 0.6, false);
    let out = tempfile::tempdir().unwrap();
    let session = out.path().join("s");
    let child = rig
        .capture(&session, 3, &[])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let (code, stdout, stderr) = wait(child, Duration::from_secs(60));
    assert_eq!(code, 0, "stdout:\n{stdout}\nstderr:\n{stderr}");
    assert_eq!(stdout.matches("saved station 1").count(), 3, "{stdout}");
    // Bit-exact: every saved record equals the fed samples.
    let s = Session::open(&session).unwrap();
    let rec = &s.manifest.recordings[0];
    let cap = read_two_channels(&session.join(&rec.file), 0, 1).unwrap();
    let ca: Vec<f32> = cap.a.iter().map(|&v| v as f32).collect();
    let cb: Vec<f32> = cap.b.iter().map(|&v| v as f32).collect();
    let off = offset(&ca, &a);
    assert!(off >= 0, "capture started after the first hit");
    let data = s.dataset();
    let got = analysis::run(&data, &s.manifest.setup).unwrap();
    let hits = &got.stations[0].result.hits;
    assert_eq!(hits.len(), 3);
    let n = got.stations[0].result.record_samples;
    for h in hits {
        let st = h.record_start.unwrap();
        let src = (st as isize - off) as usize;
        assert!(
            ca[st..st + n] == a[src..src + n],
            "hit {} channel A differs",
            h.index
        );
        assert!(
            cb[st..st + n] == b[src..src + n],
            "hit {} channel B differs",
            h.index
        );
        // The checksum printed when it was saved matches.
        let sum = format!("{:016x}", checksum(&ca[st..st + n], &cb[st..st + n]));
        assert!(stdout.contains(&sum), "checksum {sum} not reported");
    }
    // The FRF equals analyze's on the same recording.
    let set = tapgrid::acquire::wavset::WavSet::scan(wav.parent().unwrap(), 0.1).unwrap();
    let mut one = Dataset::from_wavset(&set);
    one.stations.retain(|s| s.station == 1);
    let reference = analysis::run(&one, &s.manifest.setup).unwrap();
    let fa = got.stations[0].result.frf.as_ref().unwrap();
    let fr = reference.stations[0].result.frf.as_ref().unwrap();
    assert_eq!(fa.hits_averaged, fr.hits_averaged);
    let mut worst = 0.0f64;
    for k in 0..fa.h.len() {
        if fr.coherence[k] > 0.9 {
            worst = worst.max((fa.h[k] - fr.h[k]).norm() / fr.h[k].norm());
        }
    }
    println!("worst relative FRF difference capture vs analyze: {worst:.2e}");
    assert!(worst < 1e-6, "FRF differs by {worst}");
}

#[test]
fn twenty_kills_lose_no_reported_hit() {
    let (_wav, _tmp, a, b) = recording(3);
    let rig = Rig::new(a, b, 0.2, true);
    let out = tempfile::tempdir().unwrap();
    let session = out.path().join("s");
    let mut reported: Vec<(usize, u64, usize, usize)> = Vec::new();
    let mut seed = 0x2545_f491_4f6c_dd1du64;
    let mut rand = || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed >> 11) as f64 / (1u64 << 53) as f64
    };
    for round in 0..20 {
        let mut child = rig
            .capture(&session, 10_000, &[])
            .stdout(Stdio::piped())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        let stdout = child.stdout.take().unwrap();
        let lines = std::thread::spawn(move || {
            BufReader::new(stdout)
                .lines()
                .map_while(Result::ok)
                .collect::<Vec<String>>()
        });
        std::thread::sleep(Duration::from_secs_f64(1.5 + 3.0 * rand()));
        child.kill().unwrap(); // SIGKILL
        child.wait().unwrap();
        for l in lines.join().unwrap() {
            // saved station 1 hit 3 at 1.234 s: kept record 123+456 checksum 0123… latency …
            if let Some(rest) = l.strip_prefix("saved station 1 hit ") {
                let idx: usize = rest.split(' ').next().unwrap().parse().unwrap();
                let rec = l
                    .split(" record ")
                    .nth(1)
                    .unwrap()
                    .split(' ')
                    .next()
                    .unwrap();
                let (st, n) = rec.split_once('+').unwrap();
                let sum = l
                    .split(" checksum ")
                    .nth(1)
                    .unwrap()
                    .split(' ')
                    .next()
                    .unwrap();
                reported.push((
                    idx - 1,
                    u64::from_str_radix(sum, 16).unwrap(),
                    st.parse().unwrap(),
                    n.parse().unwrap(),
                ));
            }
        }
        // The session reopens and holds every hit reported so far, bit for bit.
        let s = Session::open(&session)
            .unwrap_or_else(|e| panic!("round {round}: session does not reopen: {e}"));
        if reported.is_empty() {
            continue;
        }
        let rec = &s.manifest.recordings[0];
        let cap = read_two_channels(&session.join(&rec.file), 0, 1).unwrap();
        let ca: Vec<f32> = cap.a.iter().map(|&v| v as f32).collect();
        let cb: Vec<f32> = cap.b.iter().map(|&v| v as f32).collect();
        for &(idx, sum, st, n) in &reported {
            assert!(
                s.manifest
                    .hits
                    .iter()
                    .any(|h| h.station == 1 && h.index == idx),
                "round {round}: hit {idx} missing from the manifest"
            );
            assert_eq!(
                checksum(&ca[st..st + n], &cb[st..st + n]),
                sum,
                "round {round}: hit {idx} differs from what was reported saved"
            );
        }
    }
    assert!(
        reported.len() >= 5,
        "only {} hits in 20 rounds",
        reported.len()
    );
    println!(
        "{} hits reported saved over 20 kills, all found bit for bit",
        reported.len()
    );
}

#[test]
fn faults_end_cleanly_and_keep_saved_hits() {
    let (_wav, _tmp, a, b) = recording(3);
    let rig = Rig::new(a, b, 0.2, true);
    let out = tempfile::tempdir().unwrap();

    // The device goes silent mid-test (unplugged): capture stops with a clear message.
    let session = out.path().join("unplug");
    let mut child = rig
        .capture(&session, 10_000, &["--stall", "1.0"])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let stdout = child.stdout.take().unwrap();
    let mut lines = BufReader::new(stdout).lines();
    let mut saved = 0;
    while saved < 2 {
        let l = lines.next().unwrap().unwrap();
        if l.starts_with("saved station") {
            saved += 1;
        }
    }
    rig.pause.store(true, Ordering::Relaxed);
    let rest: Vec<String> = lines.map_while(Result::ok).collect();
    let (code, _, stderr) = wait(child, Duration::from_secs(30));
    rig.pause.store(false, Ordering::Relaxed);
    assert_eq!(code, 2, "{stderr}");
    assert!(
        stderr.contains("unplugged") || stderr.contains("not available"),
        "{stderr}"
    );
    let kept = 2 + rest
        .iter()
        .filter(|l| l.starts_with("saved station"))
        .count();
    let s = Session::open(&session).unwrap();
    assert!(s.manifest.hits.len() >= kept.min(2));

    // Disk full: the file size limit stands in for a full disk (writes fail with EFBIG).
    let session = out.path().join("full");
    let cmd = rig.capture(&session, 10_000, &[]);
    let mut sh = Command::new("sh");
    let args: Vec<String> = std::iter::once(cmd.get_program().to_string_lossy().into_owned())
        .chain(cmd.get_args().map(|a| a.to_string_lossy().into_owned()))
        .map(|a| format!("'{a}'"))
        .collect();
    sh.arg("-c")
        .arg(format!(
            "trap '' XFSZ; ulimit -f 2500; exec {}",
            args.join(" ")
        ))
        .envs(cmd.get_envs().filter_map(|(k, v)| v.map(|v| (k, v))))
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    let (code, stdout, stderr) = wait(sh.spawn().unwrap(), Duration::from_secs(60));
    assert_eq!(code, 2, "stdout {stdout}\nstderr {stderr}");
    assert!(
        stderr.contains("File too large") || stderr.contains("No space"),
        "{stderr}"
    );
    assert!(
        stderr.contains("every hit reported before this is saved"),
        "{stderr}"
    );
    let n_reported = stdout.matches("saved station").count();
    let s = Session::open(&session).unwrap();
    assert!(n_reported >= 1, "{stdout}");
    assert_eq!(
        s.manifest.hits.len(),
        n_reported,
        "the manifest holds exactly the reported hits"
    );

    // An unwritable session folder (its parent is a file): stops before any hit.
    let blocker = out.path().join("a-file");
    std::fs::write(&blocker, b"x").unwrap();
    let child = rig
        .capture(&blocker.join("session"), 3, &[])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let (code, stdout, stderr) = wait(child, Duration::from_secs(30));
    assert_eq!(code, 2);
    assert!(stderr.contains("a-file"), "{stderr}");
    assert!(!stdout.contains("saved station"));
}
