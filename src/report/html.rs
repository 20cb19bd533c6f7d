/*!
`report.html`: one self-contained page (inline CSS, plots inlined as SVG) with
the report's tables.
*/
use super::ReportNumbers;
use std::fmt::Write;

/// Escape text for HTML.
pub fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

fn pct(x: Option<f64>) -> String {
    x.map_or("–".into(), |x| format!("{:.1} %", 100.0 * x))
}

fn num(x: Option<f64>, digits: usize) -> String {
    x.map_or("–".into(), |x| format!("{x:.digits$}"))
}

fn plot(svgs: &[(String, String)], name: &str) -> String {
    svgs.iter()
        .find(|(n, _)| n == name)
        .map(|(_, s)| {
            // Drop an XML declaration so the SVG can sit inside HTML.
            let body = match s.find("<svg") {
                Some(i) => &s[i..],
                None => s.as_str(),
            };
            format!("<figure>{body}<figcaption>{}</figcaption></figure>", esc(name))
        })
        .unwrap_or_default()
}

fn matrix_table(out: &mut String, n: &ReportNumbers, m: &[Vec<usize>], acc: &[Option<f64>], what: &str) {
    let _ = write!(out, "<table><tr><th>vetted \\ {}</th>", esc(what));
    for c in &n.classes {
        let _ = write!(out, "<th>{}</th>", esc(c));
    }
    out.push_str("<th>total</th><th>accuracy</th></tr>");
    for (i, row) in m.iter().enumerate() {
        let _ = write!(out, "<tr><th>{}</th>", esc(&n.classes[i]));
        for (j, v) in row.iter().enumerate() {
            let class = if i == j { " class=\"diag\"" } else { "" };
            let _ = write!(out, "<td{class}>{v}</td>");
        }
        let total: usize = row.iter().sum();
        let _ = write!(out, "<td>{total}</td><td>{}</td></tr>", pct(acc[i]));
    }
    out.push_str("</table>");
}

/// The page.
pub fn render(n: &ReportNumbers, svgs: &[(String, String)]) -> String {
    let mut o = String::new();
    let title = format!("zvet report — {}", esc(&n.campaign));
    let _ = write!(
        o,
        "<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>{title}</title>\
         <style>body{{font-family:sans-serif;max-width:1100px;margin:2em auto;padding:0 1em}}\
         table{{border-collapse:collapse;margin:0.5em 0 1.5em}}th,td{{border:1px solid #aaa;padding:3px 8px;text-align:right}}\
         th{{background:#eee}}td.diag{{background:#dfd}}figure{{display:inline-block;margin:0 1em 1em 0}}\
         figcaption{{font-size:small;color:#666}}</style></head><body>\n<h1>{title}</h1>\n"
    );
    let _ = writeln!(
        o,
        "<p>Generated {} by zvet {}. Objects in the campaign: {}; reviewed by anyone: {}.</p>",
        n.generated.format("%Y-%m-%d %H:%M UTC"),
        env!("CARGO_PKG_VERSION"),
        n.n_objects.map_or("unknown".into(), |x| x.to_string()),
        n.n_reviewed
    );
    o.push_str("<h2>Consensus</h2><table><tr><th>state</th><th>objects</th></tr>");
    for (k, v) in &n.consensus {
        let _ = write!(o, "<tr><th>{}</th><td>{v}</td></tr>", esc(k));
    }
    o.push_str("</table>\n");
    match &n.audit {
        Some(a) => o.push_str(&super::audit::html(a, svgs, plot)),
        None => o.push_str(
            "<p>No audit sample: the counts below are over whatever was vetted, which the queue \
             chose for being doubtful, so they do not describe the catalogue. Draw one with \
             <code>zvet campaign sample DIR --size N</code>.</p>",
        ),
    }

    let _ = write!(
        o,
        "<h2>Photometric class vs vetted class (raw counts)</h2><p>{} objects with a photometric class; \
         overall agreement {}. Accuracy per row = fraction of the objects vetted as that class \
         that the photometric classifier put there.</p>",
        n.photometric.n,
        pct(n.photometric.overall)
    );
    matrix_table(
        &mut o,
        n,
        &n.photometric.matrix,
        &n.photometric.accuracy,
        "photometric",
    );
    o.push_str(&plot(svgs, "confusion_photometric.svg"));
    let _ = write!(
        o,
        "<h2>Automatic class vs vetted class (raw counts)</h2><p>{} objects with an automatic fit; overall agreement {}.</p>",
        n.automatic.n,
        pct(n.automatic.overall)
    );
    matrix_table(&mut o, n, &n.automatic.matrix, &n.automatic.accuracy, "automatic");
    o.push_str(&plot(svgs, "confusion_automatic.svg"));

    let _ = write!(
        o,
        "<h2>Automatic vs vetted redshift</h2><p>{} objects compared; catastrophic failures \
         (|Δz|/(1+z<sub>vetted</sub>) &gt; {}): {} ({}).</p>",
        n.z_pairs.len(),
        n.z_threshold,
        n.z_catastrophic,
        pct(n.z_catastrophic_rate)
    );
    o.push_str(&plot(svgs, "redshift_comparison.svg"));
    if !n.outliers.is_empty() {
        o.push_str("<table><tr><th>id</th><th>automatic</th><th>z auto</th><th>vetted</th><th>z vetted</th><th>|Δz|/(1+z)</th></tr>");
        for x in &n.outliers {
            let _ = write!(
                o,
                "<tr><td>{}</td><td>{}</td><td>{:.5}</td><td>{}</td><td>{:.5}</td><td>{:.4}</td></tr>",
                esc(&x.id),
                esc(&x.auto_class),
                x.auto_z,
                esc(&x.vetted_class),
                x.vetted_z,
                x.dz
            );
        }
        o.push_str("</table>\n");
    }

    o.push_str("<h2>Progress per inspector</h2><table><tr><th>inspector</th><th>reviewed</th>");
    let grades = crate::review::Confidence::ALL.map(|c| c.as_str());
    for c in grades.iter().chain(&["no certainty", "log problems"]) {
        let _ = write!(o, "<th>{c}</th>");
    }
    o.push_str("</tr>");
    for i in &n.inspectors {
        let _ = write!(o, "<tr><th>{}</th><td>{}</td>", esc(&i.name), i.reviewed);
        for c in i.by_confidence {
            let _ = write!(o, "<td>{c}</td>");
        }
        let _ = write!(o, "<td>{}</td></tr>", i.log_problems);
    }
    o.push_str("</table>");
    o.push_str(&plot(svgs, "progress.svg"));

    o.push_str(
        "<h2>Certainty and flags (consensus verdicts)</h2><table><tr><th>certainty</th><th>objects</th></tr>",
    );
    for (k, v) in &n.confidence {
        let _ = write!(o, "<tr><th>{}</th><td>{v}</td></tr>", esc(k));
    }
    o.push_str("</table><table><tr><th>flag</th><th>objects</th></tr>");
    for (k, v) in &n.flags {
        let _ = write!(o, "<tr><th>{}</th><td>{v}</td></tr>", esc(k));
    }
    o.push_str("</table>");
    o.push_str(&plot(svgs, "confidence.svg"));
    o.push_str(&plot(svgs, "flags.svg"));

    if let Some(a) = &n.agreement {
        let _ = write!(
            o,
            "<h2>Inspector agreement</h2><p>{} objects reviewed by two or more inspectors.</p>\
             <table><tr><th>pair</th><th>in common</th><th>same class</th><th>Cohen's κ</th>\
             <th>z compared</th><th>z within tolerance</th><th>median |Δz|/(1+z)</th></tr>",
            a.n_multi
        );
        for p in &a.pairs {
            let _ = write!(
                o,
                "<tr><th>{} – {}</th><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td><td>{}</td></tr>",
                esc(&p.a),
                esc(&p.b),
                p.n_common,
                pct(p.class_agreement),
                num(p.kappa, 3),
                p.n_z,
                pct(p.z_agreement),
                num(p.median_dz, 5)
            );
        }
        o.push_str("</table><table><tr><th>class</th><th>uses</th><th>specific agreement</th></tr>");
        for c in &a.per_class {
            let _ = write!(
                o,
                "<tr><th>{}</th><td>{}</td><td>{}</td></tr>",
                c.class.as_str(),
                c.uses,
                pct(c.agreement)
            );
        }
        o.push_str("</table>\n");
    }
    if !n.conflicts.is_empty() {
        o.push_str("<h2>Conflicts awaiting adjudication</h2><table><tr><th>id</th><th>reason</th></tr>");
        for (id, why) in &n.conflicts {
            let _ = write!(
                o,
                "<tr><td>{}</td><td style=\"text-align:left\">{}</td></tr>",
                esc(id),
                esc(why)
            );
        }
        o.push_str("</table>\n");
    }
    if !n.problems.is_empty() {
        o.push_str("<h2>Problems met while reading</h2><ul>");
        for p in &n.problems {
            let _ = write!(o, "<li>{}</li>", esc(p));
        }
        o.push_str("</ul>\n");
    }
    o.push_str("</body></html>\n");
    o
}
