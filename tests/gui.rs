//! The window, driven through its accessibility tree with egui_kittest (no display, no GPU):
//! every view, the station map, a verdict flip, pole picking, the animation and the help.
//! Expected values come from the bundled demo session and the library's own analysis of it.

use std::path::PathBuf;
use std::time::{Duration, Instant};

use eframe::egui;
use egui_kittest::Harness;
use egui_kittest::kittest::{NodeT, Queryable};
use tapgrid::app::{Settings, TapgridApp, View};

fn demo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft")
}

fn harness() -> Harness<'static, TapgridApp> {
    let app = TapgridApp::new(Settings::default(), Some(demo()));
    Harness::builder()
        .with_size(egui::vec2(1600.0, 1000.0))
        .build_ui_state(
            |ui, app: &mut TapgridApp| {
                app.logic(ui.ctx());
                app.show(ui);
            },
            app,
        )
}

/// Steps frames until the worker has nothing left to do (twice in a row, since drawing a view
/// may ask it for more), then checks the cautions were acknowledged.
fn settle(h: &mut Harness<'static, TapgridApp>) {
    let t0 = Instant::now();
    let mut quiet = 0;
    while quiet < 3 {
        h.step();
        if h.state().idle() && h.state().doc.as_ref().is_some_and(|d| d.analysis.is_some()) {
            quiet += 1;
        } else {
            quiet = 0;
            std::thread::sleep(Duration::from_millis(5));
        }
        assert!(
            t0.elapsed() < Duration::from_secs(300),
            "the worker never finished"
        );
    }
}

fn open_demo() -> Harness<'static, TapgridApp> {
    let mut h = harness();
    settle(&mut h);
    // First start: the cautions come first.
    h.get_by_label("I have read these cautions").click();
    h.step();
    assert!(h.state().settings.cautions_read);
    h
}

#[test]
fn every_view_by_its_label_and_the_help() {
    let mut h = open_demo();
    for v in View::ALL {
        h.get_by_label(v.label()).click();
        settle(&mut h);
        assert_eq!(h.state().settings.view, v, "tab {}", v.label());
    }
    // Each view shows what it is for.
    h.get_by_label("Mode shapes").click();
    settle(&mut h);
    h.get_by_label("Auto-MAC");
    h.get_by_label("Test setup").click();
    settle(&mut h);
    h.get_by_label("Trigger and record");
    h.get_by_label("Station map").click();
    h.step();
    h.get_by_label("Help").click();
    h.run_steps(2);
    assert!(h.state().show_help);
    h.get_by_label("Keyboard");
    h.get_by_label_contains("locked out");
    h.get_by_label("Close help").click_accesskit();
    h.run_steps(2);
    assert!(!h.state().show_help);
    // F1 opens it too, and arrow keys walk the stations.
    h.key_press(egui::Key::F1);
    h.run_steps(2);
    assert!(h.state().show_help);
    let first = h.state().current_station;
    h.key_press(egui::Key::ArrowRight);
    h.step();
    assert_eq!(h.state().current_station, first.map(|s| s + 1));
}

#[test]
fn a_station_cell_click_then_a_verdict_flip_changes_the_frf() {
    let manifest = std::fs::read(demo().join("session.json")).expect("demo manifest");
    let mut h = open_demo();
    h.get_by_label("Station map").click();
    h.step();
    h.get_by_label("Station 3").click();
    settle(&mut h);
    assert_eq!(h.state().current_station, Some(3));

    let station_frf = |h: &Harness<'static, TapgridApp>| {
        let d = h.state().doc.as_ref().expect("open");
        let f = d.frfs.as_ref().expect("frfs");
        let i = f.stations.iter().position(|&s| s == 3).expect("station 3");
        (f.h[i].clone(), f.hits[i])
    };
    let (before, n_before) = station_frf(&h);
    assert_eq!(n_before, 3, "the demo's station 3 has three good hits");

    h.get_by_label("Hit check").click();
    settle(&mut h);
    h.get_by_label("Reject hit").click();
    settle(&mut h);
    let (after, n_after) = station_frf(&h);
    assert_eq!(n_after, 2);
    let sa = h
        .state()
        .doc
        .as_ref()
        .and_then(|d| d.station_analysis(3))
        .expect("station 3");
    assert!(!sa.result.hits[0].accepted);
    assert_eq!(sa.result.hits[0].override_accept, Some(false));
    // Averages of two hits instead of three: a different (but close) FRF.
    let diff: f64 = before.iter().zip(&after).map(|(a, b)| (a - b).norm()).sum();
    assert!(diff > 0.0);
    h.get_by_label("REJECTED");
    // The keyboard: A accepts the hit shown again.
    h.key_press(egui::Key::A);
    settle(&mut h);
    assert_eq!(station_frf(&h).1, 3);
    // The bundled demo is read-only: the repository's copy is untouched.
    assert_eq!(
        std::fs::read(demo().join("session.json")).expect("manifest"),
        manifest
    );
}

#[test]
fn dropping_and_taking_a_pole_changes_the_mode_table() {
    let mut h = open_demo();
    h.get_by_label("Pole picking").click();
    settle(&mut h);
    let modes = |h: &Harness<'static, TapgridApp>| -> Vec<f64> {
        let d = h.state().doc.as_ref().expect("open");
        d.modal
            .as_ref()
            .expect("fit")
            .modes
            .iter()
            .map(|m| m.frequency_hz)
            .collect()
    };
    let all = modes(&h);
    assert_eq!(
        all.len(),
        5,
        "the demo has five modes in its band (simulation-truth.json)"
    );
    // Drop the second mode's column.
    let f2 = all[1];
    let column = h
        .get_by_label_contains(&format!("drop {:.0}", all[1].floor()))
        .accesskit_node()
        .label()
        .expect("a labelled button");
    let hz = column.trim_start_matches("drop ").to_string();
    h.get_by_label(&column).click();
    settle(&mut h);
    let four = modes(&h);
    assert_eq!(four.len(), 4);
    assert!(four.iter().all(|f| (f - f2).abs() > 0.01 * f2));
    // And take it back.
    h.get_by_label(&format!("take {hz}")).click();
    settle(&mut h);
    let back = modes(&h);
    assert_eq!(back.len(), 5);
    assert!((back[1] - f2).abs() < 1e-3 * f2, "{} vs {f2}", back[1]);
    // Back to the automatic choice.
    h.get_by_label("Automatic choice").click();
    settle(&mut h);
    assert!(h.state().doc.as_ref().unwrap().picked.is_none());
}

#[test]
fn the_animation_plays_and_pauses() {
    let mut h = open_demo();
    h.get_by_label("Mode shapes").click();
    settle(&mut h);
    assert!(h.state().playing);
    let p0 = h.state().phase_rad;
    for _ in 0..10 {
        h.step();
    }
    assert!(h.state().phase_rad != p0, "the shape moves while playing");
    h.get_by_label("Pause").click();
    h.step();
    assert!(!h.state().playing);
    let p1 = h.state().phase_rad;
    for _ in 0..10 {
        h.step();
    }
    assert_eq!(h.state().phase_rad, p1, "paused means still");
    h.key_press(egui::Key::Space);
    h.step();
    assert!(h.state().playing);
    // Choosing another mode animates that one.
    h.get_by_label("3").click();
    h.step();
    assert_eq!(h.state().selected_mode, 2);
}

#[test]
fn save_as_makes_a_session_that_keeps_later_verdicts() {
    let tmp = tempfile::tempdir().expect("temp");
    let dir = tmp.path().join("copy");
    let mut h = open_demo();
    h.state_mut()
        .push(tapgrid::app::Command::SaveAs(dir.clone()));
    settle(&mut h);
    let d = h.state().doc.as_ref().expect("open");
    assert_eq!(d.path, dir);
    assert!(!d.read_only);
    // The copy's recordings are byte for byte the demo's.
    for f in ["raw/station-001.wav", "raw/station-010.wav"] {
        assert_eq!(
            std::fs::read(dir.join(f)).unwrap(),
            std::fs::read(demo().join(f)).unwrap()
        );
    }
    // A verdict in the copy reaches its session.json once the analysis is in.
    h.state_mut().push(tapgrid::app::Command::SetVerdict {
        station: 5,
        hit: 1,
        accept: Some(false),
    });
    settle(&mut h);
    let s = tapgrid::session::Session::open(&dir).expect("the copy opens");
    let hit = s
        .manifest
        .hits
        .iter()
        .find(|x| x.station == 5 && x.index == 1)
        .expect("hit");
    assert_eq!(hit.override_accept, Some(false));
    assert!(!hit.accepted);
}

#[test]
fn live_capture_from_the_generator_saves_and_shows_a_hit() {
    let tmp = tempfile::tempdir().expect("temp");
    let session = tmp.path().join("live");
    let mut h = open_demo();
    h.get_by_label("Live capture").click();
    h.run_steps(2);
    h.state_mut().settings.capture_device = Some("generator".into());
    h.state_mut().capture.new_session = session.display().to_string();
    h.get_by_label("Start capture").click();
    // The generator taps every 1.5 s in real time; wait for the first saved hit.
    let t0 = Instant::now();
    while h.state().capture.last_hit.is_none() {
        h.step();
        std::thread::sleep(Duration::from_millis(20));
        assert!(t0.elapsed() < Duration::from_secs(30), "no hit arrived");
    }
    let hit = h.state().capture.last_hit.clone().expect("hit");
    assert!(hit.accepted);
    h.run_steps(2);
    h.get_by_label_contains("KEPT");
    // It was on disk before the screen showed it.
    let s = tapgrid::session::Session::open(&session).expect("session");
    assert!(
        s.manifest
            .hits
            .iter()
            .any(|x| x.index == hit.index && x.accepted)
    );
    h.get_by_label("Stop").click();
    let t0 = Instant::now();
    while h.state().capture.handle.is_some() {
        h.step();
        std::thread::sleep(Duration::from_millis(10));
        assert!(
            t0.elapsed() < Duration::from_secs(10),
            "capture did not stop"
        );
    }
}
