//! A WAV set: a folder with one WAV file per station and an optional `stations.csv`.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::InputError;
use super::wav::{WavInfo, probe};

/// Where a station's position came from.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum PositionSource {
    /// Read from `stations.csv`.
    Csv,
    /// Station number × spacing: an assumption, flagged in results.
    Spacing,
}

/// One station of a WAV set.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct StationFile {
    /// Station number (trailing integer of the file stem).
    pub station: u32,
    /// Position along the part, metres.
    pub position_m: f64,
    /// Where the position came from.
    pub position_source: PositionSource,
    /// The recording.
    pub path: PathBuf,
    /// Its header.
    pub info: WavInfo,
}

/// A scanned WAV set.
#[derive(Debug, Clone, PartialEq)]
pub struct WavSet {
    /// The folder.
    pub dir: PathBuf,
    /// Stations in ascending order.
    pub stations: Vec<StationFile>,
    /// Common sample rate, Hz.
    pub sample_rate_hz: u32,
}

/// The trailing integer of a file stem: `station-07` → 7, `run2_st07` → 7, `p7` → 7.
pub fn station_number(stem: &str) -> Option<u32> {
    let digits: String = stem
        .chars()
        .rev()
        .take_while(|c| c.is_ascii_digit())
        .collect::<Vec<_>>()
        .into_iter()
        .rev()
        .collect();
    if digits.is_empty() {
        None
    } else {
        digits.parse().ok()
    }
}

/// Reads `stations.csv` (header `station,position_m`; further columns are ignored).
pub fn read_stations_csv(path: &Path) -> Result<BTreeMap<u32, f64>, InputError> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| InputError::new(path, format!("cannot read: {e}")))?;
    parse_stations_csv(path, &text)
}

/// [`read_stations_csv`] of text already read (`path` names it in errors).
pub fn parse_stations_csv(path: &Path, text: &str) -> Result<BTreeMap<u32, f64>, InputError> {
    // Spreadsheet programs often save CSV with a byte-order mark.
    let text = text.trim_start_matches('\u{feff}');
    let mut lines = text
        .lines()
        .enumerate()
        .filter(|(_, l)| !l.trim().is_empty());
    let header: Vec<String> = match lines.next() {
        Some((_, h)) => h
            .split(',')
            .map(|s| s.trim().to_ascii_lowercase())
            .collect(),
        None => {
            return Err(InputError::new(
                path,
                "is empty; expected header station,position_m",
            ));
        }
    };
    let col = |name: &str| header.iter().position(|h| h == name);
    let (Some(ci), Some(pi)) = (col("station"), col("position_m")) else {
        return Err(InputError::new(
            path,
            format!(
                "header must name columns station and position_m, found {:?}",
                header.join(",")
            ),
        ));
    };
    let mut out = BTreeMap::new();
    for (n, line) in lines {
        let cells: Vec<&str> = line.split(',').map(str::trim).collect();
        let get = |i: usize| cells.get(i).copied().unwrap_or("");
        let st: u32 = get(ci).parse().map_err(|_| {
            InputError::new(
                path,
                format!(
                    "line {}: station {:?} is not a whole number",
                    n + 1,
                    get(ci)
                ),
            )
        })?;
        let x: f64 = get(pi)
            .parse()
            .ok()
            .filter(|v: &f64| v.is_finite())
            .ok_or_else(|| {
                InputError::new(
                    path,
                    format!("line {}: position_m {:?} is not a number", n + 1, get(pi)),
                )
            })?;
        if out.insert(st, x).is_some() {
            return Err(InputError::new(
                path,
                format!("line {}: station {st} is listed twice", n + 1),
            ));
        }
    }
    Ok(out)
}

impl WavSet {
    /// Scans `dir`: one WAV per station, same sample rate throughout.
    pub fn scan(dir: &Path, spacing_m: f64) -> Result<Self, InputError> {
        let entries = std::fs::read_dir(dir)
            .map_err(|e| InputError::new(dir, format!("cannot open folder: {e}")))?;
        let mut by_station: BTreeMap<u32, PathBuf> = BTreeMap::new();
        let mut names: Vec<PathBuf> = Vec::new();
        for e in entries {
            let e = e.map_err(|e| InputError::new(dir, format!("cannot list folder: {e}")))?;
            let p = e.path();
            let is_wav = p
                .extension()
                .and_then(|x| x.to_str())
                .is_some_and(|x| x.eq_ignore_ascii_case("wav"));
            if is_wav && p.is_file() {
                names.push(p);
            }
        }
        names.sort();
        for p in names {
            let stem = p.file_stem().and_then(|s| s.to_str()).unwrap_or("");
            let Some(st) = station_number(stem) else {
                return Err(InputError::new(
                    &p,
                    "file name has no station number (expected a trailing integer, e.g. station-07.wav)",
                ));
            };
            if let Some(prev) = by_station.insert(st, p.clone()) {
                return Err(InputError::new(
                    &p,
                    format!("station {st} is recorded twice: also in {}", prev.display()),
                ));
            }
        }
        if by_station.is_empty() {
            return Err(InputError::new(
                dir,
                "holds no .wav files (a WAV set has one WAV file per station)",
            ));
        }
        let csv_path = dir.join("stations.csv");
        let positions = if csv_path.is_file() {
            Some(read_stations_csv(&csv_path)?)
        } else {
            None
        };
        let mut stations = Vec::with_capacity(by_station.len());
        let mut rate: Option<(u32, PathBuf)> = None;
        for (st, path) in by_station {
            let info = probe(&path)?;
            match &rate {
                None => rate = Some((info.sample_rate_hz, path.clone())),
                Some((r, first)) if *r != info.sample_rate_hz => {
                    return Err(InputError::new(
                        &path,
                        format!(
                            "sample rate {} Hz differs from {} Hz in {}; a set needs one rate",
                            info.sample_rate_hz,
                            r,
                            first.display()
                        ),
                    ));
                }
                _ => {}
            }
            let (position_m, position_source) = match &positions {
                Some(map) => match map.get(&st) {
                    Some(x) => (*x, PositionSource::Csv),
                    None => {
                        return Err(InputError::new(
                            &csv_path,
                            format!("has no position for station {st} ({})", path.display()),
                        ));
                    }
                },
                None => (st as f64 * spacing_m, PositionSource::Spacing),
            };
            stations.push(StationFile {
                station: st,
                position_m,
                position_source,
                path,
                info,
            });
        }
        let sample_rate_hz = rate.map(|r| r.0).unwrap_or(0);
        Ok(Self {
            dir: dir.to_path_buf(),
            stations,
            sample_rate_hz,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::station_number;

    #[test]
    fn trailing_integer() {
        assert_eq!(station_number("station-07"), Some(7));
        assert_eq!(station_number("p7"), Some(7));
        assert_eq!(station_number("run2_st07"), Some(7));
        assert_eq!(station_number("run2_st"), None);
        assert_eq!(station_number("12"), Some(12));
    }
}
