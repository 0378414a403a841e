//! The window, driven through its accessibility tree with egui_kittest (no display, no GPU):
//! every view, the station map, a verdict flip, pole picking, the animation and the help.
//! Expected values come from the bundled demo session and the library's own analysis of it.

use std::path::PathBuf;
use std::time::{Duration, Instant};

use eframe::egui;
use egui_kittest::Harness;
use egui_kittest::kittest::{NodeT, Queryable};
use tapgrid::app::{Command, Settings, TapgridApp, View};

fn demo() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft")
}

fn harness() -> Harness<'static, TapgridApp> {
    harness_on(Settings::default(), demo())
}

fn harness_on(settings: Settings, path: PathBuf) -> Harness<'static, TapgridApp> {
    let app = TapgridApp::new(settings, Some(path));
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

/// Frequencies of the modes the window's fit holds.
fn fitted_hz(h: &Harness<'static, TapgridApp>) -> Vec<f64> {
    let d = h.state().doc.as_ref().expect("open");
    d.modal
        .as_ref()
        .expect("fit")
        .modes
        .iter()
        .map(|m| m.frequency_hz)
        .collect()
}

/// The demo opened and saved as a new session in a temporary folder (kept while `TempDir` lives).
fn demo_copy() -> (tempfile::TempDir, PathBuf, Harness<'static, TapgridApp>) {
    let tmp = tempfile::tempdir().expect("temp");
    let dir = tmp.path().join("copy");
    let mut h = open_demo();
    h.state_mut()
        .push(tapgrid::app::Command::SaveAs(dir.clone()));
    (tmp, dir, h)
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

/// The setup view edits a copy and sends it back: typed text reaches the document through the
/// command queue, and a changed station position is analysed again (common practice: an editor
/// never holds the document it edits).
#[test]
fn setup_edits_reach_the_document_through_commands() {
    let mut h = open_demo();
    h.get_by_label("Test setup").click();
    settle(&mut h);
    let before = h.state().doc.as_ref().expect("doc").part.name.clone();
    let field = h.get_by_role_and_label(egui::accesskit::Role::TextInput, "name");
    field.focus();
    field.type_text(" rev B");
    h.run_steps(3);
    let d = h.state().doc.as_ref().expect("doc");
    assert_eq!(d.part.name, format!("{before} rev B"));
    assert!(d.dirty);
    // A moved station is analysed again at its new place.
    let d = h.state().doc.as_ref().expect("doc");
    let mut edit = tapgrid::app::SetupEdit {
        setup: d.setup.clone(),
        part: d.part.clone(),
        labels: d.labels.clone(),
        positions_m: d.data.stations.iter().map(|s| s.position_m).collect(),
        analyse: true,
    };
    edit.positions_m[0] += 0.005;
    let moved = edit.positions_m[0];
    h.state_mut().push(Command::EditSetup(Box::new(edit)));
    settle(&mut h);
    let d = h.state().doc.as_ref().expect("doc");
    assert_eq!(d.data.stations[0].position_m, moved);
    let a = d.analysis.as_ref().expect("analysis");
    assert_eq!(a.stations[0].position_m, moved);
}

/// The path dialog lists the folder typed, names sessions and WAV sets, and a click on one
/// fills the path (common practice: a chooser that does not need a desktop portal).
#[test]
fn the_path_dialog_browses_folders_and_names_sessions() {
    let mut h = open_demo();
    let tmp = tempfile::tempdir().expect("temp");
    let session = tmp.path().join("rotor-a");
    std::fs::create_dir_all(&session).expect("dir");
    std::fs::write(session.join("session.json"), "{}").expect("write");
    std::fs::create_dir_all(tmp.path().join("plain")).expect("dir");
    h.state_mut()
        .push(Command::AskPath(tapgrid::app::PathPurpose::Open));
    h.run_steps(2);
    let field = h.get_by_role(egui::accesskit::Role::TextInput);
    field.focus();
    h.key_press_modifiers(egui::Modifiers::COMMAND, egui::Key::A);
    field.type_text(&format!("{}/", tmp.path().display()));
    h.run_steps(3);
    h.get_by_label_contains("plain/");
    h.get_by_label_contains("rotor-a/   — tapgrid session")
        .click();
    h.run_steps(2);
    let text = h
        .get_by_role(egui::accesskit::Role::TextInput)
        .value()
        .unwrap_or_default();
    assert_eq!(PathBuf::from(text), session);
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
    assert!(h.state().ui.show_help);
    h.get_by_label("Keyboard");
    h.get_by_label_contains("locked out");
    h.get_by_label("Close help").click_accesskit();
    h.run_steps(2);
    assert!(!h.state().ui.show_help);
    // F1 opens it too, and arrow keys walk the stations.
    h.key_press(egui::Key::F1);
    h.run_steps(2);
    assert!(h.state().ui.show_help);
    let first = h.state().ui.current_station;
    h.key_press(egui::Key::ArrowRight);
    h.step();
    assert_eq!(h.state().ui.current_station, first.map(|s| s + 1));
}

#[test]
fn a_station_cell_click_then_a_verdict_flip_changes_the_frf() {
    let manifest = std::fs::read(demo().join("session.json")).expect("demo manifest");
    let mut h = open_demo();
    h.get_by_label("Station map").click();
    h.step();
    h.get_by_label("Station 3").click();
    settle(&mut h);
    assert_eq!(h.state().ui.current_station, Some(3));

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
    h.get_by_label("REJECTED by you");
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
    let all = fitted_hz(&h);
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
    let four = fitted_hz(&h);
    assert_eq!(four.len(), 4);
    assert!(four.iter().all(|f| (f - f2).abs() > 0.01 * f2));
    // And take it back.
    h.get_by_label(&format!("take {hz}")).click();
    settle(&mut h);
    let back = fitted_hz(&h);
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
    assert!(h.state().ui.playing);
    let p0 = h.state().ui.phase_rad;
    for _ in 0..10 {
        h.step();
    }
    assert!(
        h.state().ui.phase_rad != p0,
        "the shape moves while playing"
    );
    h.get_by_label("Pause").click();
    h.step();
    assert!(!h.state().ui.playing);
    let p1 = h.state().ui.phase_rad;
    for _ in 0..10 {
        h.step();
    }
    assert_eq!(h.state().ui.phase_rad, p1, "paused means still");
    h.key_press(egui::Key::Space);
    h.step();
    assert!(h.state().ui.playing);
    // Choosing another mode animates that one.
    h.get_by_label("3").click();
    h.step();
    assert_eq!(h.state().ui.selected_mode, 2);
}

#[test]
fn save_as_makes_a_session_that_keeps_later_verdicts() {
    let (_tmp, dir, mut h) = demo_copy();
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
    h.state_mut().ui.capture_folder = session.display().to_string();
    h.run_steps(2);
    // A new session asks for the part's name before it starts (common practice: every record
    // names what was tested).
    h.get_by_label("Name the part to start");
    assert!(
        h.get_by_label("Start capture")
            .accesskit_node()
            .is_disabled()
    );
    h.state_mut().ui.capture_part = "spare rotor 2".into();
    h.run_steps(2);
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
    assert_eq!(s.manifest.part.name, "spare rotor 2");
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

/// The truth the demo was simulated from (tapgrid's simulator, Timoshenko modal superposition).
fn truth_frequencies() -> Vec<f64> {
    let t: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(demo().join("simulation-truth.json")).expect("truth file"),
    )
    .expect("truth json");
    t["modes"]
        .as_array()
        .expect("modes")
        .iter()
        .map(|m| m["frequency_hz"].as_f64().expect("frequency"))
        .collect()
}

#[test]
fn shaft_model_view_pairs_every_demo_mode_and_animates_both() {
    let mut h = open_demo();
    h.get_by_label("Shaft model").click();
    settle(&mut h);
    h.get_by_label("Test against model");
    h.get_by_label("MAC, test (rows) × model (columns)");
    h.get_by_label("Shaft as tested");
    h.get_by_label_contains("to scale");
    let d = h.state().doc.as_ref().expect("open");
    let r = d.study_result.clone().expect("the model was solved");
    let c = r.correlation.as_ref().expect("correlated with the fit");
    // Issue 6's acceptance: every mode paired, MAC > 0.99, difference < 0.5 %; the model modes
    // also match the frequencies the demo was simulated from within 0.1 %.
    let n_test = d.modal.as_ref().expect("fitted").modes.len();
    assert_eq!(c.pairs.len(), n_test);
    let truth = truth_frequencies();
    for p in &c.pairs {
        assert!(p.mac > 0.99, "{p:?}");
        assert!(p.difference_pct.abs() < 0.5, "{p:?}");
        let t = truth[p.model];
        assert!(((p.model_hz - t) / t).abs() < 1e-3, "{} vs {t}", p.model_hz);
    }
    // The model mode follows the selected test mode; a model-mode button picks one directly.
    assert_eq!(h.state().ui.selected_model_mode, None);
    let label = format!("4: {:.1} Hz", r.tested.modes[3].frequency_hz);
    h.get_by_label(&label).click();
    h.run_steps(2);
    assert_eq!(h.state().ui.selected_model_mode, Some(3));
    h.get_by_label_contains("Model mode 4 —");
    // Both shapes move while playing.
    let p0 = h.state().ui.phase_rad;
    for _ in 0..10 {
        h.step();
    }
    assert!(h.state().ui.phase_rad != p0);
}

#[test]
fn speed_margins_view_shows_the_map_bands_and_cautions() {
    let mut h = open_demo();
    h.get_by_label("Speed margins").click();
    settle(&mut h);
    h.get_by_label("Critical speeds against the stiffness of the bearings in service");
    h.get_by_label_contains("no gyroscopic effect");
    h.get_by_label_contains("Advisory only. API RP 684 rule (verify against your edition");
    h.get_by_label_contains("Separation margins, operating range 2900–3000 rpm");
    let d = h.state().doc.as_ref().expect("open");
    let r = d.study_result.clone().expect("solved");
    let map = r.map.as_ref().expect("a stiffness map");
    assert!(map.bearings);
    // Nearly rigid bearings at the journals: the first critical approaches the pinned-pinned
    // value of the 600 mm × 45 mm middle span plus the journals, never above it; nearly free:
    // far below (rigid-body bounce on soft springs).
    let first = &map.frequencies_hz[0];
    assert!(first[0] < 0.1 * first[first.len() - 1]);
    // Every fitted mode is checked at 1× and 2×, plus the model's criticals.
    let n_test = d.modal.as_ref().expect("fitted").modes.len();
    let measured = r
        .margins
        .iter()
        .filter(|l| l.source == tapgrid::model::study::ResonanceSource::Measured)
        .count();
    assert_eq!(measured, 2 * n_test);
}

#[test]
fn a_wav_set_without_model_gets_one_from_its_stations() {
    let set =
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/pump-shaft-roving-sensor");
    let mut h = harness_on(
        Settings {
            cautions_read: true,
            ..Settings::default()
        },
        set,
    );
    settle(&mut h);
    h.get_by_label("Shaft model").click();
    h.run_steps(2);
    h.get_by_label("This test has no shaft model yet.");
    h.get_by_label("Start from the stations").click();
    settle(&mut h);
    let d = h.state().doc.as_ref().expect("open");
    let st = d.study.as_ref().expect("a first model");
    let last = d
        .data
        .stations
        .iter()
        .map(|s| s.position_m)
        .fold(0.0f64, f64::max);
    assert_eq!(st.shaft.sections.len(), 1);
    assert!((st.shaft.length_m() - last).abs() < 1e-12);
    assert!(d.study_result.is_some(), "{:?}", d.study_error);
    // A model file that is not JSON is refused with its name; the model stays.
    let tmp = tempfile::tempdir().expect("temp");
    let bad = tmp.path().join("shaft.json");
    std::fs::write(&bad, "not json").expect("write");
    h.state_mut()
        .push(tapgrid::app::Command::LoadModel(bad.clone()));
    // Disk work runs on the window's I/O thread: wait for it.
    settle(&mut h);
    let m = h.state().messages.last().expect("a message").clone();
    assert!(m.error && m.text.contains("shaft.json"), "{m:?}");
    // Written out and read back, the shaft is the same.
    let out = tmp.path().join("out.json");
    h.state_mut()
        .push(tapgrid::app::Command::WriteModel(out.clone()));
    // Disk work runs on the window's I/O thread: wait for it.
    settle(&mut h);
    let back = tapgrid::model::run::read_shaft(&out).expect("written model reads back");
    assert_eq!(
        &back,
        &h.state()
            .doc
            .as_ref()
            .unwrap()
            .study
            .as_ref()
            .unwrap()
            .shaft
    );
}

#[test]
fn save_as_keeps_the_shaft_model() {
    let (_tmp, dir, mut h) = demo_copy();
    settle(&mut h);
    let bundled = tapgrid::session::Session::open(&demo()).expect("demo");
    let copy = tapgrid::session::Session::open(&dir).expect("copy");
    assert!(copy.manifest.model.is_some());
    assert_eq!(copy.manifest.model, bundled.manifest.model);
}

#[test]
fn the_file_menu_writes_the_report_of_what_the_window_shows() {
    let tmp = tempfile::tempdir().expect("temp");
    let page = tmp.path().join("demo-report.html");
    let mut h = open_demo();
    h.get_by_label("Shaft model").click();
    settle(&mut h);
    h.get_by_label("File").click();
    h.run_steps(2);
    h.get_by_label("Write report…").click_accesskit();
    // The click queues the request, the next frame opens the dialog, the one after draws it.
    h.run_steps(4);
    // The dialog asks where, offering a file beside the working folder for the read-only demo.
    h.get_by_label("Write the test report (HTML file, or PDF when it ends in .pdf)");
    h.get_by_label("Cancel").click_accesskit();
    h.run_steps(4);
    assert!(
        h.query_by_label("Write the test report (HTML file, or PDF when it ends in .pdf)")
            .is_none()
    );
    h.state_mut()
        .push(tapgrid::app::Command::WriteReport(page.clone()));
    // Disk work runs on the window's I/O thread: wait for it.
    settle(&mut h);
    let html = std::fs::read_to_string(&page).expect("the report was written");
    let d = h.state().doc.as_ref().expect("open");
    for m in &d.modal.as_ref().expect("fitted").modes {
        assert!(html.contains(&format!("<td>{:.2}</td>", m.frequency_hz)));
    }
    assert!(html.contains("<h2>Running-speed margins</h2>"));
    assert!(html.contains("locked out"));
    h.get_by_label_contains("wrote the report to");
    // A name ending in .pdf writes the PDF.
    let pdf = tmp.path().join("demo-report.pdf");
    h.state_mut()
        .push(tapgrid::app::Command::WriteReport(pdf.clone()));
    settle(&mut h);
    let bytes = std::fs::read(&pdf).expect("the PDF was written");
    assert!(bytes.starts_with(b"%PDF-"));
    assert!(String::from_utf8_lossy(&bytes).contains("/FlateDecode"));
}

#[test]
fn a_pole_choice_is_saved_with_the_session_and_honoured_on_reopening() {
    let (tmp, dir, mut h) = demo_copy();
    settle(&mut h);
    let all = fitted_hz(&h);
    assert_eq!(all.len(), 5);
    // Drop the third mode's pole column.
    h.get_by_label("Pole picking").click();
    settle(&mut h);
    let column = h
        .get_by_label_contains(&format!("drop {:.0}", all[2].floor()))
        .accesskit_node()
        .label()
        .expect("a labelled button");
    h.get_by_label(&column).click();
    settle(&mut h);
    let s = tapgrid::session::Session::open(&dir).expect("the copy opens");
    let fit = s.manifest.fit.expect("the choice was saved");
    match &fit.selection {
        tapgrid::modal::Selection::Near(f) => assert_eq!(f.len(), 4),
        other => panic!("saved {other:?}"),
    }
    // Reopened, the window shows the same four modes as the person's choice.
    let mut h2 = harness_on(
        Settings {
            cautions_read: true,
            ..Settings::default()
        },
        dir.clone(),
    );
    settle(&mut h2);
    let four = fitted_hz(&h2);
    assert_eq!(four.len(), 4);
    assert!(four.iter().all(|f| (f - all[2]).abs() > 0.01 * all[2]));
    for f in &four {
        assert!(
            all.iter().any(|a| (a - f).abs() < 1e-6 * a),
            "{f} is one of {all:?}"
        );
    }
    h2.get_by_label("Pole picking").click();
    settle(&mut h2);
    h2.get_by_label("modes chosen by you");
    // The command line honours it too, unless told otherwise.
    let out = tmp.path().join("out");
    let modes_written = |extra: &[&str]| -> usize {
        assert_cmd::Command::cargo_bin("tapgrid")
            .unwrap()
            .arg("analyze")
            .arg(&dir)
            .args(extra)
            .arg("--out")
            .arg(&out)
            .assert()
            .success();
        let r: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(out.join("result.json")).unwrap())
                .unwrap();
        r["modes"].as_array().unwrap().len()
    };
    assert_eq!(modes_written(&[]), 4);
    assert_eq!(modes_written(&["--modes", "auto"]), 5);
}

/// One writer per session: a second program holding the session makes the window open it
/// read-only and say who has it; the window's own copy (after Save as) holds the lock itself,
/// so a `verdict` command meanwhile would wait (here: the lock is seen held).
#[test]
fn a_session_held_by_another_program_opens_read_only_and_names_the_holder() {
    let (_tmp, dir, mut h) = demo_copy();
    settle(&mut h);
    // The window holds its copy.
    let holder = tapgrid::session::lock::SessionLock::holder(&dir).expect("the window holds it");
    assert!(holder.contains("tapgrid window"), "{holder}");
    drop(h);
    // Another program holds it: a new window opens it read-only and names that program.
    let lock = tapgrid::session::lock::SessionLock::acquire(
        &dir,
        "verdict",
        std::time::Duration::from_secs(5),
    )
    .expect("free once the window closed");
    let mut h = harness_on(Settings::default(), dir.clone());
    settle(&mut h);
    let d = h.state().doc.as_ref().expect("open");
    assert!(d.read_only);
    assert!(d.locked_by.as_deref().unwrap_or("").contains("verdict"));
    h.get_by_label_contains("in use by");
    drop(lock);
}

/// Keys 1–9 open the tabs in the order they are drawn; a station whose every hit is kept —
/// some by a person — is a good station; a hit a person rejected says so.
#[test]
fn keys_follow_the_tabs_and_verdicts_by_a_person_read_as_such() {
    let mut h = open_demo();
    for (k, v) in [
        (egui::Key::Num1, View::ALL[0]),
        (egui::Key::Num5, View::ALL[4]),
        (egui::Key::Num9, View::ALL[8]),
    ] {
        h.key_press(k);
        h.run_steps(2);
        assert_eq!(h.state().settings.view, v);
    }
    // Station 4 of the demo holds a double hit; keep it by hand: every hit kept, a good station.
    let st = h
        .state()
        .doc
        .as_ref()
        .unwrap()
        .data
        .stations
        .iter()
        .map(|s| s.station)
        .find(|&s| {
            let d = h.state().doc.as_ref().unwrap();
            d.station_analysis(s)
                .is_some_and(|a| a.result.hits.iter().any(|x| !x.accepted))
        })
        .expect("the demo has a rejected hit");
    let rejected: Vec<usize> = h
        .state()
        .doc
        .as_ref()
        .unwrap()
        .station_analysis(st)
        .unwrap()
        .result
        .hits
        .iter()
        .filter(|x| !x.accepted)
        .map(|x| x.index)
        .collect();
    for hit in &rejected {
        h.state_mut().push(tapgrid::app::Command::SetVerdict {
            station: st,
            hit: *hit,
            accept: Some(true),
        });
    }
    settle(&mut h);
    let d = h.state().doc.as_ref().unwrap();
    let sa = d.station_analysis(st).unwrap();
    assert!(sa.result.hits.iter().all(|x| x.accepted));
    // The hit view of that station says who decided.
    h.state_mut().ui.current_station = Some(st);
    h.state_mut().ui.current_hit = rejected[0];
    h.get_by_label("Hit check").click();
    settle(&mut h);
    h.get_by_label("KEPT by you");
}

/// A roving-accelerometer WAV set opened in the default (hammer) layout: the station map says why
/// every hit reads as struck twice and what to change.
#[test]
fn a_roving_sensor_set_in_the_hammer_layout_gets_a_layout_hint() {
    let set = std::path::Path::new(env!("CARGO_MANIFEST_DIR"))
        .join("sample-sessions/pump-shaft-roving-sensor");
    let mut h = harness_on(
        Settings {
            cautions_read: true,
            ..Settings::default()
        },
        set,
    );
    settle(&mut h);
    h.get_by_label("Station map").click();
    settle(&mut h);
    h.get_by_label_contains("analyse it in the sensor layout");
    // One click analyses it as what it is: hits kept, no hint.
    h.get_by_label("Analyse as a roving-accelerometer test")
        .click();
    settle(&mut h);
    let d = h.state().doc.as_ref().expect("open");
    assert_eq!(d.setup.layout, tapgrid::setup::Layout::Sensor);
    let a = d.analysis.as_ref().expect("analysed");
    let kept = a
        .stations
        .iter()
        .flat_map(|s| s.result.hits.iter())
        .filter(|x| x.accepted)
        .count();
    assert!(kept >= 12, "{kept} hits kept");
    assert!(
        h.query_by_label_contains("analyse it in the sensor layout")
            .is_none()
    );
}

/// The capture view's overload lamps are dark before anything was captured.
#[test]
fn no_overload_is_shown_before_a_capture() {
    let mut h = open_demo();
    h.get_by_label("Live capture").click();
    settle(&mut h);
    assert!(h.query_by_label("OVERLOAD").is_none());
}

#[test]
fn the_station_map_shows_the_selected_stations_frf_and_sound_cues_start_off() {
    // The map's detail: the selected station's hits and a small FRF with its coherence, and
    // the buttons that lead to the full views.
    let mut h = open_demo();
    h.get_by_label("Station map").click();
    settle(&mut h);
    h.get_by_label("Station 5").click();
    settle(&mut h);
    h.get_by_label("Station 5: all hits accepted");
    h.get_by_label("hit 3: kept");
    h.get_by_label("Review its FRF").click();
    settle(&mut h);
    assert_eq!(h.state().settings.view, View::Frf);
    // Sound cues are opt-in: a test run (or a quiet lab) never hears them unless asked.
    assert!(!Settings::default().sound_cues);
    h.get_by_label("Live capture").click();
    settle(&mut h);
    let cue = h.get_by_label("a short tone for each kept or rejected hit");
    assert!(!cue.accesskit_node().is_disabled());
    assert!(!h.state().settings.sound_cues);
}

#[test]
fn the_rotor_view_reads_a_rotor_file_and_shows_its_critical_speeds_and_threshold() {
    // The tested shaft on the example rotor file's plain bearings with its unbalance: the view
    // solves on its own thread and lists the critical speeds, the stability threshold and the
    // response peaks (figures as `tapgrid rotor` gives them for the same rotor).
    let mut h = open_demo();
    h.get_by_label("Rotor at speed").click();
    settle(&mut h);
    assert_eq!(h.state().settings.view, View::Rotor);
    h.get_by_label_contains("undamped isotropic");
    let file =
        PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("sample-sessions/rotors/pump-rotor.json");
    h.state_mut().push(Command::LoadRotor(file));
    // Widen the sweep past the first critical speed.
    h.state_mut().ui.rotor.options = Some(tapgrid::rotor::run::AtSpeedOptions {
        speeds_rpm: [500.0, 14_000.0],
        count: 41,
        modes: 4,
        elements: 40,
    });
    settle(&mut h);
    let study = h
        .state()
        .doc
        .as_ref()
        .and_then(|d| d.study.as_ref())
        .expect("study");
    assert!(
        study.rotor.is_some(),
        "the service rotor is kept in the study"
    );
    h.get_by_label_contains("Unstable from");
    h.get_by_label("Critical speeds");
    h.get_by_label("Unbalance response peaks");
    h.get_by_label("Bearing coefficients").click();
    h.step();
    assert!(h.state().ui.rotor.show_bearings);
    // Back to the springs.
    h.get_by_label("Use the springs").click();
    settle(&mut h);
    assert!(
        h.state()
            .doc
            .as_ref()
            .and_then(|d| d.study.as_ref())
            .is_some_and(|s| s.rotor.is_none())
    );
}

#[test]
fn the_run_view_tracks_a_recording_and_names_its_critical_speed() {
    // A simulated coast-down through the Jeffcott rotor of rotor-notes §D1 (50.33 Hz): the
    // view tracks it on its own thread and lists the critical speed near 3020 rpm.
    let dir = tempfile::tempdir().expect("temp");
    let sc = tapgrid::sim::run::RunScenario {
        duration_s: 40.0,
        sample_rate_hz: 16_000,
        ..Default::default()
    };
    sc.write(dir.path()).expect("simulated run");
    let mut h = open_demo();
    h.state_mut()
        .push(Command::LoadRun(dir.path().join("run.wav")));
    settle(&mut h);
    assert_eq!(h.state().settings.view, View::Run);
    h.get_by_label("Critical speeds");
    h.get_by_label_contains("rpm (1×): AF");
    h.get_by_label_contains("revolutions,");
}

/// Recording a run from the window (the synthetic coast-down as the input): the speed is read
/// live, Stop saves it into the open session's runs/ and its manifest (common practice: a
/// recording is on disk and listed before anything is shown from it), and the run is tracked.
#[test]
fn a_run_recorded_in_the_window_is_saved_into_the_session_and_tracked() {
    let (_tmp, dir, mut h) = demo_copy();
    settle(&mut h);
    h.state_mut().settings.view = View::Run;
    h.run_steps(2);
    h.get_by_role_and_label(egui::accesskit::Role::Button, "Record")
        .click();
    let t0 = Instant::now();
    loop {
        h.step();
        let speed = h
            .state()
            .recording
            .progress
            .and_then(|p| p.speed_rpm.map(|s| (s, p.seconds)));
        if let Some((s, secs)) = speed
            && secs > 2.5
        {
            // The generator starts at 3600 rpm and slows by about 4 % a second.
            assert!((3000.0..3700.0).contains(&s), "speed {s}");
            break;
        }
        assert!(t0.elapsed() < Duration::from_secs(30), "no speed read");
        std::thread::sleep(Duration::from_millis(20));
    }
    h.get_by_label_contains("Stop and save").click();
    let t0 = Instant::now();
    while h.state().recording.active() {
        h.step();
        std::thread::sleep(Duration::from_millis(10));
        assert!(t0.elapsed() < Duration::from_secs(30), "not saved");
    }
    settle(&mut h);
    let path = h.state().ui.run.path.clone().expect("the run is shown");
    assert!(path.starts_with(dir.join("runs")), "{}", path.display());
    assert!(path.is_file());
    let s = tapgrid::session::Session::open(&dir).expect("session");
    assert_eq!(s.manifest.runs.len(), 1);
    assert!(dir.join(&s.manifest.runs[0].file) == path);
    h.get_by_label_contains("revolutions,");
    h.get_by_label("Runs of this session");
}

/// The setup view plans the test from the shaft model: the modes in the band (the demo's shaft
/// model puts three of them near the simulated part's 291, 717 and 1268 Hz), the station counts
/// and the cautions; a smaller station count is warned about.
#[test]
fn the_setup_view_shows_the_test_plan() {
    let mut h = open_demo();
    h.get_by_label("Test setup").click();
    settle(&mut h);
    h.get_by_label("Test plan");
    h.get_by_label_contains("Modes in the band: 291, 717, 1268");
    h.get_by_label_contains("keep the modes apart");
    h.get_by_label_contains("locked out");
    h.state_mut().ui.plan.stations = Some(4);
    settle(&mut h);
    h.get_by_label_contains("4 stations cannot tell the in-band modes apart");
}

/// The modes view checks the fitted test's physics on its own thread: the demo's reference
/// station reads as a driving point and its mass line agrees with the shaft model's.
#[test]
fn the_modes_view_shows_the_physics_checks() {
    let mut h = open_demo();
    h.state_mut().settings.view = View::Modes;
    settle(&mut h);
    h.get_by_label("Physics checks");
    h.get_by_label_contains("reads as a driving point");
    h.get_by_label_contains("sensitivities and the part's mass agree");
}

/// Two tests: the demo against a simulated repair of it (the middle section turned down) —
/// the other test is analysed on its own thread with the open test's setup (a WAV set has
/// none), every mode pairs and each is lower after the repair.
#[test]
fn the_two_tests_view_pairs_the_modes_of_a_repaired_shaft() {
    let dir = tempfile::tempdir().expect("temp");
    let mut sc = tapgrid::sim::Scenario::default();
    sc.shaft.sections[1].outer_diameter_m = 0.044;
    sc.write(dir.path()).expect("simulated");
    let mut h = open_demo();
    h.state_mut()
        .push(Command::LoadCompare(dir.path().to_path_buf()));
    settle(&mut h);
    assert_eq!(h.state().settings.view, View::Compare);
    h.get_by_label_contains("The open test (first)");
    h.get_by_label("MAC (rows: first test, columns: second)");
    // The first mode falls by 3.36 % (the simulated truth, within the fit's scatter).
    h.get_by_label_contains("-3.3");
}

/// Report details typed in Test setup reach the document and are kept in the session file at
/// once (no analysis follows such an edit).
#[test]
fn report_details_typed_in_the_setup_view_are_kept_in_the_session() {
    let (_tmp, dir, mut h) = demo_copy();
    settle(&mut h);
    h.state_mut().settings.view = View::Setup;
    h.run_steps(2);
    h.get_by_label("Report details").click();
    h.run_steps(2);
    let field = h.get_by_role_and_label(egui::accesskit::Role::TextInput, "tested by");
    field.focus();
    field.type_text("A. Tester");
    h.run_steps(3);
    settle(&mut h);
    assert_eq!(
        h.state().doc.as_ref().expect("doc").report.operator,
        "A. Tester"
    );
    let s = tapgrid::session::Session::open(&dir).expect("session");
    assert_eq!(s.manifest.report.operator, "A. Tester");
}
