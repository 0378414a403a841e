//! Commands on the audio interface: list inputs, capture, calibrate.

use super::*;

pub(super) fn devices() -> Result<()> {
    let list = crate::acquire::live::list_inputs()?;
    if list.is_empty() {
        println!("no input devices found");
    }
    for d in list {
        println!("{}", d.id);
        println!("    name: {}", d.name);
        if let Some(c) = &d.default_config {
            println!("    default: {c}");
        }
        for f in &d.formats {
            println!("    supports: {f}");
        }
    }
    println!("generator");
    println!("    name: built-in synthetic hammer test (no hardware), 51200 Hz");
    Ok(())
}

pub(super) fn capture(a: CaptureArgs) -> Result<()> {
    use crate::capture::{Engine, Event, Plan};
    use std::io::Write;
    let setup = a.setup.apply(Setup::default())?;
    let mut source = crate::capture::open_source(
        &a.device,
        [setup.channel_a.index, setup.channel_b.index],
        a.rate,
        a.buffer,
    )?;
    let mut engine = Engine::open(
        &a.session,
        setup,
        Part {
            name: a.part.clone(),
            notes: String::new(),
        },
        source.sample_rate_hz(),
    )?;
    let plan = Plan {
        stations: vec![a.station],
        hits: a.hits,
        positions_m: a
            .position
            .map(|p| [(a.station, p)].into())
            .unwrap_or_default(),
        stall: std::time::Duration::from_secs_f64(a.stall.max(0.1)),
    };
    let stdout = std::io::stdout();
    let dir = crate::capture::run(source.as_mut(), &mut engine, &plan, |ev| {
        let mut o = stdout.lock();
        let _ = match ev {
            Event::Armed { station, accepted } => {
                writeln!(
                    o,
                    "armed station {station} ({accepted} accepted so far): tap"
                )
            }
            Event::Hit(h) => writeln!(
                o,
                "saved station {} hit {} at {:.3} s: {}{} record {}+{} checksum {:016x} latency {:.1} ms ({} accepted)",
                h.station,
                h.index + 1,
                h.time_s,
                if h.accepted { "kept" } else { "rejected" },
                if h.reasons.is_empty() {
                    String::new()
                } else {
                    format!(
                        " ({})",
                        h.reasons
                            .iter()
                            .map(|r| r.word())
                            .collect::<Vec<_>>()
                            .join(", ")
                    )
                },
                h.record_start,
                h.record_samples,
                h.checksum,
                h.latency_s * 1e3,
                h.accepted_so_far
            ),
            Event::StationDone { station, accepted } => {
                writeln!(o, "station {station} done: {accepted} accepted hits")
            }
            Event::Health(h) => writeln!(
                o,
                "warning: {} frames dropped (worker too slow), {} stream errors",
                h.overrun_frames, h.stream_errors
            ),
            Event::Levels { .. } => Ok(()),
        };
        let _ = o.flush();
    })?;
    println!("session: {}", dir.display());
    Ok(())
}

pub(super) fn calibrate(a: CalibrateArgs) -> Result<()> {
    use crate::signal::calibration as cal;
    match a.what {
        CalibrateWhat::Sensitivity {
            wav,
            channel,
            frequency,
            rms,
            full_scale_volts,
        } => {
            let two = crate::acquire::wav::read_two_channels(&wav, channel, channel)?;
            let s = cal::tone(&two.a, two.info.sample_rate_hz, frequency)
                .map_err(|m| anyhow!("{}: {m}", wav.display()))?;
            let v_rms = s.rms_fs * full_scale_volts;
            println!(
                "tone {:.2} Hz at {:.5} of full scale rms = {:.4} V rms (purity {:.1} %)",
                s.frequency_hz,
                s.rms_fs,
                v_rms,
                s.purity * 100.0
            );
            println!(
                "sensitivity {:.4} mV/(m/s²) = {:.3} mV/g",
                v_rms / rms * 1e3,
                v_rms / rms * 1e3 * crate::units::STANDARD_GRAVITY_M_S2
            );
        }
        CalibrateWhat::FullScale {
            wav,
            channel,
            frequency,
            volts_rms,
        } => {
            let two = crate::acquire::wav::read_two_channels(&wav, channel, channel)?;
            let s = cal::tone(&two.a, two.info.sample_rate_hz, frequency)
                .map_err(|m| anyhow!("{}: {m}", wav.display()))?;
            println!(
                "tone {:.2} Hz at {:.5} of full scale rms; full scale = {:.4} V (purity {:.1} %)",
                s.frequency_hz,
                s.rms_fs,
                volts_rms / s.rms_fs,
                s.purity * 100.0
            );
        }
        CalibrateWhat::Mass {
            wav,
            mass_kg,
            setup,
        } => {
            let setup = setup.apply(Setup::default())?;
            let two = crate::acquire::wav::read_two_channels(
                &wav,
                setup.channel_a.index,
                setup.channel_b.index,
            )?;
            let r = cal::mass_check(&two.a, &two.b, two.info.sample_rate_hz, &setup, mass_kg)
                .map_err(|m| anyhow!("{}: {m}", wav.display()))?;
            println!(
                "mass check: measured |H|·m = {:.4} (1 = calibrated) over {:.0}–{:.0} Hz, spread ±{:.1} %, {} hits",
                r.ratio,
                r.band_hz[0],
                r.band_hz[1],
                r.spread * 100.0,
                r.hits
            );
            println!(
                "multiply the accelerometer/hammer sensitivity ratio (B/A) by {:.4} to calibrate",
                r.ratio
            );
        }
        CalibrateWhat::Loopback { wav, channels } => {
            let (ca, cb) = pair::<usize>(&channels, "channels")?;
            let two = crate::acquire::wav::read_two_channels(&wav, ca, cb)?;
            let r = cal::loopback(&two.a, &two.b, two.info.sample_rate_hz)
                .map_err(|m| anyhow!("{}: {m}", wav.display()))?;
            println!(
                "loopback: |H| {:.4} (worst {:.4}), phase worst {:.2}°, polarity {}",
                r.gain,
                r.worst_gain,
                r.worst_phase_deg,
                if r.inverted { "INVERTED" } else { "correct" }
            );
        }
    }
    Ok(())
}
