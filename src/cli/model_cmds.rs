//! Commands on the shaft model: its modes, its correlation with a test, running-speed margins.

use super::test_cmds::fitted;
use super::*;

/// A shaft model from a JSON file, or the model saved in a session folder.
pub(super) fn read_study(path: &Path) -> Result<crate::model::study::Study> {
    if crate::session::Session::is_session(path) {
        let s = crate::session::Session::open(path)?;
        return s.manifest.model.ok_or_else(|| {
            anyhow!(
                "{}: the session has no shaft model (save one with `tapgrid model SHAFT.json \
                 --into {}`)",
                path.display(),
                path.display()
            )
        });
    }
    if path.is_dir() {
        bail!(
            "{}: is a folder but not a tapgrid session; give a shaft model JSON file or a \
             session holding one",
            path.display()
        );
    }
    // One read: a shaft model, or a rotor file whose service part (bearings, unbalances,
    // range) comes along, checked.
    let text = std::fs::read_to_string(path)
        .map_err(|e| crate::acquire::InputError::new(path, format!("cannot read: {e}")))?;
    let mut study = crate::model::study::Study::new(crate::model::run::parse_shaft(path, &text)?);
    if let Ok(value) = serde_json::from_str::<serde_json::Value>(&text)
        && ["bearings", "unbalances", "operating_range_rpm"]
            .iter()
            .any(|k| value.get(k).is_some())
    {
        let file = crate::rotor::file::parse_rotor(path, &text)?;
        study.rotor = Some(file.service);
        study.running_speed_rpm = study.running_speed_rpm.or(file.operating_range_rpm);
    }
    Ok(study)
}

pub(super) fn model(a: ModelArgs) -> Result<()> {
    use crate::model::run;
    let shaft = read_study(&a.shaft)?.shaft;
    if let Some(dir) = &a.into {
        let _lock = crate::session::lock::SessionLock::acquire(dir, "model --into", LOCK_WAIT)?;
        let mut s = crate::session::Session::open(dir)?;
        match &mut s.manifest.model {
            Some(st) => st.shaft = shaft.clone(),
            None => s.manifest.model = Some(crate::model::study::Study::new(shaft.clone())),
        }
        s.save()?;
        println!("saved the shaft model in {}", dir.display());
        if a.out.is_none() {
            return Ok(());
        }
    }
    let Some(out) = &a.out else {
        bail!("give --out DIR (or --into SESSION)");
    };
    if a.modes == 0 || a.modes > 200 {
        bail!("--modes must be between 1 and 200");
    }
    let stations = match &a.stations {
        Some(p) => crate::acquire::wavset::read_stations_csv(p)?,
        None => Default::default(),
    };
    let length = shaft.length_m();
    for (st, x) in &stations {
        if !(0.0..=length + 1e-9).contains(x) {
            bail!(
                "{}: station {st} at {x} m lies outside the part (0 to {length} m)",
                a.stations
                    .as_ref()
                    .map(|p| p.display().to_string())
                    .unwrap_or_default()
            );
        }
    }
    let at: Vec<f64> = stations.values().copied().collect();
    let c = run::converged_modes(
        &shaft,
        crate::model::beam::BeamTheory::Timoshenko,
        a.modes,
        &at,
    )
    .map_err(|m| anyhow!("{}: {m}", a.shaft.display()))?;
    std::fs::create_dir_all(out)
        .with_context(|| format!("{}: cannot create folder", out.display()))?;
    let path = out.join("modes.json");
    crate::atomic::write_bytes(&path, run::modes_json(&c, &stations).as_bytes())
        .with_context(|| format!("{}: cannot write", path.display()))?;
    println!(
        "{} elements (last refinement changed the frequencies by {:.1e})",
        c.elements, c.last_change
    );
    println!("mode  frequency_hz  kind");
    for (i, m) in c.modes.iter().enumerate() {
        println!(
            "{:4}  {:12.3}  {}",
            i + 1,
            m.frequency_hz,
            if m.rigid_body {
                "rigid body"
            } else {
                "flexible"
            }
        );
    }
    println!("wrote {}", path.display());
    if let Some(r) = &a.stiffness_map {
        let (lo, hi) = colon_range(r, "stiffness-map")?;
        let map = crate::model::correlate::stiffness_map(&shaft, [lo, hi], 25, a.modes)
            .map_err(|m| anyhow!("{}: {m}", a.shaft.display()))?;
        let mut csv = String::from("stiffness_n_per_m");
        for i in 0..a.modes {
            csv.push_str(&format!(",mode{}_hz", i + 1));
        }
        csv.push('\n');
        for (k, f) in &map {
            csv.push_str(&format!("{k:.6e}"));
            for v in f {
                csv.push_str(&format!(",{v:.4}"));
            }
            csv.push('\n');
        }
        let p = out.join("stiffness_map.csv");
        crate::atomic::write_bytes(&p, csv.as_bytes())
            .with_context(|| format!("{}: cannot write", p.display()))?;
        println!("wrote {}", p.display());
    }
    println!("note: undamped bending modes without gyroscopic effects; advisory only");
    Ok(())
}

/// `LO:HI` as two numbers.
pub(super) fn colon_range(text: &str, what: &str) -> Result<(f64, f64)> {
    let (a, b) = text
        .split_once(':')
        .ok_or_else(|| anyhow!("--{what}: give LO:HI, got {text:?}"))?;
    let p = |v: &str| {
        v.trim()
            .parse::<f64>()
            .map_err(|_| anyhow!("--{what}: cannot read {v:?} in {text:?}"))
    };
    Ok((p(a)?, p(b)?))
}

pub(super) fn correlate(a: CorrelateArgs) -> Result<()> {
    let model_path = a.model.clone().unwrap_or_else(|| a.input.clone());
    let mut study = read_study(&model_path)?;
    study.min_mac = a.min_mac;
    let (_, test) = fitted(&a.input, &a.setup)?;
    let r = crate::pipeline::study(&study, Some(&test)).map_err(|e| {
        anyhow!(
            "{} against {}: {e}",
            a.input.display(),
            model_path.display()
        )
    })?;
    let c = r
        .correlation
        .unwrap_or(crate::model::correlate::Correlation {
            pairs: Vec::new(),
            mac: Vec::new(),
            unpaired_test: Vec::new(),
            unpaired_model: Vec::new(),
        });
    println!("test  model  test_hz     model_hz    diff_%   MAC");
    for p in &c.pairs {
        println!(
            "{:4}  {:5}  {:10.2}  {:10.2}  {:+7.2}  {:.3}",
            p.test + 1,
            p.model + 1,
            p.test_hz,
            p.model_hz,
            p.difference_pct,
            p.mac
        );
    }
    for &i in &c.unpaired_test {
        println!(
            "test mode {} ({:.2} Hz): no model mode with MAC ≥ {}",
            i + 1,
            test.modes[i].0,
            a.min_mac
        );
    }
    for &j in &r.missed_in_band {
        println!(
            "model mode {} ({:.2} Hz): inside the tested band but not found in the test",
            j + 1,
            r.tested.modes[j].frequency_hz
        );
    }
    if let Some(out) = &a.out {
        std::fs::create_dir_all(out)
            .with_context(|| format!("{}: cannot create folder", out.display()))?;
        let p = out.join("correlation.json");
        let text = serde_json::to_string_pretty(&c).unwrap_or_default();
        crate::atomic::write_bytes(&p, text.as_bytes())
            .with_context(|| format!("{}: cannot write", p.display()))?;
        println!("wrote {}", p.display());
    }
    Ok(())
}

pub(super) fn margin(a: MarginArgs) -> Result<()> {
    use crate::model::margin::{MarginRule, Side, check};
    use crate::model::study::ResonanceSource;
    let study = a.model.as_deref().map(read_study).transpose()?;
    let (lo, hi) = match (&a.speed, study.as_ref().and_then(|s| s.running_speed_rpm)) {
        (Some(t), _) => colon_range(t, "speed")?,
        (None, Some([lo, hi])) => (lo, hi),
        (None, None) => bail!("give the operating range with --speed MIN:MAX (rpm)"),
    };
    if !(lo.is_finite() && hi.is_finite() && lo > 0.0 && hi >= lo) {
        bail!("--speed: give MIN:MAX rpm with 0 < MIN ≤ MAX");
    }
    // The rule and orders: those given, else the model study's (as the report and the window
    // use them), else the defaults.
    let base = study.as_ref().map(|s| s.rule).unwrap_or_default();
    let rule = MarginRule {
        af_threshold: a.af_threshold.unwrap_or(base.af_threshold),
        below_cap_pct: a.below_cap.unwrap_or(base.below_cap_pct),
        above_cap_pct: a.above_cap.unwrap_or(base.above_cap_pct),
        ..base
    };
    for (v, name) in [
        (rule.af_threshold, "af-threshold"),
        (rule.below_cap_pct, "below-cap"),
        (rule.above_cap_pct, "above-cap"),
    ] {
        if !(v.is_finite() && (0.0..=1000.0).contains(&v)) {
            bail!("--{name}: give a number between 0 and 1000, got {v}");
        }
    }
    let orders: Vec<u32> = match &a.orders {
        Some(t) => t
            .split(',')
            .map(|x| {
                x.trim()
                    .parse()
                    .ok()
                    .filter(|o| (1..=100).contains(o))
                    .ok_or_else(|| anyhow!("--orders: cannot read {x:?} (orders 1 to 100)"))
            })
            .collect::<Result<_>>()?,
        None => study
            .as_ref()
            .map(|s| s.orders.clone())
            .filter(|o| !o.is_empty())
            .unwrap_or_else(|| vec![1, 2]),
    };
    let mut lines: Vec<(&str, crate::model::margin::MarginCheck)> = Vec::new();
    if let Some(t) = &a.modes {
        let mut given: Vec<(f64, Option<f64>)> = Vec::new();
        for item in t.split(',').filter(|x| !x.trim().is_empty()) {
            let mut it = item.split(':');
            let f: f64 = it
                .next()
                .and_then(|v| v.trim().parse().ok())
                .filter(|f: &f64| f.is_finite() && *f > 0.0)
                .ok_or_else(|| anyhow!("--modes: cannot read {item:?}; use F or F:ZETA"))?;
            let z: Option<f64> = match it.next() {
                None => None,
                Some(v) => Some(
                    v.trim()
                        .parse()
                        .map_err(|_| anyhow!("--modes: cannot read {item:?}; use F or F:ZETA"))?,
                ),
            };
            if it.next().is_some() || z.is_some_and(|z| !(z.is_finite() && z > 0.0 && z < 1.0)) {
                bail!("--modes: cannot read {item:?}; use F or F:ZETA with 0 < ZETA < 1");
            }
            given.push((f, z));
        }
        lines.extend(
            check(&given, [lo, hi], &orders, &rule)
                .into_iter()
                .map(|c| ("given", c)),
        );
    }
    let test = a
        .test
        .as_ref()
        .map(|t| fitted(t, &a.setup).map(|(_, test)| test))
        .transpose()?;
    match (&study, &a.model) {
        (Some(st), Some(p)) => {
            // The model study decides the model's resonances and the measured ones' lines, with
            // the range, rule and orders above: the same lines as the report and the window.
            let mut st = st.clone();
            st.running_speed_rpm = Some([lo, hi]);
            st.rule = rule;
            st.orders = orders.clone();
            let r = crate::pipeline::study(&st, test.as_ref())
                .map_err(|e| anyhow!("{}: {e}", p.display()))?;
            for l in r.margins {
                let source = match l.source {
                    ResonanceSource::Measured => "measured",
                    ResonanceSource::ModelInService => "model",
                    ResonanceSource::ModelAsTested => "model",
                };
                lines.push((source, l.check));
            }
            for w in &r.warnings {
                println!("note: {w}");
            }
        }
        _ => {
            if let Some(t) = &test {
                let measured: Vec<(f64, Option<f64>)> =
                    t.modes.iter().map(|m| (m.0, m.1)).collect();
                lines.extend(
                    check(&measured, [lo, hi], &orders, &rule)
                        .into_iter()
                        .map(|c| ("measured", c)),
                );
            }
        }
    }
    if lines.is_empty() {
        bail!("give resonances with --modes, --test or --model");
    }
    println!(
        "source    f_hz      order  critical_rpm  AF      side    margin_%  required_%  verdict"
    );
    for (source, c) in &lines {
        let side = match c.side {
            Side::Below => "below",
            Side::Inside => "INSIDE",
            Side::Above => "above",
        };
        println!(
            "{:8}  {:8.2}  {:5}  {:12.0}  {:6.1}  {:6}  {:8.1}  {:10.1}  {}",
            source,
            c.frequency_hz,
            c.order,
            c.critical_rpm,
            c.amplification_factor,
            side,
            c.margin_pct,
            c.required_pct,
            if c.ok { "ok" } else { "TOO CLOSE" }
        );
    }
    println!("{}", crate::cautions::MARGIN_NOTE);
    Ok(())
}

pub(super) fn plan(a: PlanArgs) -> Result<()> {
    use crate::model::beam::{Material, Section, Shaft};
    let (lo, hi) = colon_range(&a.band, "band")?;
    let shaft = match (&a.shaft, a.length, a.diameter) {
        (Some(p), _, _) => read_study(p)?.shaft,
        (None, Some(length), Some(diameter)) => {
            let shaft = Shaft {
                material: match a.material {
                    MaterialArg::Steel => Material::STEEL,
                    MaterialArg::Aluminium => Material::ALUMINIUM,
                },
                sections: vec![Section {
                    length_m: length,
                    outer_diameter_m: diameter,
                    inner_diameter_m: a.bore,
                    material: None,
                }],
                discs: Vec::new(),
                supports: Vec::new(),
            };
            shaft
                .validate()
                .map_err(|m| anyhow!("--length/--diameter/--bore: {m}"))?;
            shaft
        }
        _ => bail!("give a shaft model (JSON or session), or --length and --diameter"),
    };
    let o = crate::model::plan::PlanOptions {
        band_hz: [lo, hi],
        stations: a.stations,
        damping_ratio: a.damping,
        node_fraction: a.node_fraction,
        sample_rate_hz: a.rate,
    };
    let p = crate::model::plan::plan(&shaft, &o).map_err(|m| {
        anyhow!(
            "{}: {m}",
            a.shaft
                .as_ref()
                .map_or("plan".to_string(), |p| p.display().to_string())
        )
    })?;
    print!("{}", crate::model::plan::plan_text(&p));
    if let Some(dir) = &a.out {
        std::fs::create_dir_all(dir)
            .with_context(|| format!("{}: cannot create folder", dir.display()))?;
        let path = dir.join("plan.json");
        crate::atomic::write_bytes(&path, serde_json::to_string_pretty(&p)?.as_bytes())
            .with_context(|| format!("{}: cannot write", path.display()))?;
        println!("wrote {}", path.display());
    }
    println!("{}", crate::cautions::PLAN);
    Ok(())
}
