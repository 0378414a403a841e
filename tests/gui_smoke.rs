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

#[test]
fn the_window_draws_under_xvfb() {
    let display = format!(":{}", 90 + std::process::id() % 9);
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
    let app = Command::new(env!("CARGO_BIN_EXE_tapgrid"))
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
    let shot = dir.join("smoke.png");
    let t0 = Instant::now();
    let mut colours = 0;
    while t0.elapsed() < Duration::from_secs(60) {
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
            // An empty X screen is one colour; the window with text and a drawn station map
            // has hundreds (anti-aliased text alone gives dozens).
            if colours > 200 {
                break;
            }
        }
    }
    assert!(
        colours > 200,
        "the window drew too little: {colours} colours in {}",
        shot.display()
    );
}
