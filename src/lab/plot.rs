//! SVG spectra: the carrier bands from 0 to 2.5 carrier harmonics, and a
//! zoom on the audio band.
//!
//! The wideband view analyses the first 20 ms of the record (or all of it
//! if shorter) on a grid of 64 points a carrier period with a B-spline of
//! order 6; its alias bound (see [`crate::lab::spectrum`]) is printed under
//! the chart. Both charts show bin amplitudes in dBFS; each drawn point is
//! the largest bin it covers (peak hold), so no line is lost to the pixel
//! grid.

use plotters::prelude::*;
use std::string::String;
use std::vec::Vec;

use crate::lab::run::Rendered;
use crate::lab::spectrum::{spectrum, Grid, Spectrum};

/// Largest record the wideband view analyses, s.
pub const WIDE_RECORD_S: f64 = 0.02;

/// The wideband spectrum (0 to 2.5 carrier harmonics) of a rendered record.
pub fn wideband(r: &Rendered) -> Spectrum {
    let fc = r.timer.carrier_hz();
    let periods = (r.plan.periods as f64).min((WIDE_RECORD_S * fc).round().max(1.0)) as u64;
    let p = r.timer.period_ticks() as f64;
    let w = r.output.truncated(periods as f64 * p);
    spectrum(
        &w,
        r.timer.clock_hz(),
        p,
        Grid {
            per_period: 64,
            order: 6,
        },
        2.5 * fc,
    )
}

/// Peak-hold reduction of bins `0..=kmax` to at most `points` (Hz, dBFS).
fn trace(s: &Spectrum, max_hz: f64, points: usize, scale_hz: f64) -> Vec<(f64, f64)> {
    let kmax = ((max_hz / s.bin_hz) as usize).min(s.amp.len() - 1);
    let per = kmax.div_ceil(points).max(1);
    (1..=kmax)
        .collect::<Vec<_>>()
        .chunks(per)
        .map(|c| {
            let (k, a) = c
                .iter()
                .map(|&k| (k, s.amp[k].norm()))
                .fold((c[0], 0.0), |m, x| if x.1 > m.1 { x } else { m });
            (
                k as f64 * s.bin_hz / scale_hz,
                (20.0 * a.max(1e-12).log10()).max(-240.0),
            )
        })
        .collect()
}

/// Write the two charts to `path` as SVG.
///
/// # Errors
/// A message if the file cannot be written.
pub fn write_svg(
    path: &str,
    title: &str,
    wide: &Spectrum,
    band: &Spectrum,
    carrier_hz: f64,
    bandwidth_hz: f64,
) -> Result<(), String> {
    let err = |e: &dyn std::fmt::Display| format!("plot {path}: {e}");
    let root = SVGBackend::new(path, (1100, 900)).into_drawing_area();
    root.fill(&WHITE).map_err(|e| err(&e))?;
    let root = root
        .titled(title, ("sans-serif", 20))
        .map_err(|e| err(&e))?;
    let (top, bottom) = root.split_vertically(430);
    let floor = |s: &[(f64, f64)]| {
        let m = s.iter().map(|p| p.1).fold(0.0, f64::min);
        (m / 20.0).floor() * 20.0 - 10.0
    };
    let charts: [(&DrawingArea<_, _>, &Spectrum, f64, f64, &str, String); 2] = [
        (
            &top,
            wide,
            2.5 * carrier_hz,
            1e3,
            "frequency (kHz)",
            format!(
                "0 to 2.5 x carrier ({:.0} kHz); alias bound {:.0} dBFS; bin {:.0} Hz",
                carrier_hz / 1e3,
                wide.alias_bound_dbfs,
                wide.bin_hz
            ),
        ),
        (
            &bottom,
            band,
            bandwidth_hz,
            1e3,
            "frequency (kHz)",
            format!(
                "audio band; alias bound {:.0} dBFS; bin {:.2} Hz",
                band.alias_bound_dbfs, band.bin_hz
            ),
        ),
    ];
    for (area, s, max_hz, scale, xlabel, caption) in charts {
        let t = trace(s, max_hz, 1600, scale);
        let ymin = floor(&t).max(-240.0);
        let mut chart = ChartBuilder::on(area)
            .caption(caption, ("sans-serif", 15))
            .margin(12)
            .x_label_area_size(36)
            .y_label_area_size(56)
            .build_cartesian_2d(0.0..max_hz / scale, ymin..10.0)
            .map_err(|e| err(&e))?;
        chart
            .configure_mesh()
            .x_desc(xlabel)
            .y_desc("dBFS")
            .draw()
            .map_err(|e| err(&e))?;
        chart
            .draw_series(LineSeries::new(t, &BLUE))
            .map_err(|e| err(&e))?;
    }
    root.present().map_err(|e| err(&e))?;
    Ok(())
}
