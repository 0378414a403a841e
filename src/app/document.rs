//! The open test and what has been computed from it; the session lock it holds.

use super::*;

/// The open test and what has been computed from it.
pub struct Document {
    /// Folder it came from.
    pub path: PathBuf,
    /// The session, when the folder is one (else a WAV set being replayed).
    pub session: Option<Session>,
    /// The recordings.
    pub data: Dataset,
    /// Setup being edited (the analysis follows it).
    pub setup: Setup,
    /// Part.
    pub part: Part,
    /// Station labels (by station number).
    pub labels: std::collections::BTreeMap<u32, String>,
    /// Modal settings.
    pub modal_settings: ModalSettings,
    /// Latest analysis.
    pub analysis: Option<Arc<Analysis>>,
    /// Its FRFs.
    pub frfs: Option<Arc<FrfSet>>,
    /// Mode indicators of those FRFs over the whole band.
    pub indicators: Option<Arc<crate::modal::Indicators>>,
    /// Latest fit.
    pub modal: Option<Arc<ModalResult>>,
    /// Why the latest fit failed.
    pub modal_error: Option<String>,
    /// Why the latest analysis failed.
    pub analysis_error: Option<String>,
    /// Poles a person picked (indices into the diagram); `None` = automatic choice.
    pub picked: Option<Vec<usize>>,
    /// The shaft model and its service questions.
    pub study: Option<Study>,
    /// Its latest evaluation.
    pub study_result: Option<Arc<StudyResult>>,
    /// Why the latest evaluation failed.
    pub study_error: Option<String>,
    /// Never written back: the bundled demo, or a session another program holds.
    pub read_only: bool,
    /// Who holds the session when this window could not take it (then read-only).
    pub locked_by: Option<String>,
    /// This window's hold on the session (one writer at a time); `None` for a WAV set, the demo,
    /// a session held elsewhere, or while a capture writes it.
    pub lock: Option<Arc<crate::session::lock::SessionLock>>,
    /// Changed since the last save.
    pub dirty: bool,
    /// Who tested, where, with what (the report's record and sign-off).
    pub report: crate::session::ReportInfo,
}

impl Document {
    pub(crate) fn new(
        path: PathBuf,
        data: Dataset,
        session: Option<Session>,
        read_only: bool,
    ) -> Self {
        let modal_settings = session
            .as_ref()
            .and_then(|s| s.manifest.fit.clone())
            .unwrap_or_default();
        let (setup, part, labels, study) = match &session {
            Some(s) => (
                s.manifest.setup.clone(),
                s.manifest.part.clone(),
                s.manifest
                    .stations
                    .iter()
                    .filter_map(|st| st.label.clone().map(|l| (st.station, l)))
                    .collect(),
                s.manifest.model.clone(),
            ),
            None => (
                Setup::default(),
                Part {
                    name: path
                        .file_name()
                        .map(|n| n.to_string_lossy().into_owned())
                        .unwrap_or_default(),
                    notes: String::new(),
                },
                Default::default(),
                None,
            ),
        };
        let report = session
            .as_ref()
            .map(|s| s.manifest.report.clone())
            .unwrap_or_default();
        Self {
            report,
            path,
            session,
            data,
            setup,
            part,
            labels,
            modal_settings,
            analysis: None,
            frfs: None,
            indicators: None,
            modal: None,
            modal_error: None,
            analysis_error: None,
            picked: None,
            study,
            study_result: None,
            study_error: None,
            read_only,
            locked_by: None,
            lock: None,
            dirty: false,
        }
    }

    /// The fitted modes as the model study takes them (real shapes at the stations).
    pub fn test_modes(&self) -> Option<TestModes> {
        let m = self.modal.as_ref()?;
        Some(crate::pipeline::test_modes(
            &self.modal_settings,
            &self.setup,
            m,
        ))
    }

    /// Index of a station in the dataset.
    pub fn station_index(&self, station: u32) -> Option<usize> {
        self.data.stations.iter().position(|s| s.station == station)
    }

    /// The analysed station, when analysed.
    pub fn station_analysis(&self, station: u32) -> Option<&crate::analysis::StationAnalysis> {
        self.analysis
            .as_ref()?
            .stations
            .iter()
            .find(|s| s.station == station)
    }

    /// The session manifest as it should be written now.
    /// Takes the session's lock for this window; when another program holds it the document
    /// becomes read-only and says who has it.
    pub(crate) fn take_lock(&mut self) {
        if self.session.is_none() || self.read_only || self.lock.is_some() {
            return;
        }
        match crate::session::lock::SessionLock::acquire(
            &self.path,
            "tapgrid window",
            std::time::Duration::ZERO,
        ) {
            Ok(l) => {
                self.lock = Some(Arc::new(l));
                self.locked_by = None;
            }
            Err(e) => {
                self.read_only = true;
                self.locked_by = Some(
                    crate::session::lock::SessionLock::holder(&self.path)
                        .unwrap_or_else(|| e.to_string()),
                );
            }
        }
    }

    pub(super) fn session_to_write(&self) -> Option<Session> {
        let mut s = self.session.clone()?;
        s.manifest.setup = self.setup.clone();
        s.manifest.part = self.part.clone();
        for st in &mut s.manifest.stations {
            if let Some(src) = self.data.stations.iter().find(|d| d.station == st.station) {
                st.position_m = src.position_m;
                st.position_source = src.position_source;
            }
            st.label = self.labels.get(&st.station).cloned();
        }
        if let Some(a) = &self.analysis {
            s.manifest.hits = crate::session::saved_hits(a);
        }
        s.manifest.model = self.study.clone();
        s.manifest.report = self.report.clone();
        s.manifest.fit =
            (self.modal_settings != ModalSettings::default()).then(|| self.modal_settings.clone());
        Some(s)
    }
}
