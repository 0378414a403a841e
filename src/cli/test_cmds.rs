//! Commands on a test: analyse it, write its report, import a WAV set, set a hit's verdict.

use super::model_cmds::read_study;
use super::*;

/// A test opened for analysis with the command line's options on top of its own setup and
/// modal settings (`modal` is `None` for `--modes none`).
pub(super) struct Opened {
    data: Dataset,
    setup: Setup,
    modal: Option<ModalSettings>,
    session: Option<Session>,
}

pub(super) fn open_test(input: &Path, args: &SetupArgs, modal_args: &ModalArgs) -> Result<Opened> {
    let t = crate::pipeline::open_test(input, |s| args.apply(s).map_err(|e| format!("{e:#}")))?;
    Ok(Opened {
        modal: modal_settings(modal_args, t.fit)?,
        data: t.data,
        setup: t.setup,
        session: t.session,
    })
}

/// The modal fit of an analysed test (empty for `--modes none` or without an accepted hit).
pub(super) fn fit_modes(
    input: &Path,
    a: &crate::analysis::Analysis,
    modal: Option<&ModalSettings>,
) -> Result<ModalResult> {
    match modal {
        Some(ms) => {
            crate::pipeline::fit(a, ms).map_err(|m| anyhow!("{}: modal fit: {m}", input.display()))
        }
        None => Ok(ModalResult::default()),
    }
}

impl Opened {
    /// A fit's modes as the model study takes them, over the band this test covered.
    fn test_modes(&self, m: &ModalResult) -> crate::model::study::TestModes {
        let ms = self.modal.clone().unwrap_or_default();
        crate::pipeline::test_modes(&ms, &self.setup, m)
    }
}

/// Analyses and fits a session or WAV set: its own setup and fit settings with the given setup
/// options on top. Returns the fit and its modes as the model study takes them.
pub(super) fn fitted(
    input: &Path,
    setup: &SetupArgs,
) -> Result<(ModalResult, crate::model::study::TestModes)> {
    let t = open_test(input, setup, &ModalArgs::default())?;
    let a = analysis::run(&t.data, &t.setup)?;
    if crate::modal::FrfSet::from_analysis(&a).is_none() {
        bail!("{}: no station has an accepted hit", input.display());
    }
    let m = fit_modes(input, &a, t.modal.as_ref())?;
    let test = t.test_modes(&m);
    Ok((m, test))
}

pub(super) fn analyze(
    input: &Path,
    out: &Path,
    args: &SetupArgs,
    modal_args: &ModalArgs,
) -> Result<()> {
    let t = open_test(input, args, modal_args)?;
    let t0 = std::time::Instant::now();
    let a = analysis::run(&t.data, &t.setup)?;
    let t1 = std::time::Instant::now();
    // frf.csv needs only the FRFs: written on its own thread while the fit runs.
    let (csv, modes) = std::thread::scope(|scope| {
        let csv = scope.spawn(|| report::write_frf_csv(&a, out));
        let modes = fit_modes(input, &a, t.modal.as_ref());
        let csv = csv.join().unwrap_or_else(|_| {
            Err(crate::acquire::InputError::new(
                out,
                "frf.csv writer failed",
            ))
        });
        (csv, modes)
    });
    csv?;
    let modes = modes?;
    let t1b = std::time::Instant::now();
    report::write_fit_outputs(&a, &modes, out)?;
    let t2 = std::time::Instant::now();
    if std::env::var_os("TAPGRID_TIMING").is_some() {
        eprintln!(
            "timing: decode+chain {:.3} s, modal {:.3} s (stabilization {:.3} s), outputs {:.3} s",
            (t1 - t0).as_secs_f64(),
            (t1b - t1).as_secs_f64(),
            modes.stabilization_seconds,
            (t2 - t1b).as_secs_f64()
        );
    }
    print!("{}", report::summary(&a));
    print!("{}", report::modes_summary(&modes));
    println!(
        "wrote {} and {}",
        out.join("frf.csv").display(),
        out.join("result.json").display()
    );
    // The command ends here: the operating system reclaims the tens of megabytes of spectra at
    // exit at once, where freeing them block by block would only delay it.
    std::mem::forget(a);
    std::mem::forget(modes);
    Ok(())
}

pub(super) fn report(a: ReportArgs) -> Result<()> {
    let t = open_test(&a.input, &a.setup, &a.modal)?;
    let analysis = analysis::run(&t.data, &t.setup)?;
    let modes = fit_modes(&a.input, &analysis, t.modal.as_ref())?;
    let (part, notes, own_model) = match &t.session {
        Some(s) => (
            s.manifest.part.name.clone(),
            s.manifest.part.notes.clone(),
            s.manifest.model.clone(),
        ),
        None => (String::new(), String::new(), None),
    };
    let study = match &a.model {
        Some(p) => Some(read_study(p)?),
        None => own_model,
    };
    let result = match &study {
        Some(st) => Some(
            crate::pipeline::study(st, Some(&t.test_modes(&modes)))
                .map_err(|e| anyhow!("{}: shaft model: {e}", a.input.display()))?,
        ),
        None => None,
    };
    let written = report::document::utc_now();
    let part = a.part.unwrap_or(part);
    let rotor = match study.as_ref().and_then(report::document::rotor_for_report) {
        Some(Ok(r)) => Some(r),
        Some(Err(e)) => {
            eprintln!("tapgrid: warning: the rotor at speed was left out of the report: {e}");
            None
        }
        None => None,
    };
    let mut sources = t
        .session
        .as_ref()
        .map(|s| report::runs::session_runs(&s.dir, &s.manifest.runs))
        .unwrap_or_default();
    if a.run_sensitivity
        .is_some_and(|v| !(v.is_finite() && v > 0.0))
    {
        bail!("--run-sensitivity must be positive");
    }
    for p in &a.run {
        sources.push(report::runs::RunSource {
            path: p.clone(),
            options: crate::coast::RunOptions {
                sensitivity_mv_per_unit: a.run_sensitivity,
                ..crate::coast::RunOptions::default()
            },
            recorded: String::new(),
            note: String::new(),
        });
    }
    let runs = report::runs::track_runs(&sources, study.as_ref());
    for r in &runs {
        if let Err(e) = &r.result {
            eprintln!("tapgrid: warning: a run could not be tracked (reported as such): {e}");
        }
    }
    let info = t
        .session
        .as_ref()
        .map(|s| s.manifest.report.clone())
        .unwrap_or_default();
    let input = report::document::ReportInput {
        info: Some(&info),
        runs: &runs,
        part: &part,
        notes: &notes,
        source: &a.input,
        analysis: &analysis,
        modes: &modes,
        study: study.as_ref().zip(result.as_ref()),
        written_utc: &written,
        rotor: rotor.as_ref(),
    };
    let is_pdf = |p: &Path| p.extension().is_some_and(|e| e.eq_ignore_ascii_case("pdf"));
    if is_pdf(&a.out) {
        report::pdf::write_pdf(&a.out, &input)?;
    } else {
        report::document::write_html(&a.out, &input)?;
    }
    if let Some(p) = &a.pdf {
        report::pdf::write_pdf(p, &input)?;
        println!("wrote {}", p.display());
    }
    print!("{}", report::summary(&analysis));
    print!("{}", report::modes_summary(&modes));
    println!("wrote {}", a.out.display());
    Ok(())
}

pub(super) fn import(a: ImportArgs) -> Result<()> {
    let setup = a.setup.apply(Setup::default())?;
    let set = WavSet::scan(&a.wavset, setup.spacing_m)?;
    let data = Dataset::from_wavset(&set);
    // Analyse first so a set that cannot be analysed makes no half session.
    let result = analysis::run(&data, &setup)?;
    let mut s = Session::import_wavset(
        &set,
        &a.session,
        setup,
        Part {
            name: a.part,
            notes: String::new(),
        },
    )?;
    s.manifest.hits = crate::session::saved_hits(&result);
    s.save()?;
    print!("{}", report::summary(&result));
    println!("session written to {}", a.session.display());
    Ok(())
}

pub(super) fn verdict(a: VerdictArgs) -> Result<()> {
    // Read, change and write under the session's lock, so two commands cannot lose an update.
    let _lock = crate::session::lock::SessionLock::acquire(&a.session, "verdict", LOCK_WAIT)?;
    let mut s = Session::open(&a.session)?;
    let v = match a.verdict {
        VerdictArg::Accept => Some(true),
        VerdictArg::Reject => Some(false),
        VerdictArg::Auto => None,
    };
    let index = a
        .hit
        .checked_sub(1)
        .ok_or_else(|| anyhow!("--hit: hits are counted from 1"))?;
    s.set_override(a.station, index, v)
        .map_err(|m| anyhow!("{}: {m}", a.session.display()))?;
    let data = s.dataset();
    let result = analysis::run(&data, &s.manifest.setup)?;
    s.manifest.hits = crate::session::saved_hits(&result);
    s.save()?;
    print!("{}", report::summary(&result));
    Ok(())
}

/// Times the window's work after a verdict change: the analysis, the fit, and the model study
/// with the model's solves already cached (as the worker keeps them), median of `repeat`; also
/// the first study (no cache).
pub(super) fn bench_verdict(a: &BenchVerdictArgs) -> Result<()> {
    let t = open_test(&a.input, &SetupArgs::default(), &ModalArgs::default())?;
    let study = t
        .session
        .as_ref()
        .and_then(|s| s.manifest.model.clone())
        .ok_or_else(|| anyhow!("{}: the session has no shaft model", a.input.display()))?;
    let ms = t.modal.clone().unwrap_or_default();
    let mut cache = crate::model::study::ModelCache::default();
    // Run 0 solves the model; the others find it cached, as the window's worker does.
    let mut times = Vec::new();
    for _ in 0..=a.repeat.max(1) {
        let t0 = std::time::Instant::now();
        let analysis = analysis::run(&t.data, &t.setup)?;
        let m = fit_modes(&a.input, &analysis, t.modal.as_ref())?;
        let test = crate::pipeline::test_modes(&ms, &t.setup, &m);
        crate::pipeline::study_cached(&study, Some(&test), &mut cache).map_err(|e| anyhow!(e))?;
        times.push(t0.elapsed().as_secs_f64());
    }
    let first = times.remove(0);
    times.sort_by(f64::total_cmp);
    println!(
        "verdict change to idle: {:.3} s (median of {}); first, model solved: {first:.3} s",
        times[times.len() / 2],
        times.len()
    );
    Ok(())
}

pub(super) fn check(a: CheckArgs) -> Result<()> {
    let t = open_test(&a.input, &a.setup, &ModalArgs::default())?;
    let analysis = analysis::run(&t.data, &t.setup)?;
    let set = crate::modal::FrfSet::from_analysis(&analysis)
        .ok_or_else(|| anyhow!("{}: no station has an accepted hit", a.input.display()))?;
    let modes = fit_modes(&a.input, &analysis, t.modal.as_ref())?;
    let shaft = match &a.model {
        Some(p) => Some(read_study(p)?.shaft),
        None => t
            .session
            .as_ref()
            .and_then(|s| s.manifest.model.as_ref().map(|m| m.shaft.clone())),
    };
    let second = match &a.second {
        Some(p) => {
            let args = SetupArgs {
                reference: a.second_reference,
                ..Default::default()
            };
            let t2 = open_test(p, &args, &ModalArgs::default())?;
            let a2 = analysis::run(&t2.data, &t2.setup)?;
            Some(
                crate::modal::FrfSet::from_analysis(&a2)
                    .ok_or_else(|| anyhow!("{}: no station has an accepted hit", p.display()))?,
            )
        }
        None => None,
    };
    let checks = crate::pipeline::checks::physics(
        &t.data,
        &analysis,
        &set,
        &modes,
        shaft.as_ref(),
        second.as_ref(),
    );
    print!("{}", crate::pipeline::checks::checks_text(&checks));
    if let Some(dir) = &a.out {
        std::fs::create_dir_all(dir)
            .with_context(|| format!("{}: cannot create folder", dir.display()))?;
        let path = dir.join("checks.json");
        crate::atomic::write_derived(
            &path,
            serde_json::to_string_pretty(&serde_json::json!({ "checks": checks }))?.as_bytes(),
        )
        .with_context(|| format!("{}: cannot write", path.display()))?;
        println!("wrote {}", path.display());
    }
    Ok(())
}

pub(super) fn compare(a: CompareArgs) -> Result<()> {
    if !(a.min_mac.is_finite() && (0.0..=1.0).contains(&a.min_mac)) {
        bail!("--min-mac must lie between 0 and 1");
    }
    let fitted = |p: &Path| -> Result<(crate::modal::FrfSet, ModalResult)> {
        let t = open_test(p, &a.setup, &ModalArgs::default())?;
        let an = analysis::run(&t.data, &t.setup)?;
        let set = crate::modal::FrfSet::from_analysis(&an)
            .ok_or_else(|| anyhow!("{}: no station has an accepted hit", p.display()))?;
        let m = fit_modes(p, &an, t.modal.as_ref())?;
        Ok((set, m))
    };
    let (sa, ma) = fitted(&a.first)?;
    let (sb, mb) = fitted(&a.second)?;
    let c = crate::pipeline::compare::compare(&sa, &ma, &sb, &mb, a.min_mac);
    println!(
        "first: {} ({} modes); second: {} ({} modes)",
        a.first.display(),
        ma.modes.len(),
        a.second.display(),
        mb.modes.len()
    );
    print!("{}", crate::pipeline::compare::compare_text(&c));
    if let Some(dir) = &a.out {
        std::fs::create_dir_all(dir)
            .with_context(|| format!("{}: cannot create folder", dir.display()))?;
        let path = dir.join("compare.json");
        crate::atomic::write_derived(&path, serde_json::to_string_pretty(&c)?.as_bytes())
            .with_context(|| format!("{}: cannot write", path.display()))?;
        println!("wrote {}", path.display());
    }
    Ok(())
}

pub(super) fn report_details(a: ReportDetailsArgs) -> Result<()> {
    let _lock =
        crate::session::lock::SessionLock::acquire(&a.session, "report details", LOCK_WAIT)?;
    let mut s = Session::open(&a.session)?;
    let r = &mut s.manifest.report;
    for (field, v) in [
        (&mut r.operator, &a.operator),
        (&mut r.reviewer, &a.reviewer),
        (&mut r.site, &a.site),
        (&mut r.test_date, &a.date),
        (&mut r.support, &a.support),
        (&mut r.conditioning, &a.conditioning),
    ] {
        if let Some(v) = v {
            *field = v.trim().to_string();
        }
    }
    if a.clear_instruments {
        r.instruments.clear();
    }
    for text in &a.instrument {
        let f: Vec<&str> = text.split('|').map(str::trim).collect();
        if f.len() > 5 || f.first().is_none_or(|x| x.is_empty()) {
            bail!(
                "--instrument {text:?}: give ROLE|MODEL|SERIAL|CALIBRATED|SENSITIVITY (the role \
                 first; later fields may be left out)"
            );
        }
        let get = |i: usize| f.get(i).map_or(String::new(), |x| x.to_string());
        r.instruments.push(crate::session::Instrument {
            role: get(0),
            model: get(1),
            serial: get(2),
            calibrated: get(3),
            sensitivity: get(4),
        });
    }
    s.manifest
        .check()
        .map_err(|m| anyhow!("{}: {m}", a.session.display()))?;
    s.save()?;
    let r = &s.manifest.report;
    println!("tested by: {}", r.operator);
    println!("reviewed by: {}", r.reviewer);
    println!("site: {}", r.site);
    println!("test date: {}", r.test_date);
    println!("part held by: {}", r.support);
    println!("conditioning: {}", r.conditioning);
    for i in &r.instruments {
        println!(
            "instrument: {} | {} | {} | {} | {}",
            i.role, i.model, i.serial, i.calibrated, i.sensitivity
        );
    }
    println!("saved in {}", a.session.display());
    Ok(())
}
