//! The rotor file: the shaft JSON `tapgrid model` reads, plus bearings with eight coefficients
//! (constant, tabulated against speed, or a plain bearing's geometry), unbalances and an
//! optional operating speed range. Every bad key or value is an error naming the file and the
//! item.

use std::path::Path;

use serde_json::{Map, Value};

use super::bearing::{BearingLaw, Coefficients, FilmMethod, PlainBearing};
use super::model::{PlacedBearing, Rotor, Unbalance};
use crate::acquire::InputError;
use crate::model::beam::Shaft;

/// A rotor file's content.
#[derive(Debug, Clone, PartialEq)]
pub struct RotorFile {
    /// The rotor.
    pub rotor: Rotor,
    /// Operating speed range, rpm, if the file gives one.
    pub operating_range_rpm: Option<[f64; 2]>,
    /// The file's service part (bearings, unbalances, range) in its own keys, as a study keeps
    /// it; `Null` for a rotor built from a study's plain springs.
    pub service: Value,
}

const SHAFT_KEYS: [&str; 4] = ["material", "sections", "discs", "supports"];
const TOP_KEYS: [&str; 5] = [
    "bearings",
    "unbalances",
    "operating_range_rpm",
    "name",
    "notes",
];
const COEFFS: [&str; 8] = ["kxx", "kxy", "kyx", "kyy", "cxx", "cxy", "cyx", "cyy"];

/// Reads and checks a rotor file.
pub fn read_rotor(path: &Path) -> Result<RotorFile, InputError> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| InputError::new(path, format!("cannot read: {e}")))?;
    parse_rotor(path, &text)
}

/// [`read_rotor`] of text already read (`path` names it in errors).
pub fn parse_rotor(path: &Path, text: &str) -> Result<RotorFile, InputError> {
    let err = |m: String| InputError::new(path, m);
    let value: Value =
        serde_json::from_str(text).map_err(|e| err(format!("is not valid JSON: {e}")))?;
    let Value::Object(top) = value else {
        return Err(err("must hold a JSON object (a shaft with bearings)".into()));
    };
    for key in top.keys() {
        if !SHAFT_KEYS.contains(&key.as_str()) && !TOP_KEYS.contains(&key.as_str()) {
            return Err(err(format!(
                "unknown key {key:?} (a rotor file has {} and {})",
                SHAFT_KEYS.join(", "),
                TOP_KEYS.join(", ")
            )));
        }
    }
    let shaft_part: Map<String, Value> = top
        .iter()
        .filter(|(k, _)| SHAFT_KEYS.contains(&k.as_str()))
        .map(|(k, v)| (k.clone(), v.clone()))
        .collect();
    let shaft: Shaft = serde_json::from_value(Value::Object(shaft_part))
        .map_err(|e| err(format!("is not a valid shaft model: {e}")))?;
    shaft.validate().map_err(err)?;
    let mut bearings = Vec::new();
    if let Some(list) = top.get("bearings") {
        let Value::Array(list) = list else {
            return Err(err("\"bearings\" must be a list".into()));
        };
        for (i, b) in (1..).zip(list) {
            bearings.push(bearing(b).map_err(|m| err(format!("bearing {i}: {m}")))?);
        }
    }
    let mut unbalances = Vec::new();
    if let Some(list) = top.get("unbalances") {
        let Value::Array(list) = list else {
            return Err(err("\"unbalances\" must be a list".into()));
        };
        for (i, u) in (1..).zip(list) {
            unbalances.push(unbalance(u).map_err(|m| err(format!("unbalance {i}: {m}")))?);
        }
    }
    let operating_range_rpm = match top.get("operating_range_rpm") {
        None | Some(Value::Null) => None,
        Some(v) => {
            let r = numbers(v).map_err(|m| err(format!("operating_range_rpm: {m}")))?;
            match r.as_slice() {
                [lo, hi] if *lo > 0.0 && hi >= lo && *hi < 1e7 => Some([*lo, *hi]),
                _ => {
                    return Err(err(
                        "operating_range_rpm must be [lowest, highest] rpm, 0 < lowest ≤ highest"
                            .into(),
                    ));
                }
            }
        }
    };
    let rotor = Rotor {
        shaft,
        bearings,
        unbalances,
    };
    rotor.validate().map_err(err)?;
    Ok(RotorFile {
        rotor,
        operating_range_rpm,
        service: service_part(&Value::Object(top)),
    })
}

fn number(v: &Value, what: &str) -> Result<f64, String> {
    v.as_f64()
        .filter(|x| x.is_finite())
        .ok_or_else(|| format!("{what} must be a number, not {v}"))
}

fn numbers(v: &Value) -> Result<Vec<f64>, String> {
    let Value::Array(a) = v else {
        return Err(format!("must be a list of numbers, not {v}"));
    };
    a.iter().map(|x| number(x, "every entry")).collect()
}

fn object(v: &Value) -> Result<&Map<String, Value>, String> {
    v.as_object()
        .ok_or_else(|| format!("must be an object, not {v}"))
}

fn bearing(v: &Value) -> Result<PlacedBearing, String> {
    let o = object(v)?;
    let position_m = number(
        o.get("position_m")
            .ok_or("has no \"position_m\" (its place along the shaft, m)")?,
        "position_m",
    )?;
    let law = if let Some(t) = o.get("two_lobe") {
        for k in o.keys() {
            if !["position_m", "two_lobe"].contains(&k.as_str()) {
                return Err(format!(
                    "unknown key {k:?} beside \"two_lobe\" (position_m, two_lobe)"
                ));
            }
        }
        let mut g = object(t).map_err(|m| format!("\"two_lobe\" {m}"))?.clone();
        let preload = number(
            &g.remove("preload")
                .ok_or("\"two_lobe\" needs \"preload\" (1 − set clearance / lobe clearance)")?,
            "preload",
        )?;
        let groove = match g.remove("groove_arc_deg") {
            None => 20.0,
            Some(v) => number(&v, "groove_arc_deg")?,
        };
        let mut plain: PlainBearing = serde_json::from_value(Value::Object(g)).map_err(|e| {
            format!(
                "\"two_lobe\" needs diameter_m, length_m, clearance_m (the lobes'), \
                 viscosity_pa_s, load_n and preload: {e}"
            )
        })?;
        plain.two_lobe = Some(super::bearing::TwoLobe {
            preload,
            groove_arc_deg: groove,
        });
        plain.validate()?;
        BearingLaw::Plain(plain, FilmMethod::Finite)
    } else if let Some(p) = o.get("plain") {
        for k in o.keys() {
            if !["position_m", "plain", "method"].contains(&k.as_str()) {
                return Err(format!(
                    "unknown key {k:?} beside \"plain\" (position_m, plain, method)"
                ));
            }
        }
        let plain: PlainBearing = serde_json::from_value(p.clone()).map_err(|e| {
            format!(
                "\"plain\" needs diameter_m, length_m, clearance_m, viscosity_pa_s and load_n: {e}"
            )
        })?;
        plain.validate()?;
        let method = match o.get("method").map(|m| m.as_str()) {
            None | Some(Some("short")) => FilmMethod::Short,
            Some(Some("finite")) => FilmMethod::Finite,
            Some(_) => return Err("\"method\" must be \"short\" or \"finite\"".into()),
        };
        BearingLaw::Plain(plain, method)
    } else {
        for k in o.keys() {
            if k != "position_m" && k != "speeds_rpm" && !COEFFS.contains(&k.as_str()) {
                return Err(format!(
                    "unknown key {k:?} (position_m, speeds_rpm, {} or plain)",
                    COEFFS.join(", ")
                ));
            }
        }
        if !COEFFS.iter().any(|k| o.contains_key(*k)) {
            return Err("has no coefficients (kxx … cyy) and no \"plain\" geometry".into());
        }
        let check = |name: &str, x: f64| -> Result<f64, String> {
            let limit = if name.starts_with('k') { 1e13 } else { 1e11 };
            if x.abs() <= limit {
                Ok(x)
            } else {
                Err(format!(
                    "{name} = {x} is beyond any bearing (|{name}| ≤ {limit:e})"
                ))
            }
        };
        let at = |vals: &[f64; 8]| Coefficients {
            k_n_per_m: [[vals[0], vals[1]], [vals[2], vals[3]]],
            c_n_s_per_m: [[vals[4], vals[5]], [vals[6], vals[7]]],
        };
        if let Some(s) = o.get("speeds_rpm") {
            let speeds = numbers(s).map_err(|m| format!("speeds_rpm {m}"))?;
            if speeds.is_empty() {
                return Err("speeds_rpm is empty".into());
            }
            if speeds.windows(2).any(|w| w[1] <= w[0]) || speeds[0] < 0.0 {
                return Err("speeds_rpm must rise strictly from ≥ 0".into());
            }
            let mut cols = Vec::new();
            for name in COEFFS {
                cols.push(match o.get(name) {
                    None => vec![0.0; speeds.len()],
                    Some(v) => {
                        let c = numbers(v).map_err(|m| format!("{name} {m}"))?;
                        if c.len() != speeds.len() {
                            return Err(format!(
                                "{name} has {} values for {} speeds",
                                c.len(),
                                speeds.len()
                            ));
                        }
                        c.into_iter()
                            .map(|x| check(name, x))
                            .collect::<Result<_, _>>()?
                    }
                });
            }
            let table = speeds
                .iter()
                .enumerate()
                .map(|(i, &n)| {
                    let mut vals = [0.0; 8];
                    for (j, c) in cols.iter().enumerate() {
                        vals[j] = c[i];
                    }
                    (n, at(&vals))
                })
                .collect();
            BearingLaw::Table(table)
        } else {
            let mut vals = [0.0; 8];
            for (j, name) in COEFFS.iter().enumerate() {
                if let Some(v) = o.get(*name) {
                    if v.is_array() {
                        return Err(format!(
                            "{name} is a list but there is no \"speeds_rpm\" to tabulate it against"
                        ));
                    }
                    vals[j] = check(name, number(v, name)?)?;
                }
            }
            BearingLaw::Constant(at(&vals))
        }
    };
    Ok(PlacedBearing { position_m, law })
}

fn unbalance(v: &Value) -> Result<Unbalance, String> {
    let o = object(v)?;
    for k in o.keys() {
        if !["position_m", "amount_kg_m", "angle_deg"].contains(&k.as_str()) {
            return Err(format!(
                "unknown key {k:?} (position_m, amount_kg_m, angle_deg)"
            ));
        }
    }
    let get = |k: &str| -> Result<f64, String> {
        number(o.get(k).ok_or_else(|| format!("has no {k:?}"))?, k)
    };
    Ok(Unbalance {
        position_m: get("position_m")?,
        amount_kg_m: get("amount_kg_m")?,
        angle_deg: match o.get("angle_deg") {
            None => 0.0,
            Some(v) => number(v, "angle_deg")?,
        },
    })
}

/// The keys of a rotor file that describe the service, not the shaft.
pub fn service_part(file_text_value: &Value) -> Value {
    let mut m = Map::new();
    if let Value::Object(o) = file_text_value {
        for k in ["bearings", "unbalances", "operating_range_rpm"] {
            if let Some(v) = o.get(k) {
                m.insert(k.to_string(), v.clone());
            }
        }
    }
    Value::Object(m)
}

/// The rotor in service of a model study: the tested shaft without its bench suspension, with
/// the study's service rotor (bearings, unbalances, range), or else its bearings in service as
/// undamped isotropic springs and its running speed. `None` when the study gives no bearings.
pub fn from_study(study: &crate::model::study::Study) -> Result<Option<RotorFile>, String> {
    let mut shaft = study.shaft.clone();
    shaft.supports.clear();
    let rotor_of = |service: &Value| -> Result<RotorFile, String> {
        let Value::Object(o) = service_part(service) else {
            unreachable!("service_part returns an object")
        };
        let mut top = match serde_json::to_value(&shaft) {
            Ok(Value::Object(m)) => m,
            _ => return Err("the shaft model could not be written as JSON".into()),
        };
        top.extend(o);
        parse_rotor(Path::new("service rotor"), &Value::Object(top).to_string())
            .map_err(|e| e.problem)
    };
    if let Some(v) = &study.rotor {
        return rotor_of(v).map(Some);
    }
    if study.bearings.is_empty() {
        return Ok(None);
    }
    let rotor = Rotor {
        bearings: study
            .bearings
            .iter()
            .map(|b| PlacedBearing {
                position_m: b.position_m,
                law: BearingLaw::Constant(Coefficients::isotropic(b.stiffness_n_per_m, 0.0)),
            })
            .collect(),
        shaft,
        unbalances: Vec::new(),
    };
    rotor.validate()?;
    Ok(Some(RotorFile {
        rotor,
        operating_range_rpm: study.running_speed_rpm,
        service: Value::Null,
    }))
}
