//! Thinning a discharge trace for drawing, keeping what matters: the lowest voltages.

use crate::solve::TracePoint;

/// At most `max` points of `trace`: buckets of equal time, each keeping its first point and its
/// lowest terminal voltage, in time order. Short traces come back whole.
pub fn decimate(trace: &[TracePoint], max: usize) -> Vec<TracePoint> {
    if trace.len() <= max.max(4) {
        return trace.to_vec();
    }
    let t0 = trace[0].t_s;
    let t1 = trace[trace.len() - 1].t_s;
    let n = (max / 2).max(2);
    let span = (t1 - t0).max(f64::MIN_POSITIVE);
    let mut buckets: Vec<Option<(TracePoint, TracePoint)>> = vec![None; n];
    for p in trace {
        let b = (((p.t_s - t0) / span * n as f64) as usize).min(n - 1);
        match &mut buckets[b] {
            Some((_, low)) => {
                if p.voltage < low.voltage {
                    *low = *p;
                }
            }
            slot @ None => *slot = Some((*p, *p)),
        }
    }
    let mut out: Vec<TracePoint> = Vec::with_capacity(2 * n + 1);
    for (first, low) in buckets.into_iter().flatten() {
        out.push(first);
        if low.t_s > first.t_s {
            out.push(low);
        }
    }
    let last = trace[trace.len() - 1];
    if out.last().is_none_or(|p| p.t_s < last.t_s) {
        out.push(last);
    }
    out
}

/// The lower envelope of the terminal voltage: `n` equal time buckets, each giving the lowest
/// voltage within `period` seconds either side of it (at least the neighbouring buckets), at the
/// time of the bucket's own lowest point. `period` is the longest stretch between the pulses that
/// set the low points (one pass of the profile); without the window, a bucket that happens to hold
/// no pulse would spike up to the resting voltage.
pub fn lower_envelope(trace: &[TracePoint], n: usize, period: f64) -> Vec<TracePoint> {
    if trace.len() < 3 || n < 3 {
        return trace.to_vec();
    }
    let t0 = trace[0].t_s;
    let span = (trace[trace.len() - 1].t_s - t0).max(f64::MIN_POSITIVE);
    let width = span / n as f64;
    let mut low: Vec<Option<TracePoint>> = vec![None; n];
    for p in trace {
        let b = (((p.t_s - t0) / width) as usize).min(n - 1);
        if low[b].is_none_or(|l| p.voltage < l.voltage) {
            low[b] = Some(*p);
        }
    }
    let reach = ((period / width).ceil() as usize).clamp(1, 3);
    (0..n)
        .filter_map(|b| {
            let own = low[b]?;
            let lo = b.saturating_sub(reach);
            let hi = (b + reach).min(n - 1);
            let v = low[lo..=hi]
                .iter()
                .flatten()
                .map(|p| p.voltage)
                .fold(own.voltage, f64::min);
            Some(TracePoint { voltage: v, ..own })
        })
        .collect()
}

/// One stretch of a voltage band: its time and the lowest and highest terminal voltage near it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Span {
    /// Time, s (of the stretch's lowest point).
    pub t_s: f64,
    /// Lowest terminal voltage, V.
    pub low: f64,
    /// Highest terminal voltage, V.
    pub high: f64,
}

/// The band the terminal voltage moves in: `n` equal time buckets, each giving the lowest and
/// highest voltage within `period` seconds either side of it (at least the neighbouring buckets,
/// as for [`lower_envelope`]). Buckets the trace has no point in give nothing.
pub fn voltage_band(trace: &[TracePoint], n: usize, period: f64) -> Vec<Span> {
    if trace.is_empty() || n == 0 {
        return Vec::new();
    }
    let t0 = trace[0].t_s;
    let span = (trace[trace.len() - 1].t_s - t0).max(f64::MIN_POSITIVE);
    let width = span / n as f64;
    let mut own: Vec<Option<(TracePoint, f64)>> = vec![None; n];
    for p in trace {
        let b = (((p.t_s - t0) / width) as usize).min(n - 1);
        own[b] = Some(match own[b] {
            None => (*p, p.voltage),
            Some((low, high)) => (
                if p.voltage < low.voltage { *p } else { low },
                high.max(p.voltage),
            ),
        });
    }
    let reach = ((period / width).ceil() as usize).clamp(1, 3);
    (0..n)
        .filter_map(|b| {
            let (low, high) = own[b]?;
            let near = &own[b.saturating_sub(reach)..=(b + reach).min(n - 1)];
            let lo = near
                .iter()
                .flatten()
                .map(|x| x.0.voltage)
                .fold(low.voltage, f64::min);
            let hi = near.iter().flatten().map(|x| x.1).fold(high, f64::max);
            Some(Span {
                t_s: low.t_s,
                low: lo,
                high: hi,
            })
        })
        .collect()
}

/// How many buckets of [`bucket_minima`] to take over a trace `span` seconds long: `most`, but
/// none shorter than one pass of the profile (`pass` seconds), so that each holds a pulse, and
/// at least 8.
pub fn mark_count(most: usize, span: f64, pass: f64) -> usize {
    let passes = if pass > 0.0 {
        span / pass
    } else {
        f64::INFINITY
    };
    most.min(passes.floor().max(8.0) as usize)
}

/// The lowest point of each of `n` equal time buckets that holds a point, in time order.
pub fn bucket_minima(trace: &[TracePoint], n: usize) -> Vec<TracePoint> {
    if trace.is_empty() || n == 0 {
        return Vec::new();
    }
    let t0 = trace[0].t_s;
    let span = (trace[trace.len() - 1].t_s - t0).max(f64::MIN_POSITIVE);
    let mut low: Vec<Option<TracePoint>> = vec![None; n];
    for p in trace {
        let b = (((p.t_s - t0) / span * n as f64) as usize).min(n - 1);
        if low[b].is_none_or(|l| p.voltage < l.voltage) {
            low[b] = Some(*p);
        }
    }
    low.into_iter().flatten().collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn tp(t: f64, v: f64) -> TracePoint {
        TracePoint {
            t_s: t,
            soc: 1.0,
            ocv: 4.0,
            voltage: v,
            current: 0.0,
        }
    }

    #[test]
    fn decimation_keeps_every_buckets_minimum() {
        let trace: Vec<TracePoint> = (0..10_000)
            .map(|k| tp(f64::from(k), if k % 97 == 0 { 2.0 } else { 3.0 }))
            .collect();
        let d = decimate(&trace, 400);
        assert!(d.len() <= 402);
        let lows = d.iter().filter(|p| p.voltage < 2.5).count();
        assert!(lows >= 100, "{lows} minima kept");
        assert!(d.windows(2).all(|w| w[0].t_s < w[1].t_s));
        assert!((d[d.len() - 1].t_s - 9999.0).abs() < 1e-9);
    }

    #[test]
    fn the_band_spans_rest_and_pulses_and_minima_stay_apart() {
        // Rest at 3.0 V with a 2.0 V pulse every 100 s.
        let trace: Vec<TracePoint> = (0..1000)
            .map(|k| tp(f64::from(k), if k % 100 == 50 { 2.0 } else { 3.0 }))
            .collect();
        let band = voltage_band(&trace, 20, 100.0);
        assert_eq!(band.len(), 20);
        assert!(
            band.iter()
                .all(|s| (s.high - 3.0).abs() < 1e-12 && (s.low - 2.0).abs() < 1e-12),
            "{band:?}"
        );
        let lows = bucket_minima(&trace, 10);
        assert_eq!(lows.len(), 10);
        assert!(lows.iter().all(|p| (p.voltage - 2.0).abs() < 1e-12));
        assert!(lows.windows(2).all(|w| w[1].t_s - w[0].t_s > 99.0));
    }
}
