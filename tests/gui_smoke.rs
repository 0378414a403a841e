//! Starts the real binary under Xvfb (software OpenGL, no GPU), waits for its first frames and
//! checks from a screenshot that the window drew content. Needs `Xvfb` and ImageMagick's
//! `import`, which the README's test command installs; the screenshot is left in
//! `target/screenshots/` for a person to look at.

use std::path::PathBuf;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

struct Kill(std::process::Child);
impl Drop for Kill {
    fn drop(&mut self) {
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// Distinct colours in a PNG, by ImageMagick (`%k`).
fn unique_colours(png: &std::path::Path) -> usize {
    let out = Command::new("convert")
        .arg(png)
        .args(["-format", "%k", "info:"])
        .output()
        .expect("ImageMagick convert runs");
    String::from_utf8_lossy(&out.stdout)
        .trim()
        .parse()
        .unwrap_or(0)
}

/// Runs the binary on its own Xvfb display with `args`, optionally past the first-start
/// cautions, and returns the distinct colours of a screenshot saved as `target/screenshots/NAME`
/// once it has `enough` of them (or after 90 s).
fn shoot(args: &[&str], name: &str, cautions_read: bool, display_no: u32, enough: usize) -> usize {
    let display = format!(":{display_no}");
    let xvfb = Command::new("Xvfb")
        .args([
            display.as_str(),
            "-screen",
            "0",
            "1600x1000x24",
            "-nolisten",
            "tcp",
        ])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("Xvfb is installed (scripts/setup-system.sh installs it)");
    let _xvfb = Kill(xvfb);
    std::thread::sleep(Duration::from_millis(800));
    let home = tempfile::tempdir().expect("temp home");
    if cautions_read {
        // eframe's own storage file: the persisted settings with the cautions acknowledged.
        let store = home.path().join("data/tapgrid");
        std::fs::create_dir_all(&store).expect("storage folder");
        std::fs::write(
            store.join("app.ron"),
            "{\"tapgrid-settings\": \"(cautions_read:true)\"}",
        )
        .expect("settings");
    }
    let app = Command::new(env!("CARGO_BIN_EXE_tapgrid"))
        .args(args)
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .env("DISPLAY", &display)
        .env_remove("WAYLAND_DISPLAY")
        .env("HOME", home.path())
        .env("XDG_DATA_HOME", home.path().join("data"))
        .env("XDG_CONFIG_HOME", home.path().join("config"))
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("the binary starts");
    let mut app = Kill(app);
    let dir = PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target/screenshots");
    std::fs::create_dir_all(&dir).expect("screenshot folder");
    let shot = dir.join(name);
    let t0 = Instant::now();
    let mut colours = 0;
    while t0.elapsed() < Duration::from_secs(90) {
        std::thread::sleep(Duration::from_secs(2));
        if let Ok(Some(status)) = app.0.try_wait() {
            panic!("tapgrid exited early with {status}");
        }
        let ok = Command::new("import")
            .args(["-display", display.as_str(), "-window", "root"])
            .arg(&shot)
            .status()
            .is_ok_and(|s| s.success());
        if ok {
            colours = unique_colours(&shot);
            // An empty X screen is one colour; the window with text and drawn plots has hundreds
            // (anti-aliased text alone gives dozens).
            if colours > enough {
                break;
            }
        }
    }
    colours
}

#[test]
fn the_window_draws_under_xvfb() {
    let colours = shoot(&[], "smoke.png", false, 90 + std::process::id() % 5, 200);
    assert!(
        colours > 200,
        "the window drew too little: {colours} colours in target/screenshots/smoke.png"
    );
}

/// The shaft model and speed margin views, opened directly, draw their plots and drawing: a
/// view still waiting for its model shows about 1000 colours, a drawn one over 3000 (measured).
#[test]
fn the_model_views_draw_under_xvfb() {
    for (k, view) in ["model", "margins"].into_iter().enumerate() {
        let name = format!("{view}.png");
        let colours = shoot(
            &["--view", view],
            &name,
            true,
            95 + k as u32 + 2 * (std::process::id() % 2),
            2000,
        );
        assert!(
            colours > 2000,
            "the {view} view drew too little: {colours} colours in target/screenshots/{name}"
        );
    }
}
