//! Requests to the worker and what comes back: analysis, fit, model study, hit traces; autosave.

use super::*;

impl TapgridApp {
    pub(crate) fn request_analysis(&mut self) {
        let Some(d) = &mut self.doc else {
            return;
        };
        let generation = self.worker.next_generation();
        self.worker.send(Job::Analyze {
            generation,
            data: d.data.clone(),
            setup: d.setup.clone(),
            modal: d.modal_settings.clone(),
        });
    }

    pub(super) fn request_fit(&mut self) {
        let Some(d) = &self.doc else {
            return;
        };
        let Some(frfs) = d.frfs.clone() else {
            return;
        };
        let picked = match (
            &d.picked,
            d.modal.as_ref().and_then(|m| m.stabilization.clone()),
        ) {
            (Some(p), Some(stab)) => Some((Arc::new(stab), p.clone())),
            _ => None,
        };
        let generation = self.worker.next_generation();
        let modal = d.modal_settings.clone();
        self.worker.send(Job::Fit {
            generation,
            frfs,
            modal,
            picked,
        });
    }

    /// Solves the model study again (against the latest fit, when there is one).
    pub(crate) fn request_study(&mut self) {
        let Some(d) = &mut self.doc else {
            return;
        };
        let Some(study) = d.study.clone() else {
            d.study_result = None;
            d.study_error = None;
            return;
        };
        let test = d.test_modes();
        let generation = self.worker.next_generation();
        self.worker.send(Job::Study {
            generation,
            study: Box::new(study),
            test,
        });
    }

    pub(super) fn receive(&mut self, o: Outcome) {
        match o {
            Outcome::Opened {
                path,
                data,
                session,
            } => {
                let read_only = is_bundled_demo(&path);
                let mut doc = Document::new(path.clone(), data, session.map(|s| *s), read_only);
                doc.take_lock();
                if let Some(who) = &doc.locked_by {
                    self.note(
                        format!("opened read-only: the session is in use by {who}"),
                        true,
                    );
                }
                self.ui.current_station = doc.data.stations.first().map(|s| s.station);
                self.ui.current_hit = 0;
                self.ui.selected_mode = 0;
                self.ui.selected_model_mode = None;
                self.ui.orders_edit = None;
                self.ui.overlay.clear();
                self.traces = None;
                self.traces_requested = None;
                self.ui.synth_station = None;
                self.ui.fit_band_edit = None;
                self.doc = Some(doc);
                self.settings.recent.retain(|p| p != &path);
                self.settings.recent.insert(0, path.clone());
                self.settings.recent.truncate(8);
                self.note(format!("opened {}", path.display()), false);
                // The hit analysis first (the stations fill in), then the model, which needs no
                // test to be drawn; it is correlated again once the fit is in.
                self.request_analysis();
                self.request_study();
            }
            Outcome::Analyzed {
                generation,
                analysis,
                frfs,
                indicators,
                modal,
            } => {
                if !self.worker.is_latest_analysis(generation) {
                    return;
                }
                let Some(d) = &mut self.doc else {
                    return;
                };
                d.analysis = Some(analysis);
                d.frfs = frfs;
                d.indicators = indicators;
                d.analysis_error = None;
                d.picked = None;
                match modal {
                    Ok(m) => {
                        d.modal = Some(m);
                        d.modal_error = None;
                    }
                    Err(e) => {
                        d.modal = None;
                        d.modal_error = Some(e);
                    }
                }
                self.analysis_stamp += 1;
                self.autosave();
                self.request_study();
            }
            Outcome::Fitted { generation, modal } => {
                if !self.worker.is_latest_fit(generation) {
                    return;
                }
                self.analysis_stamp += 1;
                let Some(d) = &mut self.doc else {
                    return;
                };
                match modal {
                    Ok(m) => {
                        if d.picked.is_some() {
                            // A person's pole choice outlives this fit: kept as the frequencies of
                            // the chosen poles, which the next analysis and the saved session
                            // choose again (the stable pole column nearest each).
                            d.modal_settings.selection = Selection::Near(
                                m.modes.iter().map(|x| x.measured_frequency_hz).collect(),
                            );
                            d.dirty = true;
                        }
                        d.modal = Some(m);
                        d.modal_error = None;
                    }
                    Err(e) => {
                        d.modal_error = Some(e.clone());
                        self.note(format!("fit failed: {e}"), true);
                    }
                }
                self.autosave();
                self.request_study();
            }
            Outcome::Studied { generation, result } => {
                if !self.worker.is_latest_study(generation) {
                    return;
                }
                let Some(d) = &mut self.doc else {
                    return;
                };
                match result {
                    Ok(r) => {
                        d.study_result = Some(r);
                        d.study_error = None;
                    }
                    Err(e) => d.study_error = Some(e),
                }
                self.autosave();
            }
            Outcome::Traces { station, traces } => {
                self.traces = Some((station, Arc::new(traces)));
            }
            Outcome::SessionSaved { session, announce } => {
                if let Some(d) = &mut self.doc
                    && d.path == session.dir
                {
                    d.session = Some(*session.clone());
                    // Changes made while it was being written keep the document unsaved.
                    d.dirty = d
                        .session_to_write()
                        .is_some_and(|w| w.manifest != session.manifest);
                }
                if announce {
                    self.note("saved", false);
                }
            }
            Outcome::Reopened(s) => self.reopened(*s),
            Outcome::ShaftRead { path, shaft } => {
                if let Some(d) = &mut self.doc {
                    // The service questions stay; only the shaft is replaced.
                    match &mut d.study {
                        Some(st) => st.shaft = *shaft,
                        None => d.study = Some(Study::new(*shaft)),
                    }
                    d.dirty = true;
                    self.note(format!("read the shaft model {}", path.display()), false);
                    self.request_study();
                }
            }
            Outcome::RotorRead {
                path,
                service,
                shaft,
            } => {
                if let Some(d) = &mut self.doc {
                    // The tested shaft stays: the file brings the service (bearings, unbalances,
                    // range); its shaft is used only when the test has no model yet.
                    let had_model = d.study.is_some();
                    let st = d.study.get_or_insert_with(|| Study::new(*shaft));
                    st.rotor = Some(service);
                    d.dirty = true;
                    self.note(
                        if had_model {
                            format!(
                                "read the bearings and unbalances of {} (on the tested shaft model)",
                                path.display()
                            )
                        } else {
                            format!("read the rotor {}", path.display())
                        },
                        false,
                    );
                    self.request_study();
                }
            }
            Outcome::Wrote(message) => self.note(message, false),
            Outcome::Saved(s) => {
                let dir = s.dir.clone();
                if let Some(d) = &mut self.doc {
                    d.data = s.dataset();
                    d.path = dir.clone();
                    d.session = Some(*s);
                    d.read_only = false;
                    d.locked_by = None;
                    d.lock = None;
                    d.dirty = false;
                    d.take_lock();
                }
                self.settings.recent.retain(|p| p != &dir);
                self.settings.recent.insert(0, dir.clone());
                self.note(format!("saved as {}", dir.display()), false);
            }
            Outcome::Devices(d) => self.capture.devices = Some(d),
            Outcome::Skipped => {}
            Outcome::Failed { what, message } => {
                if what == "Analysing"
                    && let Some(d) = &mut self.doc
                {
                    d.analysis_error = Some(message.clone());
                }
                self.note(format!("{what} failed: {message}"), true);
            }
        }
    }

    /// Sessions (not the read-only demo) keep the person's verdicts and setup on disk as soon
    /// as the analysis that reflects them is in.
    pub(super) fn autosave(&mut self) {
        let Some(d) = &mut self.doc else {
            return;
        };
        if !d.dirty || d.read_only {
            return;
        }
        // While a capture writes this session it is the only writer; the window's edits stay
        // in the document (still marked unsaved) and are written once the capture stops.
        if self.capture.handle.is_some() && self.capture_dir.as_deref() == Some(d.path.as_path()) {
            return;
        }
        if let Some(s) = d.session_to_write() {
            self.io.send(Job::SaveSession {
                session: Box::new(s),
                announce: false,
            });
        }
    }

    /// Asks the worker for the current station's cut hits when they are not yet made for the
    /// latest analysis (the hit view draws them once they arrive).
    pub(super) fn request_traces(&mut self) {
        let Some(st) = self.ui.current_station else {
            return;
        };
        let Some(d) = self.doc.as_ref() else {
            return;
        };
        let Some(sa) = d.station_analysis(st) else {
            return;
        };
        if self.traces_requested != Some((st, self.analysis_stamp)) {
            self.traces_requested = Some((st, self.analysis_stamp));
            let job = Job::Traces {
                station: st,
                path: sa.path.clone(),
                // The analysis's setup: it holds the record length chosen for the tapping.
                setup: d
                    .analysis
                    .as_ref()
                    .map_or_else(|| d.setup.clone(), |a| a.setup.clone()),
                hits: sa.result.hits.clone(),
            };
            self.worker.send(job);
        }
    }
}
