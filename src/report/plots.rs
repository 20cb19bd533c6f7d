/*!
The report's SVG plots, drawn with plotters' SVG backend (SVG text is left to
the viewer's fonts, so nothing needs a font file here).
*/
use super::{ReportError, ReportNumbers};
use plotters::coord::Shift;
use plotters::prelude::*;

type Area<'a> = DrawingArea<SVGBackend<'a>, Shift>;

fn plot_err(name: &str) -> impl Fn(String) -> ReportError + '_ {
    move |message| ReportError::Plot {
        name: name.to_string(),
        message,
    }
}

/// Draw into an SVG string of the given size.
fn svg(
    name: &str,
    size: (u32, u32),
    draw: impl FnOnce(&Area) -> Result<(), String>,
) -> Result<String, ReportError> {
    let mut out = String::new();
    {
        let root = SVGBackend::with_string(&mut out, size).into_drawing_area();
        root.fill(&WHITE).map_err(|e| plot_err(name)(e.to_string()))?;
        draw(&root).map_err(plot_err(name))?;
        root.present().map_err(|e| plot_err(name)(e.to_string()))?;
    }
    Ok(out)
}

fn e<E: std::fmt::Display>(x: E) -> String {
    x.to_string()
}

/// [`svg`] for the report's other plot modules.
pub(super) fn svg_plot(
    name: &str,
    size: (u32, u32),
    draw: impl FnOnce(&Area) -> Result<(), String>,
) -> Result<String, ReportError> {
    svg(name, size, draw)
}

/// A drawing error as text.
pub(super) fn text_err<E: std::fmt::Display>(x: E) -> String {
    e(x)
}

/// A confusion matrix as a grid of shaded cells with counts; rows labelled
/// by `row_title`, columns by `col_title`.
pub fn confusion(
    name: &str,
    title: &str,
    row_title: &str,
    col_title: &str,
    labels: &[String],
    m: &[Vec<usize>],
) -> Result<String, ReportError> {
    let k = labels.len().max(1);
    let cell = 80i32;
    let (left, top) = (130i32, 70i32);
    let w = (left + cell * k as i32 + 30) as u32;
    let h = (top + cell * k as i32 + 60) as u32;
    svg(name, (w, h), |root| {
        let max = m.iter().flatten().copied().max().unwrap_or(0).max(1) as f64;
        root.draw(&Text::new(title.to_string(), (10, 10), ("sans-serif", 18)))
            .map_err(e)?;
        root.draw(&Text::new(
            format!("columns: {col_title}"),
            (left, 38),
            ("sans-serif", 13),
        ))
        .map_err(e)?;
        root.draw(&Text::new(
            format!("rows: {row_title}"),
            (10, top + cell * k as i32 + 30),
            ("sans-serif", 13),
        ))
        .map_err(e)?;
        for (j, l) in labels.iter().enumerate() {
            root.draw(&Text::new(
                l.clone(),
                (left + cell * j as i32 + 8, top - 14),
                ("sans-serif", 13),
            ))
            .map_err(e)?;
        }
        for (i, row) in m.iter().enumerate() {
            let y = top + cell * i as i32;
            root.draw(&Text::new(
                labels.get(i).cloned().unwrap_or_default(),
                (10, y + cell / 2 - 6),
                ("sans-serif", 13),
            ))
            .map_err(e)?;
            for (j, &n) in row.iter().enumerate() {
                let x = left + cell * j as i32;
                let t = n as f64 / max;
                let shade = (255.0 - 180.0 * t) as u8;
                let fill = if i == j {
                    RGBColor(shade, 255, shade)
                } else {
                    RGBColor(255, shade, shade)
                };
                root.draw(&Rectangle::new([(x, y), (x + cell, y + cell)], fill.filled()))
                    .map_err(e)?;
                root.draw(&Rectangle::new(
                    [(x, y), (x + cell, y + cell)],
                    BLACK.stroke_width(1),
                ))
                .map_err(e)?;
                root.draw(&Text::new(
                    n.to_string(),
                    (x + cell / 2 - 8, y + cell / 2 - 7),
                    ("sans-serif", 16),
                ))
                .map_err(e)?;
            }
        }
        Ok(())
    })
}

/// Automatic against vetted redshift, the 1:1 line, catastrophic outliers in red.
pub fn redshifts(n: &ReportNumbers) -> Result<String, ReportError> {
    let name = "redshift_comparison";
    svg(name, (560, 520), |root| {
        let zmax = n
            .z_pairs
            .iter()
            .flat_map(|p| [p.auto_z, p.vetted_z])
            .fold(0.1f64, f64::max)
            * 1.05;
        let zmin = n
            .z_pairs
            .iter()
            .flat_map(|p| [p.auto_z, p.vetted_z])
            .fold(0.0f64, f64::min);
        let mut chart = ChartBuilder::on(root)
            .caption(
                format!(
                    "automatic vs vetted redshift ({} objects, {} with |Δz|/(1+z) > {})",
                    n.z_pairs.len(),
                    n.z_catastrophic,
                    n.z_threshold
                ),
                ("sans-serif", 15),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(50)
            .build_cartesian_2d(zmin..zmax, zmin..zmax)
            .map_err(e)?;
        chart
            .configure_mesh()
            .x_desc("vetted z")
            .y_desc("automatic z")
            .draw()
            .map_err(e)?;
        chart
            .draw_series(LineSeries::new([(zmin, zmin), (zmax, zmax)], BLACK.mix(0.5)))
            .map_err(e)?;
        let bad: std::collections::BTreeSet<&str> = n.outliers.iter().map(|o| o.id.as_str()).collect();
        chart
            .draw_series(n.z_pairs.iter().map(|p| {
                let style = if bad.contains(p.id.as_str()) {
                    RED.filled()
                } else {
                    BLUE.mix(0.6).filled()
                };
                Circle::new((p.vetted_z, p.auto_z), 3, style)
            }))
            .map_err(e)?;
        Ok(())
    })
}

/// Vertical bars with a label under each.
pub fn bars(name: &str, title: &str, labels: &[String], values: &[usize]) -> Result<String, ReportError> {
    let width = (120 + 70 * labels.len().max(1)) as u32;
    svg(name, (width.max(420), 360), |root| {
        let ymax = values.iter().copied().max().unwrap_or(0).max(1);
        let n = labels.len().max(1);
        let mut chart = ChartBuilder::on(root)
            .caption(title, ("sans-serif", 16))
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(45)
            .build_cartesian_2d((0..n).into_segmented(), 0..ymax + ymax / 10 + 1)
            .map_err(e)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .x_labels(n)
            .x_label_formatter(&|v| match v {
                SegmentValue::CenterOf(i) => labels.get(*i).cloned().unwrap_or_default(),
                _ => String::new(),
            })
            .draw()
            .map_err(e)?;
        chart
            .draw_series(
                Histogram::vertical(&chart)
                    .style(BLUE.mix(0.6).filled())
                    .margin(6)
                    .data(values.iter().enumerate().map(|(i, &v)| (i, v))),
            )
            .map_err(e)?;
        Ok(())
    })
}

/// Every plot of the report: (file name, SVG text).
pub fn all(n: &ReportNumbers) -> Result<Vec<(String, String)>, ReportError> {
    let mut out = Vec::new();
    out.push((
        "confusion_photometric.svg".to_string(),
        confusion(
            "confusion_photometric",
            &format!("photometric class vs vetted class ({} objects)", n.photometric.n),
            "vetted class",
            "photometric class",
            &n.classes,
            &n.photometric.matrix,
        )?,
    ));
    out.push((
        "confusion_automatic.svg".to_string(),
        confusion(
            "confusion_automatic",
            &format!("automatic class vs vetted class ({} objects)", n.automatic.n),
            "vetted class",
            "automatic class",
            &n.classes,
            &n.automatic.matrix,
        )?,
    ));
    out.push(("redshift_comparison.svg".to_string(), redshifts(n)?));
    let names: Vec<String> = n.inspectors.iter().map(|i| i.name.clone()).collect();
    let done: Vec<usize> = n.inspectors.iter().map(|i| i.reviewed).collect();
    let title = match n.n_objects {
        Some(t) => format!("objects reviewed per inspector (of {t})"),
        None => "objects reviewed per inspector".to_string(),
    };
    out.push((
        "progress.svg".to_string(),
        bars("progress", &title, &names, &done)?,
    ));
    let (cl, cv): (Vec<String>, Vec<usize>) = n.confidence.iter().map(|(k, v)| (k.clone(), *v)).unzip();
    out.push((
        "confidence.svg".to_string(),
        bars("confidence", "consensus verdicts per confidence", &cl, &cv)?,
    ));
    let (fl, fv): (Vec<String>, Vec<usize>) = n.flags.iter().map(|(k, v)| (k.clone(), *v)).unzip();
    out.push((
        "flags.svg".to_string(),
        bars("flags", "consensus verdicts per flag", &fl, &fv)?,
    ));
    if let Some(a) = &n.audit {
        out.extend(super::audit::plots(a)?);
    }
    Ok(out)
}
