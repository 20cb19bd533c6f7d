/*!
The report's audit section: estimates over the whole catalogue from the audit
sample, with intervals, beside the raw counts; plots of the estimated
confusion with intervals, the reliability diagram and the error rate by
magnitude.
*/
use super::html::esc;
use super::plots::{svg_plot, text_err};
use super::ReportError;
use crate::audit::estimate::Estimate;
use crate::audit::{AuditNumbers, BinRates};
use plotters::prelude::*;
use std::fmt::Write;

/// Plot files of the audit section.
pub const AUDIT_FILES: [&str; 3] = [
    "audit_confusion.svg",
    "audit_reliability.svg",
    "audit_error_by_mag.svg",
];

fn ci(e: &Estimate) -> String {
    if e.is_defined() {
        format!(
            "{:.1} % [{:.1}, {:.1}]",
            100.0 * e.value,
            100.0 * e.lo,
            100.0 * e.hi
        )
    } else {
        "–".into()
    }
}

/// The HTML section.
pub fn html(
    a: &AuditNumbers,
    svgs: &[(String, String)],
    plot: impl Fn(&[(String, String)], &str) -> String,
) -> String {
    let mut o = String::new();
    let _ = write!(
        o,
        "<h2>Audit: the whole catalogue, estimated from the audit sample</h2>\
         <p>Audit sample: {} objects drawn (strata <code>{}</code>, {} allocation, seed {}); {} vetted so far. \
         Only the vetted audit-sample objects feed these estimates; the {} objects vetted outside the sample \
         are training data, not part of the estimates. Method: {}. Brackets are 95 % intervals.</p>",
        a.sampled,
        esc(&a.strata_spec),
        esc(&a.allocation),
        a.seed,
        a.vetted,
        a.vetted_outside,
        esc(&a.method)
    );
    if let Some(c) = a
        .photometric
        .accuracy
        .is_defined()
        .then_some(a.photometric.accuracy.coverage)
    {
        if c < 1.0 {
            let _ = write!(
                o,
                "<p><b>Strata holding {:.1} % of the catalogue have no vetted sample object yet</b>; the estimates describe the rest.</p>",
                100.0 * (1.0 - c)
            );
        }
    }
    o.push_str("<table><tr><th>stratum</th><th>objects</th><th>drawn</th><th>vetted</th><th>accuracy interval width</th></tr>");
    for s in &a.strata {
        let _ = write!(
            o,
            "<tr><th>{}</th><td>{}</td><td>{}</td><td>{}</td><td>{:.3}</td></tr>",
            esc(&s.key),
            s.population,
            s.sampled,
            s.vetted,
            s.accuracy_width
        );
    }
    o.push_str("</table>");
    let p = &a.photometric;
    let _ = write!(
        o,
        "<h3>Photometric classifier</h3><p>Overall accuracy {} (error rate {}).</p>\
         <table><tr><th>vetted \\ photometric</th>",
        ci(&p.accuracy),
        if p.accuracy.is_defined() {
            format!("{:.1} %", 100.0 * (1.0 - p.accuracy.value))
        } else {
            "– : no vetted sample object yet".to_string()
        }
    );
    for c in &p.cols {
        let _ = write!(o, "<th>{}: share of catalogue</th><th>raw count</th>", esc(c));
    }
    o.push_str("<th>completeness</th></tr>");
    for (i, r) in p.rows.iter().enumerate() {
        let _ = write!(o, "<tr><th>{}</th>", esc(r));
        for j in 0..p.cols.len() {
            let class = if p.rows[i] == p.cols[j] {
                " class=\"diag\""
            } else {
                ""
            };
            let _ = write!(
                o,
                "<td{class}>{}</td><td>{}</td>",
                ci(&p.cells[i][j]),
                p.counts[i][j]
            );
        }
        let _ = write!(
            o,
            "<td>{}</td></tr>",
            p.completeness.get(i).map_or("–".into(), ci)
        );
    }
    o.push_str("<tr><th>purity</th>");
    for e in &p.purity {
        let _ = write!(o, "<td colspan=\"2\">{}</td>", ci(e));
    }
    o.push_str("<td></td></tr></table>");
    o.push_str(&plot(svgs, "audit_confusion.svg"));

    o.push_str("<h3>Automatic fit</h3><table><tr><th>bin</th><th>class error rate</th><th>catastrophic redshift rate</th></tr>");
    let row = |o: &mut String, r: &BinRates| {
        let _ = write!(
            o,
            "<tr><th>{}</th><td>{} (n = {})</td><td>{} (n = {})</td></tr>",
            esc(&r.bin),
            ci(&r.class_error),
            r.class_error.n,
            ci(&r.catastrophic),
            r.catastrophic.n
        );
    };
    row(&mut o, &a.automatic);
    for r in a.automatic_by_mag.iter().chain(&a.automatic_by_snr) {
        row(&mut o, r);
    }
    o.push_str("</table>");
    o.push_str(&plot(svgs, "audit_error_by_mag.svg"));

    let _ = write!(
        o,
        "<h3>Calibration of the photometric class probability</h3><p>For each bin of the catalogue's \
         probability of its chosen class: the mean probability and the estimated fraction of objects whose \
         photometric class is right. A calibrated classifier has the two equal. Brier score (event: the \
         photometric class is right): {}.</p><table><tr><th>probability</th><th>mean probability</th>\
         <th>fraction right</th><th>vetted</th></tr>",
        if a.brier.is_defined() {
            format!("{:.3} [{:.3}, {:.3}]", a.brier.value, a.brier.lo, a.brier.hi)
        } else {
            "–".into()
        }
    );
    for b in &a.reliability {
        let _ = write!(
            o,
            "<tr><th>{:.1}–{:.1}</th><td>{}</td><td>{}</td><td>{}</td></tr>",
            b.lo,
            b.hi,
            if b.mean_prob.is_defined() {
                format!("{:.3}", b.mean_prob.value)
            } else {
                "–".into()
            },
            ci(&b.right),
            b.right.n
        );
    }
    o.push_str("</table>");
    o.push_str(&plot(svgs, "audit_reliability.svg"));
    if !a.plan.is_empty() {
        o.push_str("<h3>How large the sample must grow</h3><ul>");
        for l in &a.plan {
            let _ = write!(o, "<li>{}</li>", esc(&l.sentence()));
        }
        o.push_str("</ul>");
    }
    o
}

/// Points with vertical error bars on a category axis.
fn interval_plot(
    name: &str,
    title: &str,
    y_desc: &str,
    labels: &[String],
    values: &[&Estimate],
) -> Result<String, ReportError> {
    let n = labels.len().max(1);
    svg_plot(name, ((140 + 80 * n) as u32, 380), |root| {
        let mut chart = ChartBuilder::on(root)
            .caption(title, ("sans-serif", 15))
            .margin(12)
            .x_label_area_size(60)
            .y_label_area_size(50)
            .build_cartesian_2d(-0.5f64..(n as f64 - 0.5), 0f64..1f64)
            .map_err(text_err)?;
        chart
            .configure_mesh()
            .disable_x_mesh()
            .x_labels(n)
            .x_label_formatter(&|v| {
                let i = v.round();
                if (v - i).abs() < 1e-6 && i >= 0.0 {
                    labels.get(i as usize).cloned().unwrap_or_default()
                } else {
                    String::new()
                }
            })
            .y_desc(y_desc)
            .draw()
            .map_err(text_err)?;
        for (i, e) in values.iter().enumerate().filter(|(_, e)| e.is_defined()) {
            let x = i as f64;
            chart
                .draw_series(LineSeries::new([(x, e.lo), (x, e.hi)], BLUE.stroke_width(2)))
                .map_err(text_err)?;
            chart
                .draw_series([Circle::new((x, e.value), 4, BLUE.filled())])
                .map_err(text_err)?;
        }
        Ok(())
    })
}

/// The audit plots: (file name, SVG text).
pub fn plots(a: &AuditNumbers) -> Result<Vec<(String, String)>, ReportError> {
    let mut out = Vec::new();
    // estimated confusion cells (off-diagonal ones are the errors)
    let p = &a.photometric;
    let mut labels = Vec::new();
    let mut vals = Vec::new();
    for (i, r) in p.rows.iter().enumerate() {
        for (j, c) in p.cols.iter().enumerate() {
            if p.counts[i][j] > 0 || p.cells[i][j].value > 0.0 {
                labels.push(format!("{}→{}", &r[..1], &c[..1]));
                vals.push(&p.cells[i][j]);
            }
        }
    }
    out.push((
        AUDIT_FILES[0].to_string(),
        interval_plot(
            "audit_confusion",
            "share of the catalogue per (vetted → photometric) class, 95 % intervals",
            "share of catalogue",
            &labels,
            &vals,
        )?,
    ));
    // reliability diagram
    let name = "audit_reliability";
    let rel = svg_plot(name, (520, 480), |root| {
        let mut chart = ChartBuilder::on(root)
            .caption(
                "reliability of the photometric class probability",
                ("sans-serif", 15),
            )
            .margin(12)
            .x_label_area_size(40)
            .y_label_area_size(50)
            .build_cartesian_2d(0f64..1f64, 0f64..1f64)
            .map_err(text_err)?;
        chart
            .configure_mesh()
            .x_desc("stated probability of the chosen class")
            .y_desc("fraction right (estimated)")
            .draw()
            .map_err(text_err)?;
        chart
            .draw_series(LineSeries::new([(0.0, 0.0), (1.0, 1.0)], BLACK.mix(0.4)))
            .map_err(text_err)?;
        for b in a
            .reliability
            .iter()
            .filter(|b| b.right.is_defined() && b.mean_prob.is_defined())
        {
            let x = b.mean_prob.value;
            chart
                .draw_series(LineSeries::new(
                    [(x, b.right.lo), (x, b.right.hi)],
                    BLUE.stroke_width(2),
                ))
                .map_err(text_err)?;
            chart
                .draw_series([Circle::new((x, b.right.value), 4, BLUE.filled())])
                .map_err(text_err)?;
        }
        Ok(())
    })?;
    out.push((AUDIT_FILES[1].to_string(), rel));
    let labels: Vec<String> = a.automatic_by_mag.iter().map(|r| r.bin.clone()).collect();
    let vals: Vec<&Estimate> = a.automatic_by_mag.iter().map(|r| &r.class_error).collect();
    out.push((
        AUDIT_FILES[2].to_string(),
        interval_plot(
            "audit_error_by_mag",
            "automatic class error rate by r magnitude, 95 % intervals",
            "class error rate",
            &labels,
            &vals,
        )?,
    ));
    Ok(out)
}
