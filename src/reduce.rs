//! Reduces a trace to about one (min, max) pair per pixel column before a plot (the window's or
//! the written report's) sees it, so the cost of drawing does not grow with the record length (thousands of lines, 65 536-sample
//! records) and no peak between samples is lost.

/// Points of `y(x)` (x ascending) inside `[x0, x1]`, reduced to at most two per column of
/// `columns` equal columns: the minimum and the maximum in their order of occurrence. One point
/// either side of the range is kept so the line reaches the plot's edges.
pub fn min_max(x: &[f64], y: &[f64], [x0, x1]: [f64; 2], columns: usize, out: &mut Vec<[f64; 2]>) {
    out.clear();
    let n = x.len().min(y.len());
    if n == 0 || columns == 0 || x1.partial_cmp(&x0) != Some(std::cmp::Ordering::Greater) {
        return;
    }
    let i0 = x[..n].partition_point(|&v| v < x0).saturating_sub(1);
    let i1 = (x[..n].partition_point(|&v| v <= x1) + 1).min(n);
    if i1 - i0 <= 2 * columns {
        out.extend((i0..i1).map(|i| [x[i], y[i]]));
        return;
    }
    let width = (x1 - x0) / columns as f64;
    let mut i = i0;
    while i < i1 {
        let col = ((x[i] - x0) / width).floor();
        let (mut lo, mut hi) = (i, i);
        let mut j = i + 1;
        while j < i1 && ((x[j] - x0) / width).floor() == col {
            if y[j] < y[lo] {
                lo = j;
            }
            if y[j] > y[hi] {
                hi = j;
            }
            j += 1;
        }
        let (a, b) = if lo <= hi { (lo, hi) } else { (hi, lo) };
        out.push([x[a], y[a]]);
        if b != a {
            out.push([x[b], y[b]]);
        }
        i = j;
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn keeps_extremes_and_bounds_the_count() {
        let n = 100_000;
        let x: Vec<f64> = (0..n).map(|i| i as f64).collect();
        let mut y: Vec<f64> = x.iter().map(|v| (v * 0.001).sin()).collect();
        y[54_321] = 10.0; // a one-sample spike must survive
        let mut out = Vec::new();
        min_max(&x, &y, [0.0, n as f64], 500, &mut out);
        assert!(out.len() <= 1000 + 2, "{}", out.len());
        assert!(out.iter().any(|p| p[1] == 10.0));
        assert!(out.windows(2).all(|w| w[0][0] < w[1][0]));
    }

    #[test]
    fn short_traces_pass_through_and_range_is_respected() {
        let x = [0.0, 1.0, 2.0, 3.0, 4.0];
        let y = [0.0, 1.0, 0.0, 1.0, 0.0];
        let mut out = Vec::new();
        min_max(&x, &y, [1.5, 2.5], 100, &mut out);
        assert_eq!(out, vec![[1.0, 1.0], [2.0, 0.0], [3.0, 1.0]]);
        min_max(&x, &y, [3.0, 1.0], 100, &mut out);
        assert!(out.is_empty());
    }
}
