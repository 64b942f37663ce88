//! The SVG plots of the command line, in one place: `certify --plan --plot`
//! and `assess raw|output --plot`. Drawing only: the numbers come from the
//! library through the commands' reports. Each draws into a string; the
//! commands write it through the one atomic writer (`common::write_svg`).

use super::assess_report::{OutputReport, RawReport};
use anyhow::{anyhow, Result};
use sluice::assess::many;

/// Draws certified bits per round against N for gamma and its neighbours.
pub(super) fn certify_rates(
    svg: &mut String,
    gamma_given: f64,
    caption: &str,
    rate: &(dyn Fn(u64, f64) -> f64 + Sync),
) -> Result<()> {
    use plotters::prelude::*;
    let (lo, hi) = neighbours(gamma_given);
    let mut gammas = [lo, gamma_given, hi];
    gammas.sort_by(|a, b| a.partial_cmp(b).unwrap());
    let ns: Vec<f64> = (0..=140)
        .map(|i| 10f64.powf(5.0 + i as f64 * 0.05))
        .collect();
    let series: Vec<(f64, Vec<(f64, f64)>)> = gammas
        .iter()
        .map(|&g| {
            (
                g,
                ns.iter().map(|&n| (n, rate(n.round() as u64, g))).collect(),
            )
        })
        .collect();
    let ymax = series
        .iter()
        .flat_map(|(_, s)| s.iter().map(|&(_, y)| y))
        .fold(0.0f64, f64::max);
    let ymax = (ymax * 1.1).clamp(0.05, 1.0);
    {
        let root = SVGBackend::with_string(svg, (960, 600)).into_drawing_area();
        root.fill(&WHITE).map_err(|e| anyhow!("plot: {e}"))?;
        let mut chart = ChartBuilder::on(&root)
            .caption(caption, ("sans-serif", 14))
            .margin(16)
            .x_label_area_size(48)
            .y_label_area_size(64)
            .build_cartesian_2d((1e5f64..1e12f64).log_scale(), 0f64..ymax)
            .map_err(|e| anyhow!("plot: {e}"))?;
        chart
            .configure_mesh()
            .x_desc("number of rounds N (log scale)")
            .y_desc("certified bits per round")
            .x_label_formatter(&|x| format!("1e{}", x.log10().round()))
            .draw()
            .map_err(|e| anyhow!("plot: {e}"))?;
        let colours = [BLUE, RED, RGBColor(0, 140, 0)];
        for (i, (g, pts)) in series.iter().enumerate() {
            let c = colours[i % 3];
            let label = if (*g - gamma_given).abs() < 1e-15 {
                format!("gamma = {g} (given)")
            } else {
                format!("gamma = {g}")
            };
            chart
                .draw_series(LineSeries::new(pts.iter().copied(), c.stroke_width(2)))
                .map_err(|e| anyhow!("plot: {e}"))?
                .label(label)
                .legend(move |(x, y)| {
                    PathElement::new(vec![(x, y), (x + 20, y)], c.stroke_width(2))
                });
        }
        chart
            .configure_series_labels()
            .position(SeriesLabelPosition::UpperLeft)
            .background_style(WHITE.mix(0.8))
            .border_style(BLACK)
            .draw()
            .map_err(|e| anyhow!("plot: {e}"))?;
        root.present().map_err(|e| anyhow!("plot: {e}"))?;
    }
    Ok(())
}

fn neighbours(gamma: f64) -> (f64, f64) {
    if gamma * 2.0 <= 1.0 {
        (gamma / 2.0, gamma * 2.0)
    } else if gamma < 1.0 {
        (gamma / 2.0, 1.0)
    } else {
        (gamma / 4.0, gamma / 2.0)
    }
}

pub(super) fn plot_err<E: std::fmt::Debug>(e: E) -> anyhow::Error {
    anyhow::anyhow!("{e:?}")
}

/// `sluice assess output --plot`: the P-value histogram and one P-value per
/// test kind.
pub(super) fn assess_output(svg: &mut String, r: &OutputReport) -> anyhow::Result<()> {
    use plotters::prelude::*;
    let root = SVGBackend::with_string(svg, (1000, 760)).into_drawing_area();
    root.fill(&WHITE).map_err(plot_err)?;
    let (top, bottom) = root.split_vertically(360);

    // P-value histogram, all kinds and sequences pooled.
    let mut bins = [0u64; 10];
    for k in &r.kinds {
        for (b, c) in bins.iter_mut().zip(k.summary.bins) {
            *b += c;
        }
    }
    let total: u64 = bins.iter().sum();
    let ymax = (*bins.iter().max().unwrap_or(&1)).max(1) as f64 * 1.2;
    let mut ch = ChartBuilder::on(&top)
        .caption(
            format!(
                "P-values of all tests ({} values, {} sequence(s) of {} bits)",
                total, r.sequences, r.sequence_bits
            ),
            ("sans-serif", 18),
        )
        .margin(12)
        .x_label_area_size(36)
        .y_label_area_size(60)
        .build_cartesian_2d(0f64..1f64, 0f64..ymax)
        .map_err(plot_err)?;
    ch.configure_mesh()
        .x_desc("P-value (10 bins)")
        .y_desc("count")
        .disable_x_mesh()
        .draw()
        .map_err(plot_err)?;
    ch.draw_series(bins.iter().enumerate().map(|(i, &c)| {
        let x0 = i as f64 / 10.0;
        Rectangle::new(
            [(x0 + 0.005, 0.0), (x0 + 0.095, c as f64)],
            BLUE.mix(0.5).filled(),
        )
    }))
    .map_err(plot_err)?
    .label("observed")
    .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 12, y + 5)], BLUE.mix(0.5).filled()));
    let expect = total as f64 / 10.0;
    ch.draw_series(LineSeries::new(
        [(0.0, expect), (1.0, expect)],
        BLACK.stroke_width(2),
    ))
    .map_err(plot_err)?
    .label("expected if uniform")
    .legend(|(x, y)| PathElement::new([(x, y), (x + 12, y)], BLACK.stroke_width(2)));
    ch.configure_series_labels()
        .background_style(WHITE.mix(0.8))
        .border_style(BLACK)
        .position(SeriesLabelPosition::UpperRight)
        .draw()
        .map_err(plot_err)?;

    // Per-kind pass proportions (or P-values for one sequence).
    let n = r.kinds.len().max(1);
    if r.sequences > 1 {
        let (lo, hi) = many::proportion_interval(r.alpha, r.sequences);
        let ymin = r
            .kinds
            .iter()
            .map(|k| k.summary.proportion)
            .fold(lo, f64::min)
            - 0.02;
        let mut ch = ChartBuilder::on(&bottom)
            .caption(
                "Pass proportion per test and P-value kind, with the acceptance band (SP 800-22 4.2.1)",
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(60)
            .build_cartesian_2d(0f64..n as f64, ymin.max(0.0)..1.012f64)
            .map_err(plot_err)?;
        ch.configure_mesh()
            .x_desc("P-value kind, grouped by test (SP 800-22 section numbers at the top)")
            .y_desc("proportion passing")
            .disable_x_mesh()
            .draw()
            .map_err(plot_err)?;
        ch.draw_series(std::iter::once(Rectangle::new(
            [(0.0, lo), (n as f64, hi.min(1.005))],
            GREEN.mix(0.15).filled(),
        )))
        .map_err(plot_err)?
        .label(format!("acceptable range [{lo:.4}, {:.4}] for all {} sequences (kinds run on fewer have wider ranges)", hi.min(1.0), r.sequences))
        .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 12, y + 5)], GREEN.mix(0.3).filled()));
        ch.draw_series(LineSeries::new(
            [(0.0, lo), (n as f64, lo)],
            GREEN.stroke_width(2),
        ))
        .map_err(plot_err)?;
        // thin separators and section numbers between tests
        let mut starts: Vec<(usize, &str)> = Vec::new();
        for (i, k) in r.kinds.iter().enumerate() {
            if i == 0 || r.kinds[i - 1].test != k.test {
                starts.push((i, k.section));
            }
        }
        for (j, &(i, sec)) in starts.iter().enumerate() {
            let width = starts.get(j + 1).map_or(r.kinds.len(), |s| s.0) - i;
            ch.draw_series(LineSeries::new(
                [(i as f64, ymin.max(0.0)), (i as f64, 1.005)],
                BLACK.mix(0.25),
            ))
            .map_err(plot_err)?;
            if width < 5 {
                continue; // no room for a label
            }
            ch.draw_series(std::iter::once(Text::new(
                sec.to_string(),
                (i as f64 + 0.3, 1.003),
                ("sans-serif", 11).into_font(),
            )))
            .map_err(plot_err)?;
        }
        ch.draw_series(r.kinds.iter().enumerate().map(|(i, k)| {
            let c = if k.flagged {
                RED.filled()
            } else {
                BLUE.filled()
            };
            Circle::new((i as f64 + 0.5, k.summary.proportion), 3, c)
        }))
        .map_err(plot_err)?
        .label("proportion (red: flagged)")
        .legend(|(x, y)| Circle::new((x + 6, y), 3, BLUE.filled()));
        ch.configure_series_labels()
            .background_style(WHITE.mix(0.8))
            .border_style(BLACK)
            .position(SeriesLabelPosition::LowerLeft)
            .draw()
            .map_err(plot_err)?;
    } else {
        let mut ch = ChartBuilder::on(&bottom)
            .caption(
                "P-value per test and P-value kind (one sequence); line: alpha = 0.01",
                ("sans-serif", 18),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(60)
            .build_cartesian_2d(0f64..n as f64, 0f64..1f64)
            .map_err(plot_err)?;
        ch.configure_mesh()
            .x_desc("P-value kind (tests in SP 800-22 order)")
            .y_desc("P-value")
            .disable_x_mesh()
            .draw()
            .map_err(plot_err)?;
        ch.draw_series(LineSeries::new(
            [(0.0, r.alpha), (n as f64, r.alpha)],
            RED.stroke_width(2),
        ))
        .map_err(plot_err)?;
        ch.draw_series(r.kinds.iter().enumerate().map(|(i, k)| {
            let c = if k.flagged {
                RED.filled()
            } else {
                BLUE.filled()
            };
            Circle::new((i as f64 + 0.5, k.p_value.unwrap_or(0.0)), 3, c)
        }))
        .map_err(plot_err)?;
    }
    root.present().map_err(plot_err)?;
    Ok(())
}

/// `sluice assess raw --plot`: the min-entropy estimates per bit.
pub(super) fn assess_raw(svg: &mut String, r: &RawReport) -> anyhow::Result<()> {
    use plotters::prelude::*;
    let root = SVGBackend::with_string(svg, (900, 480)).into_drawing_area();
    root.fill(&WHITE).map_err(plot_err)?;
    let est: Vec<(&str, f64)> = r
        .assessment
        .estimates
        .iter()
        .filter_map(|e| e.min_entropy.map(|h| (e.name, h)))
        .collect();
    let n = est.len().max(1);
    let mut ch = ChartBuilder::on(&root)
        .caption(
            "Min-entropy estimates per bit (SP 800-90B 6.3)",
            ("sans-serif", 18),
        )
        .margin(14)
        .x_label_area_size(60)
        .y_label_area_size(60)
        .build_cartesian_2d((0..n).into_segmented(), 0f64..1.05f64)
        .map_err(plot_err)?;
    ch.configure_mesh()
        .disable_x_mesh()
        .y_desc("bits per bit")
        .x_labels(n)
        .x_label_formatter(&|v| match v {
            SegmentValue::CenterOf(i) => est
                .get(*i)
                .map(|e| e.0.split(" (").next().unwrap_or("").to_string())
                .unwrap_or_default(),
            _ => String::new(),
        })
        .draw()
        .map_err(plot_err)?;
    ch.draw_series(est.iter().enumerate().map(|(i, &(_, h))| {
        let mut bar = Rectangle::new(
            [
                (SegmentValue::Exact(i), 0.0),
                (SegmentValue::Exact(i + 1), h),
            ],
            BLUE.mix(0.5).filled(),
        );
        bar.set_margin(0, 0, 12, 12);
        bar
    }))
    .map_err(plot_err)?;
    if let Some(c) = r.claimed_entropy {
        ch.draw_series(LineSeries::new(
            [(SegmentValue::Exact(0), c), (SegmentValue::Exact(n), c)],
            RED.stroke_width(2),
        ))
        .map_err(plot_err)?
        .label(format!("claimed {c}"))
        .legend(|(x, y)| PathElement::new([(x, y), (x + 12, y)], RED.stroke_width(2)));
        ch.configure_series_labels()
            .background_style(WHITE.mix(0.8))
            .border_style(BLACK)
            .position(SeriesLabelPosition::LowerRight)
            .draw()
            .map_err(plot_err)?;
    }
    root.present().map_err(plot_err)?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn neighbouring_gammas_stay_in_range() {
        assert_eq!(neighbours(0.1), (0.05, 0.2));
        assert_eq!(neighbours(0.6), (0.3, 1.0));
        assert_eq!(neighbours(1.0), (0.25, 0.5));
    }
}
