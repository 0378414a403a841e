//! The window's frame around the views: top bar, status bar, keyboard shortcuts, path dialog.

use super::*;

impl TapgridApp {
    pub(super) fn top_bar(&mut self, ui: &mut egui::Ui) {
        ui.horizontal_wrapped(|ui| {
            ui.menu_button("File", |ui| {
                if ui.button("Open folder…").clicked() {
                    self.commands.push(Command::AskPath(PathPurpose::Open));
                }
                if ui.button("Replay a WAV set…").clicked() {
                    self.commands.push(Command::AskPath(PathPurpose::Import));
                }
                let can_save = self.doc.as_ref().is_some_and(|d| !d.read_only);
                if ui
                    .add_enabled(can_save, egui::Button::new("Save"))
                    .clicked()
                {
                    self.commands.push(Command::Save);
                }
                if ui
                    .add_enabled(
                        self.doc.is_some(),
                        egui::Button::new("Save as new session…"),
                    )
                    .clicked()
                {
                    self.commands.push(Command::AskPath(PathPurpose::SaveAs));
                }
                let can_report = self.doc.as_ref().is_some_and(|d| d.analysis.is_some());
                if ui
                    .add_enabled(can_report, egui::Button::new("Write report…"))
                    .clicked()
                {
                    self.commands
                        .push(Command::AskPath(PathPurpose::WriteReport));
                }
                if ui
                    .add_enabled(can_report, egui::Button::new("Write PDF report…"))
                    .clicked()
                {
                    self.commands
                        .push(Command::AskPath(PathPurpose::WriteReport));
                    self.ui.report_pdf = true;
                }
                ui.separator();
                ui.label("Recent");
                for p in self.settings.recent.clone() {
                    if ui.button(p.display().to_string()).clicked() {
                        self.commands.push(Command::Open(p));
                    }
                }
            });
            let theme = if self.settings.dark {
                "Light theme"
            } else {
                "Dark theme"
            };
            if ui.button(theme).clicked() {
                self.settings.dark = !self.settings.dark;
                style(ui.ctx(), self.settings.dark);
            }
            if ui.button("Help").clicked() {
                self.commands.push(Command::ToggleHelp);
            }
            ui.separator();
            for (n, v) in (1..).zip(View::ALL) {
                let sel = self.settings.view == v;
                if ui
                    .add(egui::Button::selectable(
                        sel,
                        egui::RichText::new(v.label()).size(16.0),
                    ))
                    .on_hover_text(if n <= 10 {
                        format!("key {}", n % 10)
                    } else {
                        String::new()
                    })
                    .clicked()
                {
                    self.commands.push(Command::Show(v));
                }
            }
        });
    }

    pub(super) fn status_bar(&mut self, ui: &mut egui::Ui) {
        ui.horizontal(|ui| {
            if let Some(what) = self.worker.busy() {
                ui.spinner();
                ui.label(format!("{what}…"));
                ui.separator();
            }
            if let Some(d) = &self.doc {
                let mut title = d.part.name.clone();
                if let Some(who) = &d.locked_by {
                    title.push_str(&format!("  (read-only: in use by {who})"));
                } else if d.session.is_none() {
                    title.push_str("  (WAV set: Save as makes it a session)");
                } else if d.read_only {
                    title.push_str("  (demo: read-only, use Save as)");
                } else if d.dirty {
                    title.push_str("  (unsaved changes)");
                }
                ui.label(egui::RichText::new(title).strong());
                ui.label(d.path.display().to_string());
                if let Some(st) = self.ui.current_station {
                    ui.separator();
                    ui.label(format!("station {st}"));
                }
            }
            if let Some(m) = self.messages.last() {
                ui.separator();
                let color = if m.error {
                    plots::bad()
                } else {
                    ui.visuals().text_color()
                };
                ui.label(egui::RichText::new(&m.text).color(color));
                if ui.small_button("dismiss").clicked() {
                    self.messages.pop();
                }
            }
        });
    }

    pub(super) fn shortcuts(&mut self, ctx: &egui::Context) {
        if ctx.egui_wants_keyboard_input() {
            return;
        }
        use egui::Key;
        let pressed = |k| ctx.input(|i| i.key_pressed(k));
        let cmd = ctx.input(|i| i.modifiers.command);
        if cmd && pressed(Key::S) {
            self.commands.push(Command::Save);
            return;
        }
        if cmd && pressed(Key::O) {
            self.commands.push(Command::AskPath(PathPurpose::Open));
            return;
        }
        for (k, c) in [
            (Key::ArrowRight, Command::NextStation),
            (Key::ArrowLeft, Command::PrevStation),
            (Key::N, Command::NextStation),
            (Key::P, Command::PrevStation),
            (Key::ArrowDown, Command::NextHit),
            (Key::ArrowUp, Command::PrevHit),
            (Key::A, Command::VerdictCurrent(true)),
            (Key::R, Command::VerdictCurrent(false)),
            (Key::Space, Command::TogglePlay),
            (Key::F1, Command::ToggleHelp),
        ] {
            if pressed(k) {
                self.commands.push(c);
            }
        }
        // Keys 1–9 and 0 open the tabs in the order they are drawn.
        let keys = [
            Key::Num1,
            Key::Num2,
            Key::Num3,
            Key::Num4,
            Key::Num5,
            Key::Num6,
            Key::Num7,
            Key::Num8,
            Key::Num9,
            Key::Num0,
        ];
        for (k, v) in keys.into_iter().zip(View::ALL) {
            if pressed(k) {
                self.commands.push(Command::Show(v));
            }
        }
    }

    pub(super) fn path_dialog(&mut self, ctx: &egui::Context) {
        let Some(d) = &mut self.dialog else {
            return;
        };
        let title = match d.purpose {
            PathPurpose::Open => "Open a session or WAV set folder",
            PathPurpose::Import => "Replay a WAV set folder",
            PathPurpose::SaveAs => "Save as a new session folder",
            PathPurpose::LoadModel => "Read a shaft model (JSON file)",
            PathPurpose::WriteModel => "Write the shaft model (JSON file)",
            PathPurpose::WriteReport => {
                "Write the test report (HTML file, or PDF when it ends in .pdf)"
            }
            PathPurpose::LoadRotor => "Read a rotor file (JSON: bearings, unbalances)",
            PathPurpose::LoadRun => "Read a run recording (WAV: tach and accelerometer)",
            PathPurpose::LoadCompare => "Compare with another test (session or WAV set folder)",
        };
        let mut close = false;
        let mut go = None;
        let ext = match d.purpose {
            PathPurpose::LoadModel | PathPurpose::WriteModel | PathPurpose::LoadRotor => {
                Some(".json")
            }
            PathPurpose::WriteReport => None,
            PathPurpose::LoadRun => Some(".wav"),
            _ => None,
        };
        // The folder to list: the path typed when it is a folder, else the folder holding it
        // (worked out again only when the text changes).
        if d.listing.as_ref().is_none_or(|l| l.for_text != d.text) {
            let typed = PathBuf::from(d.text.trim());
            let dir = if typed.is_dir() {
                typed.clone()
            } else {
                typed
                    .parent()
                    .filter(|p| p.is_dir())
                    .map(Path::to_path_buf)
                    .unwrap_or_else(|| std::env::current_dir().unwrap_or_default())
            };
            d.listing = match d.listing.take() {
                // Same folder: keep its entries.
                Some(mut l) if l.dir == dir => {
                    l.for_text = d.text.clone();
                    Some(l)
                }
                _ => Some(super::command::Listing::read(&d.text, &dir, ext)),
            };
        }
        egui::Window::new(title)
            .collapsible(false)
            .resizable(false)
            .min_width(600.0)
            .anchor(egui::Align2::CENTER_CENTER, [0.0, 0.0])
            .show(ctx, |ui| {
                ui.set_min_width(600.0);
                ui.label(match d.purpose {
                    PathPurpose::LoadModel
                    | PathPurpose::WriteModel
                    | PathPurpose::WriteReport
                    | PathPurpose::LoadRotor
                    | PathPurpose::LoadRun => "File:",
                    _ => "Folder:",
                });
                let r = ui.add(egui::TextEdit::singleline(&mut d.text).desired_width(580.0));
                let enter = r.lost_focus() && ui.input(|i| i.key_pressed(egui::Key::Enter));
                if let Some(l) = &d.listing {
                    use super::command::EntryKind;
                    ui.horizontal(|ui| {
                        if ui.button("Up one folder").clicked()
                            && let Some(p) = l.dir.parent()
                        {
                            d.text = p.display().to_string();
                        }
                        ui.label(egui::RichText::new(l.dir.display().to_string()).small());
                    });
                    if let Some(e) = &l.error {
                        ui.label(egui::RichText::new(e).color(super::plots::bad()));
                    }
                    let mut pick = None;
                    egui::ScrollArea::vertical()
                        .max_height(300.0)
                        .auto_shrink([false, true])
                        .show(ui, |ui| {
                            for (name, kind) in &l.entries {
                                let text = match kind {
                                    EntryKind::Session => format!("{name}/   — tapgrid session"),
                                    EntryKind::WavSet => format!("{name}/   — WAV set"),
                                    EntryKind::Folder => format!("{name}/"),
                                    EntryKind::File => name.clone(),
                                };
                                if ui.selectable_label(false, text).clicked() {
                                    pick = Some(l.dir.join(name));
                                }
                            }
                            if l.entries.is_empty() && l.error.is_none() {
                                ui.label(egui::RichText::new("(nothing to choose here)").small());
                            }
                        });
                    if let Some(p) = pick {
                        d.text = p.display().to_string();
                    }
                }
                ui.horizontal(|ui| {
                    if ui.button("OK").clicked() || enter {
                        go = Some(PathBuf::from(d.text.trim()));
                    }
                    if ui.button("Cancel").clicked() {
                        close = true;
                    }
                });
            });
        if let Some(p) = go {
            let purpose = d.purpose;
            self.dialog = None;
            if !p.as_os_str().is_empty() {
                self.commands.push(match purpose {
                    PathPurpose::Open | PathPurpose::Import => Command::Open(p),
                    PathPurpose::SaveAs => Command::SaveAs(p),
                    PathPurpose::LoadModel => Command::LoadModel(p),
                    PathPurpose::WriteModel => Command::WriteModel(p),
                    PathPurpose::WriteReport => Command::WriteReport(p),
                    PathPurpose::LoadRotor => Command::LoadRotor(p),
                    PathPurpose::LoadRun => Command::LoadRun(p),
                    PathPurpose::LoadCompare => Command::LoadCompare(p),
                });
            }
        } else if close {
            self.dialog = None;
        }
    }
}
