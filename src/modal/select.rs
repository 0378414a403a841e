//! The automatic choice of poles from the stabilization diagram: clusters of stable poles,
//! physical checks (hum, force nulls, spurious shapes), close pairs.

use super::local::{local_columns, local_poles};
use super::peak::is_hum;
use super::*;

pub(super) struct Cluster {
    members: Vec<usize>,
}

/// Fully stable poles (frequency, damping and shape), clustered by frequency — a gap over 0.2 %
/// starts a new cluster — and split at their widest gap where one model order gives a cluster
/// two poles (two close modes; only for clusters of four or more, so a lone doubled pole of
/// noise does not make two modes). Clusters in ascending frequency; members index `poles`.
pub(super) fn clusters_of_stable_poles(poles: &[Pole]) -> Vec<Cluster> {
    let mut idx: Vec<usize> = (0..poles.len())
        .filter(|&i| poles[i].status == PoleStatus::FrequencyDampingShape)
        .collect();
    idx.sort_by(|&a, &b| poles[a].frequency_hz.total_cmp(&poles[b].frequency_hz));
    let mut clusters: Vec<Cluster> = Vec::new();
    for &i in &idx {
        match clusters.last_mut() {
            Some(c)
                if poles[i].frequency_hz
                    - poles[*c.members.last().expect("clusters are never empty")].frequency_hz
                    <= 0.002 * poles[i].frequency_hz =>
            {
                c.members.push(i)
            }
            _ => clusters.push(Cluster { members: vec![i] }),
        }
    }
    let mut split: Vec<Cluster> = Vec::new();
    while let Some(c) = clusters.pop() {
        let mut orders: Vec<usize> = c.members.iter().map(|&i| poles[i].order).collect();
        orders.sort_unstable();
        let dup = orders.windows(2).any(|w| w[0] == w[1]);
        if dup && c.members.len() >= 4 {
            let (g, _) = c
                .members
                .windows(2)
                .enumerate()
                .map(|(k, w)| (k, poles[w[1]].frequency_hz - poles[w[0]].frequency_hz))
                .fold((0, f64::MIN), |a, b| if b.1 > a.1 { b } else { a });
            let (l, r) = c.members.split_at(g + 1);
            clusters.push(Cluster {
                members: l.to_vec(),
            });
            clusters.push(Cluster {
                members: r.to_vec(),
            });
        } else {
            split.push(c);
        }
    }
    split.sort_by(|a, b| {
        poles[a.members[0]]
            .frequency_hz
            .total_cmp(&poles[b.members[0]].frequency_hz)
    });
    split
}

pub(super) fn lscf_modes(
    set: &FrfSet,
    res: &mut ModalResult,
    s: &ModalSettings,
) -> Result<(), String> {
    let w = set.weights(s.coherence_weighting);
    let fit_order = s.max_order.min(set.freq_hz.len().saturating_sub(2) / 2);
    if fit_order < s.max_order {
        res.warnings.push(format!(
            "the band holds {} lines: model order limited to {fit_order} (asked {})",
            set.freq_hz.len(),
            s.max_order
        ));
    }
    if fit_order < 2 {
        res.warnings
            .push("the band is too narrow for a curve fit".into());
        return Ok(());
    }
    let t0 = std::time::Instant::now();
    let mut stab = lscf::stabilization(&set.freq_hz, &set.h, &w, fit_order, s.criteria)?;
    res.stabilization_seconds = t0.elapsed().as_secs_f64();
    let poles = &stab.poles;
    let split = clusters_of_stable_poles(poles);

    // Candidate modes: the median member of each cluster.
    struct Cand {
        pole: usize,
        size: usize,
    }
    let median = |c: &Cluster| {
        let mut m = c.members.clone();
        m.sort_by(|&a, &b| poles[a].frequency_hz.total_cmp(&poles[b].frequency_hz));
        m[m.len() / 2]
    };
    let mean_gaa: Vec<f64> = (0..set.freq_hz.len())
        .map(|k| set.gaa.iter().map(|g| g[k]).sum::<f64>() / set.gaa.len() as f64)
        .collect();
    let mut sorted_gaa = mean_gaa.clone();
    sorted_gaa.sort_by(f64::total_cmp);
    let gaa_median = sorted_gaa[sorted_gaa.len() / 2];
    let mean_coh: Vec<f64> = (0..set.freq_hz.len())
        .map(|k| set.coherence.iter().map(|c| c[k]).sum::<f64>() / set.coherence.len() as f64)
        .collect();
    let physical_pole = |pole: &Pole| {
        let (fc, zc) = correct_damping(pole.frequency_hz, pole.damping_ratio, set.exp_tau_s);
        let k = set
            .freq_hz
            .partition_point(|&x| x < fc)
            .min(set.freq_hz.len() - 1);
        zc > 1e-5
            && zc < 0.2
            && !is_hum(
                fc,
                zc,
                1.0 / (set.exp_tau_s * 2.0 * std::f64::consts::PI * fc),
                set.df_hz,
                &s.mains_hz,
            )
            // Away from force-spectrum nulls, where H is noise — unless the FRF is coherent
            // there all the same (a resonance past the null that the force still reaches).
            && (mean_gaa[k] > 0.01 * gaa_median || mean_coh[k] >= 0.9)
            && pole.mpc > 0.5
    };
    let physical = |p: usize| physical_pole(&poles[p]);
    let mut cands: Vec<Cand> = match &s.selection {
        // A physical pole stays to the highest orders; a pole that stood for two close modes at
        // low orders vanishes once the model resolves them.
        Selection::Auto => split
            .iter()
            .filter(|c| c.members.len() >= s.min_stable_orders)
            .filter(|c| {
                c.members
                    .iter()
                    .any(|&i| 4 * poles[i].order >= 3 * stab.max_order)
            })
            .map(|c| Cand {
                pole: median(c),
                size: c.members.len(),
            })
            .filter(|c| physical(c.pole))
            .collect(),
        Selection::Count(n) => {
            let mut v: Vec<Cand> = split
                .iter()
                .map(|c| Cand {
                    pole: median(c),
                    size: c.members.len(),
                })
                .filter(|c| physical(c.pole))
                .collect();
            // "Best": well-stabilised modes first (at least the minimum stable orders), and among
            // those the ones standing highest in the Σ|H| indicator.
            let height = |c: &Cand| {
                let f = poles[c.pole].frequency_hz;
                let k = set
                    .freq_hz
                    .partition_point(|&x| x < f)
                    .min(set.freq_hz.len() - 1);
                res.indicators.sum_abs[k]
            };
            v.sort_by(|a, b| {
                let (sa, sb) = (a.size >= s.min_stable_orders, b.size >= s.min_stable_orders);
                sb.cmp(&sa).then(height(b).total_cmp(&height(a)))
            });
            v.truncate(*n);
            v
        }
        Selection::Near(list) => list
            .iter()
            .filter_map(|&target| {
                split
                    .iter()
                    .min_by(|a, b| {
                        (poles[median(a)].frequency_hz - target)
                            .abs()
                            .total_cmp(&(poles[median(b)].frequency_hz - target).abs())
                    })
                    .map(|c| Cand {
                        pole: median(c),
                        size: c.members.len(),
                    })
            })
            .collect(),
    };
    cands.sort_by(|a, b| {
        poles[a.pole]
            .frequency_hz
            .total_cmp(&poles[b.pole].frequency_hz)
    });
    cands.dedup_by_key(|c| c.pole);
    let mut chosen: Vec<(usize, usize)> = cands.iter().map(|c| (c.pole, c.size)).collect();
    let t_local = std::time::Instant::now();
    if s.selection == Selection::Auto {
        // A pole the global fit gave to two close modes (a split pair from two bending planes,
        // widened by the exponential window) shows as two columns over a narrow band.
        let mut splits: Vec<(usize, Vec<(Pole, usize)>)> = Vec::new();
        // A band of ±15 % around each: its cost grows with the frequency.
        let columns = crate::numeric::par_map_dearest_first(
            &chosen,
            |&(pi, _)| poles[pi].frequency_hz,
            |&(pi, _)| local_columns(set, &w, poles[pi].frequency_hz, s, &physical_pole),
        );
        for (ci, (&(pi, _), cols)) in chosen.iter().zip(columns).enumerate() {
            let f = poles[pi].frequency_hz;
            let near: Vec<(Pole, usize)> = cols
                .into_iter()
                .filter(|c| (c.0.frequency_hz / f - 1.0).abs() < 0.015)
                .filter(|c| {
                    !chosen.iter().enumerate().any(|(cj, &(pj, _))| {
                        cj != ci && (poles[pj].frequency_hz / c.0.frequency_hz - 1.0).abs() < 0.003
                    })
                })
                .collect();
            if near.len() >= 2 {
                splits.push((ci, near));
            }
        }
        let found = local_poles(set, &res.indicators, &stab, &chosen, &w, s, &physical_pole);
        for (ci, near) in splits.into_iter().rev() {
            let f = stab.poles[chosen[ci].0].frequency_hz;
            chosen.remove(ci);
            let list: Vec<String> = near
                .iter()
                .map(|c| format!("{:.2}", c.0.frequency_hz))
                .collect();
            res.warnings.push(format!(
                "the pole at {f:.1} Hz of the fit over the whole band stood for {} close modes, \
                 resolved over a narrow band around it (measured {} Hz)",
                near.len(),
                list.join(", ")
            ));
            for (pole, size) in near {
                stab.poles.push(pole);
                chosen.push((stab.poles.len() - 1, size));
            }
        }
        // A resonance the whole-band fit missed may be a member of a pair just split above
        // (local_poles saw only the whole band's pole): it is already chosen.
        let split_hz: Vec<f64> = chosen
            .iter()
            .map(|c| stab.poles[c.0].frequency_hz)
            .collect();
        for (pole, size) in found {
            if split_hz
                .iter()
                .any(|&g| (g / pole.frequency_hz - 1.0).abs() < 0.003)
            {
                continue;
            }
            res.warnings.push(format!(
                "a resonance at {:.1} Hz that the fit over the whole band did not resolve was \
                 fitted over a narrow band around it",
                pole.frequency_hz
            ));
            stab.poles.push(pole);
            chosen.push((stab.poles.len() - 1, size));
        }
        chosen.sort_by(|a, b| {
            stab.poles[a.0]
                .frequency_hz
                .total_cmp(&stab.poles[b.0].frequency_hz)
        });
    }
    if chosen.is_empty() {
        res.warnings
            .push("no stable physical pole was found in the band".into());
    }
    let t_fit = std::time::Instant::now();
    fit_chosen(set, res, &stab, &w, &chosen, s.refine_poles)?;
    if std::env::var_os("TAPGRID_TIMING").is_some() {
        eprintln!(
            "timing: modal local diagrams {:.3} s, refinement and residues {:.3} s",
            (t_fit - t_local).as_secs_f64(),
            t_fit.elapsed().as_secs_f64()
        );
    }
    if s.selection == Selection::Auto {
        // A stable pole whose shape is far from real and whose resonance peak is many times
        // broader than the pole says is not a mode of the part (noise or a leak between
        // stations); automatic choice drops it and says so. A person's choice is kept as made.
        let spurious: Vec<usize> = res
            .modes
            .iter()
            .enumerate()
            .filter(|(_, m)| {
                let z = m.damping_ratio.unwrap_or(0.0);
                m.mpc < 0.8 && m.damping_half_power.is_some_and(|hp| hp > 5.0 * z)
            })
            .map(|(i, _)| i)
            .collect();
        if !spurious.is_empty() {
            for &i in &spurious {
                let m = &res.modes[i];
                res.warnings.push(format!(
                    "a stable pole at {:.1} Hz was not reported as a mode: complex shape (MPC {:.2}) and a \
                     resonance peak {:.0}× broader than the pole; pick it by hand if it is real",
                    m.frequency_hz,
                    m.mpc,
                    m.damping_half_power.unwrap_or(0.0) / m.damping_ratio.unwrap_or(1.0).max(1e-12)
                ));
            }
            let kept: Vec<(usize, usize)> = chosen
                .iter()
                .enumerate()
                .filter(|(i, _)| !spurious.contains(i))
                .map(|(_, c)| *c)
                .collect();
            res.modes.clear();
            fit_chosen(set, res, &stab, &w, &kept, s.refine_poles)?;
        }
    }
    res.stabilization = Some(stab);
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn pole(order: usize, f: f64, status: PoleStatus) -> Pole {
        let w = 2.0 * std::f64::consts::PI * f;
        Pole {
            order,
            lambda: Complex64::new(-0.001 * w, w),
            frequency_hz: f,
            damping_ratio: 0.001,
            status,
            mpc: 1.0,
            shape: vec![Complex64::new(1.0, 0.0)],
        }
    }

    /// Policy: only fully stable poles count; poles within 0.2 % form one cluster.
    #[test]
    fn stable_poles_within_a_fifth_of_a_percent_make_one_cluster() {
        let full = PoleStatus::FrequencyDampingShape;
        let poles = vec![
            pole(10, 100.0, full),
            pole(11, 100.1, full),
            pole(12, 100.15, full),
            pole(12, 250.0, PoleStatus::Frequency), // not fully stable: ignored
            pole(13, 300.0, full),
        ];
        let c = clusters_of_stable_poles(&poles);
        assert_eq!(c.len(), 2);
        assert_eq!(c[0].members, vec![0, 1, 2]);
        assert_eq!(c[1].members, vec![4]);
    }

    /// Policy: a cluster in which one order has two poles holds two close modes and is split at
    /// its widest gap — but only with four or more members.
    #[test]
    fn a_cluster_with_two_poles_of_one_order_is_split_at_its_widest_gap() {
        let full = PoleStatus::FrequencyDampingShape;
        // Two modes 0.3 % apart, each seen at orders 20 and 21, bridged by close spacing.
        let poles = vec![
            pole(20, 500.0, full),
            pole(21, 500.4, full),
            pole(20, 501.0, full),
            pole(21, 501.5, full),
        ];
        let c = clusters_of_stable_poles(&poles);
        assert_eq!(c.len(), 2, "split into two modes");
        assert_eq!(c[0].members, vec![0, 1]);
        assert_eq!(c[1].members, vec![2, 3]);
        // Three members, one order doubled: too little evidence, kept as one.
        let c = clusters_of_stable_poles(&poles[..3]);
        assert_eq!(c.len(), 1);
    }

    /// Policy: an undamped line at a mains harmonic is hum; a damped mode there is not.
    #[test]
    fn hum_is_an_undamped_line_at_a_mains_harmonic() {
        let window_zeta = 1e-4;
        assert!(is_hum(150.0, 1e-5, window_zeta, 0.5, &[50.0]));
        assert!(is_hum(180.2, 1e-5, window_zeta, 0.5, &[50.0, 60.0]));
        assert!(
            !is_hum(150.0, 0.01, window_zeta, 0.5, &[50.0]),
            "damped: a mode"
        );
        assert!(
            !is_hum(157.0, 1e-5, window_zeta, 0.5, &[50.0]),
            "not a harmonic"
        );
        assert!(
            !is_hum(150.0, 1e-5, window_zeta, 0.5, &[]),
            "no mains given"
        );
    }
}
