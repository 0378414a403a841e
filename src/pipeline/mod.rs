//! Open, analyse, fit, evaluate: the one path from a test on disk to its results, shared by the
//! command line, the window's worker and the report, so that they cannot disagree on what a
//! test's setup is, which band it covered or how its margins are checked.

pub mod checks;
pub mod compare;
pub mod run_model;

use std::path::Path;

use crate::acquire::InputError;
use crate::acquire::wavset::WavSet;
use crate::analysis::{self, Analysis, Dataset};
use crate::modal::{FrfSet, ModalResult, ModalSettings};
use crate::model::study::{Study, StudyResult, TestModes, evaluate};
use crate::session::Session;
use crate::setup::Setup;

/// A test opened for analysis: its recordings, its setup and modal settings (a session's own,
/// or the defaults for a WAV set), and the session when it is one.
#[derive(Debug, Clone)]
pub struct OpenedTest {
    /// Every station's recording.
    pub data: Dataset,
    /// The session's setup, or the default one.
    pub setup: Setup,
    /// The session's modal settings, or the default ones.
    pub fit: ModalSettings,
    /// The session, when the path is one.
    pub session: Option<Session>,
}

/// Opens a path that is either a session folder or a WAV set folder (`spacing_m` places the
/// stations of a WAV set without positions).
pub fn open_dataset(path: &Path, spacing_m: f64) -> Result<(Dataset, Option<Session>), InputError> {
    if Session::is_session(path) {
        let s = Session::open(path)?;
        Ok((s.dataset(), Some(s)))
    } else if path.is_dir() {
        Ok((Dataset::from_wavset(&WavSet::scan(path, spacing_m)?), None))
    } else {
        Err(InputError::new(
            path,
            "is not a folder (expected a WAV set or a session folder)",
        ))
    }
}

/// Opens a test with its own setup and modal settings; `edit` then changes the setup (the
/// command line's options, which override a session's). The station spacing used to place a WAV
/// set's stations is the edited setup's.
pub fn open_test(
    path: &Path,
    edit: impl Fn(Setup) -> Result<Setup, String>,
) -> Result<OpenedTest, InputError> {
    let probe = edit(Setup::default()).map_err(|m| InputError::new(path, m))?;
    let (data, session) = open_dataset(path, probe.spacing_m)?;
    let (base, fit) = session
        .as_ref()
        .map(|s| (s.manifest.setup.clone(), s.manifest.fit.clone()))
        .unwrap_or_default();
    let setup = edit(base).map_err(|m| InputError::new(path, m))?;
    Ok(OpenedTest {
        data,
        setup,
        fit: fit.unwrap_or_default(),
        session,
    })
}

/// The signal chain over every station.
pub fn analyse(t: &OpenedTest) -> Result<Analysis, InputError> {
    analysis::run(&t.data, &t.setup)
}

/// The modal fit of an analysis; empty when no station has an accepted hit.
pub fn fit(a: &Analysis, settings: &ModalSettings) -> Result<ModalResult, String> {
    match FrfSet::from_analysis(a) {
        Some(set) => crate::modal::extract(&set, settings),
        None => Ok(ModalResult::default()),
    }
}

/// The band the test covered, Hz: the fit's band, else the setup's, else the lines the fit saw.
/// A model mode inside it that the test did not find is reported as missed.
pub fn tested_band(settings: &ModalSettings, setup: &Setup, m: &ModalResult) -> [f64; 2] {
    let lines = (!m.indicators.freq_hz.is_empty()).then(|| {
        [
            m.indicators.freq_hz.first().copied().unwrap_or(0.0),
            m.indicators.freq_hz.last().copied().unwrap_or(0.0),
        ]
    });
    settings
        .band_hz
        .or(setup.band_hz)
        .or(lines)
        .unwrap_or([0.0, f64::INFINITY])
}

/// A fit's modes as the model study takes them, over the band the test covered.
pub fn test_modes(settings: &ModalSettings, setup: &Setup, m: &ModalResult) -> TestModes {
    TestModes::from_modal(m, tested_band(settings, setup, m))
}

/// The model study of a test: correlation, missed modes, stiffness map and margins, by the
/// study's own rule and orders.
pub fn study(study: &Study, test: Option<&TestModes>) -> Result<StudyResult, String> {
    evaluate(study, test)
}

/// [`study`] reusing the model's solves kept in `cache` (the window's worker keeps one, so a new
/// fit only pairs modes and checks margins again).
pub fn study_cached(
    study: &Study,
    test: Option<&TestModes>,
    cache: &mut crate::model::study::ModelCache,
) -> Result<StudyResult, String> {
    crate::model::study::evaluate_cached(study, test, cache)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_tested_band_prefers_the_fit_then_the_setup_then_the_lines() {
        let mut m = ModalResult::default();
        m.indicators.freq_hz = vec![12.0, 13.0, 900.0];
        let mut ms = ModalSettings::default();
        let mut setup = Setup::default();
        ms.band_hz = None;
        setup.band_hz = None;
        assert_eq!(tested_band(&ms, &setup, &m), [12.0, 900.0]);
        setup.band_hz = Some([20.0, 800.0]);
        assert_eq!(tested_band(&ms, &setup, &m), [20.0, 800.0]);
        ms.band_hz = Some([30.0, 700.0]);
        assert_eq!(tested_band(&ms, &setup, &m), [30.0, 700.0]);
        let empty = ModalResult::default();
        ms.band_hz = None;
        setup.band_hz = None;
        assert_eq!(tested_band(&ms, &setup, &empty), [0.0, f64::INFINITY]);
    }
}
