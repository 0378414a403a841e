//! Residues and shapes of the chosen poles: pole refinement, LSFD over the band and around each
//! mode, damping corrections and notes.

use super::peak::local_damping;
use super::*;

/// LSFD residues, shapes and synthesized FRFs for chosen poles (index into `stab.poles`, and the
/// number of orders its cluster was stable over).
pub(super) fn fit_chosen(
    set: &FrfSet,
    res: &mut ModalResult,
    stab: &Stabilization,
    w: &[Vec<f64>],
    chosen: &[(usize, usize)],
    refine: bool,
) -> Result<(), String> {
    let poles = &stab.poles;
    let mut lambdas: Vec<Complex64> = chosen.iter().map(|c| poles[c.0].lambda).collect();
    if refine {
        // Local weights: signal-to-noise from coherence, each station scaled by its largest |H|,
        // so that the fit near a peak follows the peak (no 1/|H| relative weighting there).
        let local: Vec<Vec<f64>> = set
            .h
            .iter()
            .zip(&set.coherence)
            .map(|(h, c)| {
                let top = h
                    .iter()
                    .fold(0.0f64, |m, v| m.max(v.norm()))
                    .max(f64::MIN_POSITIVE);
                c.iter()
                    .map(|&g| {
                        let g = g.clamp(1e-3, 1.0 - 1e-6);
                        (g / (1.0 - g)).sqrt() / top
                    })
                    .collect()
            })
            .collect();
        refine::refine_poles(&set.freq_hz, &set.h, &local, &mut lambdas, set.exp_tau_s);
    }
    let hs: Vec<&[Complex64]> = set.h.iter().map(Vec::as_slice).collect();
    let ws: Vec<&[f64]> = w.iter().map(Vec::as_slice).collect();
    let close_to_another = |pi: usize| {
        chosen.iter().any(|&(o, _)| {
            o != pi && (poles[o].frequency_hz / poles[pi].frequency_hz - 1.0).abs() < 0.02
        })
    };
    // Each pole as measured (through the exponential window) and corrected for it.
    let measured: Vec<[f64; 4]> = lambdas
        .iter()
        .map(|l| {
            let (f, z) = (l.norm() / TAU_F, -l.re / l.norm());
            let (fc, zc) = correct_damping(f, z, set.exp_tau_s);
            [f, z, fc, zc]
        })
        .collect();
    let modes: Vec<usize> = (0..chosen.len()).collect();
    // The fit over the whole band on one thread; each mode's local residues and damping checks,
    // independent of it and of each other, on the others.
    let (fits, local) = std::thread::scope(|scope| {
        let global =
            scope.spawn(|| lsfd::fit_outputs(&set.freq_hz, &hs, &ws, &lambdas, set.exp_tau_s));
        // A mode's local band (±10 %), and its cost, grows with its frequency.
        let local = crate::numeric::par_map_dearest_first(
            &modes,
            |&r| measured[r][0],
            |&r| {
                let checks = if close_to_another(chosen[r].0) {
                    (None, None)
                } else {
                    local_damping(set, measured[r][2])
                };
                (local_residues(set, w, &lambdas, r), checks)
            },
        );
        let global = match global.join() {
            Ok(g) => g,
            Err(p) => std::panic::resume_unwind(p),
        };
        (global, local)
    });
    let fits =
        fits.map_err(|o| format!("station {}: the residue fit is singular", set.stations[o]))?;
    for ((r, &(pi, size)), (raw, (hp, cf))) in chosen.iter().enumerate().zip(local) {
        let raw: Vec<Complex64> =
            raw.unwrap_or_else(|| fits.iter().map(|f| f.residues[r]).collect());
        let [f_meas, z_meas, fc, zc] = measured[r];
        let close = close_to_another(pi);
        let mut notes = Vec::new();
        if close {
            notes.push("closely spaced pair: resolved by the global fit".to_string());
        }
        let m = mpc(&raw);
        if m < 0.9 {
            notes.push(format!(
                "complex shape (MPC {m:.2}): check for noise or a neighbouring mode"
            ));
        }
        res.modes.push(Mode {
            frequency_hz: fc,
            damping_ratio: Some(zc),
            method: Method::Lscf,
            damping_source: Some(DampingSource::Pole),
            mpc: m,
            mpd_deg: mean_phase_deviation_deg(&raw),
            shape: normalise(&raw, set.reference),
            measured_frequency_hz: f_meas,
            measured_damping_ratio: Some(z_meas),
            stable_orders: size,
            damping_half_power: hp,
            damping_circle_fit: cf,
            notes,
        });
    }
    res.fit_error = fits.iter().map(|f| f.fit_error).collect();
    res.synthesized = fits.into_iter().map(|f| f.synthesized).collect();
    Ok(())
}

/// Residues of pole `r` from an LSFD over a band around it (±10 % or ±30 lines, whichever is
/// wider), with the poles inside that band and local residuals. Over a wide band the global fit's
/// weights (1/σ_H from coherence) let the cleanest lines dominate, and a low mode's residue is
/// then decided by its faint tail far above it; near its own peak it is decided by its peak.
/// `None` when the band is too narrow for the fit or a station's fit is singular.
pub(super) fn local_residues(
    set: &FrfSet,
    w: &[Vec<f64>],
    lambdas: &[Complex64],
    r: usize,
) -> Option<Vec<Complex64>> {
    let f = lambdas[r].norm() / TAU_F;
    let half = (0.1 * f).max(30.0 * set.df_hz);
    let (lo, hi) = (f - half, f + half);
    let k0 = set.freq_hz.partition_point(|&x| x < lo);
    let k1 = set.freq_hz.partition_point(|&x| x <= hi);
    let inside: Vec<usize> = (0..lambdas.len())
        .filter(|&q| {
            let g = lambdas[q].norm() / TAU_F;
            g >= lo && g <= hi
        })
        .collect();
    let at = inside.iter().position(|&q| q == r)?;
    let local: Vec<Complex64> = inside.iter().map(|&q| lambdas[q]).collect();
    if k1 < k0 + 4 * (2 * local.len() + 2) {
        return None;
    }
    let hs: Vec<&[Complex64]> = set.h.iter().map(|h| &h[k0..k1]).collect();
    let ws: Vec<&[f64]> = w.iter().map(|wo| &wo[k0..k1]).collect();
    lsfd::fit_outputs(&set.freq_hz[k0..k1], &hs, &ws, &local, set.exp_tau_s)
        .ok()
        .map(|fits| fits.iter().map(|fit| fit.residues[at]).collect())
}
