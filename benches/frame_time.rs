//! Frame time of the window without a display: CPU time per frame of layout plus tessellation
//! (what the GPU, or Mesa's software rasteriser, is then handed) at 1600×1000 on a simulated
//! 40-station test. Two scenes: the mode-shape view animating with all 40 measured FRFs overlaid,
//! and the FRF review with all 40 stations in its four linked plots. Each is run with the
//! pixel-column reduction (as the window runs) and, as the peer in the same run, with every
//! sample handed to the plot. Target: median ≤ 4 ms for the first scene.
//!
//! `cargo bench --bench frame_time`

use std::time::{Duration, Instant};

use eframe::egui;
use tapgrid::app::plots::PlotMode;
use tapgrid::app::{Settings, TapgridApp, View};
use tapgrid::sim::Scenario;

fn raw_input(t: f64) -> egui::RawInput {
    egui::RawInput {
        screen_rect: Some(egui::Rect::from_min_size(
            egui::Pos2::ZERO,
            egui::vec2(1600.0, 1000.0),
        )),
        time: Some(t),
        ..Default::default()
    }
}

fn frame(ctx: &egui::Context, app: &mut TapgridApp, t: f64) -> Duration {
    let t0 = Instant::now();
    let out = ctx.run_ui(raw_input(t), |ui| {
        app.logic(ui.ctx());
        app.show(ui);
    });
    if std::env::var_os("TAPGRID_BENCH_NO_TESS").is_none() {
        let prims = ctx.tessellate(out.shapes, out.pixels_per_point);
        std::hint::black_box(prims);
    }
    t0.elapsed()
}

fn scene(path: &std::path::Path, view: View, mode: PlotMode) -> (f64, f64, usize) {
    let overlay_all = std::env::var_os("TAPGRID_BENCH_NO_OVERLAY").is_none();
    let settings = Settings {
        view,
        overlay_all,
        cautions_read: true,
        ..Settings::default()
    };
    let mut app = TapgridApp::new(settings, Some(path.to_path_buf()));
    app.set_plot_mode(mode);
    let ctx = egui::Context::default();
    let mut t = 0.0;
    // Open, analyse and fit (on the worker), then let the layout settle.
    let start = Instant::now();
    loop {
        frame(&ctx, &mut app, t);
        t += 1.0 / 60.0;
        let ready = app.doc.as_ref().is_some_and(|d| d.modal.is_some()) && app.idle();
        if ready {
            break;
        }
        assert!(
            start.elapsed() < Duration::from_secs(300),
            "analysis did not finish"
        );
        std::thread::sleep(Duration::from_millis(5));
    }
    for _ in 0..30 {
        frame(&ctx, &mut app, t);
        t += 1.0 / 60.0;
    }
    let mut times: Vec<f64> = (0..300)
        .map(|_| {
            let d = frame(&ctx, &mut app, t);
            t += 1.0 / 60.0;
            d.as_secs_f64() * 1e3
        })
        .collect();
    assert!(app.ui.playing || view != View::Modes);
    times.sort_by(f64::total_cmp);
    let stations = app.doc.as_ref().map_or(0, |d| d.data.stations.len());
    (
        times[times.len() / 2],
        times[times.len() * 95 / 100],
        stations,
    )
}

fn main() {
    let dir = std::env::temp_dir().join(format!("tapgrid-frame-bench-{}", std::process::id()));
    let mut sc = Scenario::pump_shaft();
    let n = 40;
    let l = sc.shaft.length_m();
    sc.stations_m = (0..n).map(|i| l * i as f64 / (n - 1) as f64).collect();
    sc.write(&dir).expect("simulated 40-station WAV set");
    println!("frame time at 1600×1000, layout + tessellation, median / p95 of 300 frames (ms)");
    for (name, view) in [
        ("mode shapes animating + 40 FRFs overlaid", View::Modes),
        ("FRF review, 40 stations × 4 linked plots", View::Frf),
    ] {
        if std::env::var_os("TAPGRID_BENCH_PROFILE").is_some() {
            // One scene, as the window runs, for a profiler.
            if view == View::Frf {
                let (med, p95, _) = scene(&dir, view, PlotMode::Cached);
                println!("{name}: {med:.2} / {p95:.2}");
            }
            continue;
        }
        let (med, p95, st) = scene(&dir, view, PlotMode::Cached);
        let (med_r, p95_r, _) = scene(&dir, view, PlotMode::Reduced);
        let (med_f, p95_f, _) = scene(&dir, view, PlotMode::Full);
        println!("{name} ({st} stations):");
        println!("  as the window runs (overlays cached as an image): {med:.2} / {p95:.2}");
        println!(
            "  peer: every trace a plot line, min/max per pixel column: {med_r:.2} / {p95_r:.2} ({:.1}× slower)",
            med_r / med
        );
        println!(
            "  peer: every trace a plot line, every sample: {med_f:.2} / {p95_f:.2} ({:.1}× slower)",
            med_f / med
        );
    }
    let _ = std::fs::remove_dir_all(&dir);
}
