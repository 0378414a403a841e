//! The bundled demo session: found beside the program's sources or working folder, or made by the
//! simulator on first use so an installed binary has it too.

use std::path::{Path, PathBuf};

use super::Scenario;
use crate::acquire::InputError;
use crate::acquire::wavset::WavSet;
use crate::analysis::{self, Dataset};
use crate::session::{Manifest, Session};

/// The demo scenario, as bundled in `assets/`.
pub const SCENARIO_JSON: &str = include_str!("../../assets/demo-scenario.json");
/// The demo session's manifest (setup and part), as bundled in `sample-sessions/`.
const MANIFEST_JSON: &str = include_str!("../../sample-sessions/pump-shaft/session.json");

/// Folder name of the demo session.
pub const DEMO_NAME: &str = "pump-shaft";

/// Finds the bundled demo session, or simulates it into `fallback_root/pump-shaft` (reused on
/// later calls). The simulator is deterministic, so the made session equals the bundled one.
pub fn demo_session(fallback_root: &Path) -> Result<PathBuf, InputError> {
    let rel = Path::new("sample-sessions").join(DEMO_NAME);
    let bundled = [
        std::env::current_dir().ok().map(|d| d.join(&rel)),
        Some(Path::new(env!("CARGO_MANIFEST_DIR")).join(&rel)),
    ];
    if let Some(p) = bundled
        .into_iter()
        .flatten()
        .find(|p| Session::is_session(p))
    {
        return Ok(p);
    }
    let dir = fallback_root.join(DEMO_NAME);
    if Session::is_session(&dir) && Session::open(&dir).is_ok() {
        return Ok(dir);
    }
    make_demo(&dir)?;
    Ok(dir)
}

/// Where a made demo lives by default: the user's data folder, else the temp folder.
pub fn default_root() -> PathBuf {
    std::env::var_os("XDG_DATA_HOME")
        .map(PathBuf::from)
        .or_else(|| std::env::var_os("HOME").map(|h| PathBuf::from(h).join(".local/share")))
        .map(|d| d.join("tapgrid"))
        .unwrap_or_else(|| std::env::temp_dir().join("tapgrid"))
}

/// Simulates the demo test and imports it as a session at `dir`.
pub fn make_demo(dir: &Path) -> Result<(), InputError> {
    let sc: Scenario = serde_json::from_str(SCENARIO_JSON)
        .map_err(|e| InputError::new(dir, format!("bundled demo scenario is invalid: {e}")))?;
    let m: Manifest = serde_json::from_str(MANIFEST_JSON)
        .map_err(|e| InputError::new(dir, format!("bundled demo manifest is invalid: {e}")))?;
    let set_dir = dir.with_extension("wavset-tmp");
    let _ = std::fs::remove_dir_all(&set_dir);
    sc.write(&set_dir)?;
    let set = WavSet::scan(&set_dir, m.setup.spacing_m)?;
    let result = analysis::run(&Dataset::from_wavset(&set), &m.setup)?;
    let _ = std::fs::remove_dir_all(dir);
    let mut s = Session::import_wavset(&set, dir, m.setup.clone(), m.part.clone())?;
    s.manifest.hits = crate::session::saved_hits(&result);
    s.manifest.model = m.model.clone();
    s.save()?;
    let _ = std::fs::remove_dir_all(&set_dir);
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The simulator is deterministic: a made demo holds the same recordings as the bundled one.
    #[test]
    fn made_demo_equals_bundled() {
        let tmp = std::env::temp_dir().join(format!("tapgrid-demo-test-{}", std::process::id()));
        let dir = tmp.join(DEMO_NAME);
        make_demo(&dir).expect("demo is made");
        let made = Session::open(&dir).expect("made demo opens");
        let bundled_dir = Path::new(env!("CARGO_MANIFEST_DIR"))
            .join("sample-sessions")
            .join(DEMO_NAME);
        let bundled = Session::open(&bundled_dir).expect("bundled demo opens");
        assert_eq!(
            made.manifest.recordings.len(),
            bundled.manifest.recordings.len()
        );
        for (a, b) in made
            .manifest
            .recordings
            .iter()
            .zip(&bundled.manifest.recordings)
        {
            let ra = std::fs::read(dir.join(&a.file)).expect("made raw");
            let rb = std::fs::read(bundled_dir.join(&b.file)).expect("bundled raw");
            assert!(
                ra == rb,
                "station {} differs from the bundled recording",
                a.station
            );
        }
        assert_eq!(made.manifest.hits, bundled.manifest.hits);
        assert_eq!(made.manifest.model, bundled.manifest.model);
        assert!(
            made.manifest.model.is_some(),
            "the demo carries its shaft model"
        );
        let _ = std::fs::remove_dir_all(&tmp);
    }
}
