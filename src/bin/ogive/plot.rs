//! `ogive plot`: a query's rows `(x, y [, series])` drawn as an SVG file.
//!
//! Three kinds: `steps` (a cdf: each level holds until the next x, the last one runs to the
//! right edge), `lines` (a curve through the points in x order) and `bars` (one bar per
//! row; x may be numeric, as a histogram's bin centres, or text, as categories). A third
//! column splits the rows into series, drawn in the shell's palette and named in the
//! legend. Rows with a NULL x or y are left out.
//!
//! Every coordinate must be finite: a value or a span of values too large to scale (data
//! spanning +-1.7e308) is refused with an error, never drawn as NaN. The output is SVG only:
//! `--out` must name a `.svg` file (rendering PNG would need a rasterizer in the build;
//! convert the SVG instead).
//!
//! The look: a warm paper background, a white plot panel with a hairline frame, dashed
//! grid lines at "nice" ticks (1, 2 or 5 times a power of ten), the title in the top left,
//! a small line under it saying what was drawn, and the legend's swatches under that.

use std::fmt::Write as _;
use std::path::Path;

use rusqlite::types::Value;

use crate::Failure;
use crate::db::{self, Outcome, Params, ResultSet};
use crate::run::{Source, Step, step, warn_unused};

/// How rows are drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Kind {
    Steps,
    Lines,
    Bars,
}

impl Kind {
    fn from_word(w: &str) -> Option<Kind> {
        match w.trim().to_ascii_lowercase().as_str() {
            "steps" => Some(Kind::Steps),
            "lines" => Some(Kind::Lines),
            "bars" => Some(Kind::Bars),
            _ => None,
        }
    }
}

/// What to draw: the rows and the words around them.
pub struct Figure<'a> {
    pub kind: Kind,
    pub title: &'a str,
    /// The small line under the title.
    pub caption: &'a str,
    pub rows: &'a ResultSet,
}

/// The shell's series colours, in order.
const PALETTE: &[&str] = &[
    "#0f6b75", "#d1842a", "#a8423c", "#4b5ea8", "#6b8e23", "#8e4f86", "#2f8f5b", "#c25b8b",
    "#5f6b73", "#b79b2b", "#3a9fc1", "#7a5230",
];
const PAPER: &str = "#fbf8f1";
const INK: &str = "#23303b";
const MUTED: &str = "#6f6a60";
const GRID: &str = "#e4ddcf";
const PANEL: &str = "#ffffff";
const FRAME: &str = "#cfc6b4";
const FONT: &str = "DejaVu Sans, Verdana, Helvetica, Arial, sans-serif";

const WIDTH: f64 = 820.0;
const HEIGHT: f64 = 500.0;

fn esc(s: &str) -> String {
    s.replace('&', "&amp;")
        .replace('<', "&lt;")
        .replace('>', "&gt;")
        .replace('"', "&quot;")
}

/// Tick positions covering [lo, hi]: about `target` of them at a step of 1, 2 or 5 times a
/// power of ten; returns (first tick, step, count).
pub fn ticks(lo: f64, hi: f64, target: usize) -> (f64, f64, usize) {
    let span = if hi > lo { hi - lo } else { lo.abs().max(1.0) };
    let raw = span / target.max(1) as f64;
    let mag = 10f64.powf(raw.log10().floor());
    let step = [1.0, 2.0, 5.0, 10.0]
        .iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag);
    let first = (lo / step).ceil() * step;
    let count = (((hi - first) / step) + 1e-9).floor() as usize + 1;
    (first, step, count)
}

/// A tick label: as many decimals as the step needs, no more.
pub fn tick_label(v: f64, step: f64) -> String {
    let decimals = if step >= 1.0 {
        0
    } else {
        (-step.log10().floor()) as usize
    };
    let v = if v.abs() < step * 1e-9 { 0.0 } else { v };
    if v.abs() >= 1e7 || (v != 0.0 && v.abs() < 1e-4) {
        format!("{v:.2e}")
    } else {
        format!("{v:.decimals$}")
    }
}

/// Widens a range to whole ticks, and gives an empty range some width.
fn nice_range(lo: f64, hi: f64) -> (f64, f64) {
    let (lo, hi) = if hi > lo {
        (lo, hi)
    } else {
        (lo - 0.5, hi + 0.5)
    };
    let (_, step, _) = ticks(lo, hi, 6);
    ((lo / step).floor() * step, (hi / step).ceil() * step)
}

fn number(v: &Value) -> Option<f64> {
    match v {
        Value::Integer(i) => Some(*i as f64),
        Value::Real(r) if r.is_finite() => Some(*r),
        _ => None,
    }
}

fn label(v: &Value) -> String {
    match v {
        Value::Null => "NULL".into(),
        other => ogive::sqlite::render(other),
    }
}

/// Rows grouped by series, in order of first appearance; x is a number or a category.
struct Series {
    name: String,
    points: Vec<(X, f64)>,
}

#[derive(Clone, PartialEq)]
enum X {
    Num(f64),
    Cat(String),
}

fn series(rows: &ResultSet, kind: Kind) -> Result<(Vec<Series>, bool), String> {
    let ncol = rows.columns.len();
    if !(2..=3).contains(&ncol) {
        return Err(format!(
            "a plot needs 2 or 3 columns (x, y [, series]), the query gave {ncol}: {}",
            rows.columns.join(", ")
        ));
    }
    let categorical = rows.rows.iter().any(|r| matches!(r[0], Value::Text(_)));
    if categorical && kind != Kind::Bars {
        return Err(format!(
            "x ({}) holds text; only --kind bars draws categories",
            rows.columns[0]
        ));
    }
    let mut out: Vec<Series> = Vec::new();
    for r in &rows.rows {
        let y = match &r[1] {
            Value::Null => continue,
            v => number(v).ok_or_else(|| {
                format!(
                    "y ({}) must be a finite number, got {}",
                    rows.columns[1],
                    label(v)
                )
            })?,
        };
        let x = match &r[0] {
            Value::Null => continue,
            Value::Text(t) => X::Cat(t.clone()),
            v if categorical => X::Cat(label(v)),
            v => X::Num(number(v).ok_or_else(|| {
                format!(
                    "x ({}) must be a finite number, got {}",
                    rows.columns[0],
                    label(v)
                )
            })?),
        };
        let name = if ncol == 3 {
            label(&r[2])
        } else {
            rows.columns[1].clone()
        };
        match out.iter_mut().find(|s| s.name == name) {
            Some(s) => s.points.push((x, y)),
            None => out.push(Series {
                name,
                points: vec![(x, y)],
            }),
        }
    }
    if out.is_empty() {
        return Err("the query gave no rows with both x and y to draw".into());
    }
    if !categorical && kind != Kind::Bars {
        for s in &mut out {
            s.points.sort_by(|a, b| match (&a.0, &b.0) {
                (X::Num(p), X::Num(q)) => p.total_cmp(q),
                _ => std::cmp::Ordering::Equal,
            });
        }
    }
    Ok((out, categorical))
}

/// Renders a figure as SVG text.
pub fn svg(fig: &Figure) -> Result<String, String> {
    let (series, categorical) = series(fig.rows, fig.kind)?;
    let xname = &fig.rows.columns[0];
    let yname = &fig.rows.columns[1];

    // Legend layout: swatches in rows under the caption.
    let mut legend: Vec<(f64, f64, usize)> = Vec::new();
    let (mut lx, mut ly) = (72.0, 78.0);
    for (i, s) in series.iter().enumerate() {
        let w = 34.0 + 7.2 * s.name.chars().count() as f64;
        if lx + w > WIDTH - 24.0 && lx > 72.0 {
            lx = 72.0;
            ly += 20.0;
        }
        legend.push((lx, ly, i));
        lx += w;
    }
    let (left, right, top, bottom) = (72.0, WIDTH - 28.0, ly + 20.0, HEIGHT - 62.0);

    // Domains.
    let ys = series.iter().flat_map(|s| s.points.iter().map(|p| p.1));
    let (mut ylo, mut yhi) = ys.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), y| {
        (a.min(y), b.max(y))
    });
    raw_span(yname, ylo, yhi)?;
    if fig.kind == Kind::Bars {
        ylo = ylo.min(0.0);
        yhi = yhi.max(0.0);
    }
    raw_span(yname, ylo, yhi)?;
    let (ylo, yhi) = if ylo >= 0.0 && yhi <= 1.0 && fig.kind == Kind::Steps {
        (0.0, 1.0)
    } else {
        nice_range(ylo, yhi)
    };
    let cats: Vec<String> = if categorical {
        let mut c: Vec<String> = Vec::new();
        for s in &series {
            for (x, _) in &s.points {
                if let X::Cat(t) = x
                    && !c.contains(t)
                {
                    c.push(t.clone());
                }
            }
        }
        c
    } else {
        Vec::new()
    };
    let xs: Vec<f64> = series
        .iter()
        .flat_map(|s| {
            s.points
                .iter()
                .filter_map(|p| if let X::Num(x) = p.0 { Some(x) } else { None })
        })
        .collect();
    let (mut xlo, mut xhi) = xs
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    if !categorical {
        raw_span(xname, xlo, xhi)?;
    }
    // Numeric bars: width from the closest spacing of distinct x values.
    let mut bar_w = 1.0;
    if fig.kind == Kind::Bars && !categorical {
        let mut d: Vec<f64> = xs.clone();
        d.sort_by(f64::total_cmp);
        d.dedup();
        bar_w = d
            .windows(2)
            .map(|w| w[1] - w[0])
            .fold(f64::INFINITY, f64::min);
        if !bar_w.is_finite() {
            bar_w = 1.0;
        }
        xlo -= bar_w / 2.0;
        xhi += bar_w / 2.0;
    }
    if xhi <= xlo {
        xlo -= 0.5;
        xhi += 0.5;
    }
    if !categorical {
        span_ok(xname, xlo, xhi)?;
    }
    span_ok(yname, ylo, yhi)?;
    let px = |x: f64| left + (x - xlo) / (xhi - xlo) * (right - left);
    let py = |y: f64| bottom - (y - ylo) / (yhi - ylo) * (bottom - top);

    let mut s = String::new();
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{WIDTH}" height="{HEIGHT}" viewBox="0 0 {WIDTH} {HEIGHT}" font-family="{FONT}">"#
    );
    let _ = writeln!(
        s,
        r#"<rect width="{WIDTH}" height="{HEIGHT}" fill="{PAPER}"/>"#
    );
    // A long title gets a smaller font (bold glyphs are about 0.62 em wide on average).
    let title_size = (((WIDTH - left - 24.0) / (0.62 * fig.title.chars().count().max(1) as f64))
        .floor())
    .clamp(11.0, 19.0);
    let _ = writeln!(
        s,
        r#"<text x="{left}" y="34" font-size="{title_size}" font-weight="bold" fill="{INK}">{}</text>"#,
        esc(fig.title)
    );
    let _ = writeln!(
        s,
        r#"<text x="{left}" y="56" font-size="12" fill="{MUTED}">{}</text>"#,
        esc(fig.caption)
    );
    let _ = writeln!(
        s,
        r#"<rect x="{left}" y="{top}" width="{:.2}" height="{:.2}" fill="{PANEL}" stroke="{FRAME}" stroke-width="1"/>"#,
        right - left,
        bottom - top
    );

    // Grid and y ticks.
    let (y0, ystep, yn) = ticks(ylo, yhi, 6);
    for k in 0..yn {
        let v = y0 + k as f64 * ystep;
        let y = py(v);
        let _ = writeln!(
            s,
            r#"<line x1="{left}" y1="{y:.2}" x2="{right}" y2="{y:.2}" stroke="{GRID}" stroke-dasharray="4 3"/>"#
        );
        let _ = writeln!(
            s,
            r#"<text x="{:.2}" y="{:.2}" font-size="12" fill="{MUTED}" text-anchor="end">{}</text>"#,
            left - 8.0,
            y + 4.0,
            tick_label(v, ystep)
        );
    }
    // x ticks.
    if categorical {
        let band = (right - left) / cats.len() as f64;
        let rotate = cats.iter().map(|c| c.chars().count()).max().unwrap_or(0) as f64 * 7.0 > band;
        for (i, c) in cats.iter().enumerate() {
            let x = left + band * (i as f64 + 0.5);
            if rotate {
                let _ = writeln!(
                    s,
                    r#"<text x="{x:.2}" y="{:.2}" font-size="12" fill="{MUTED}" text-anchor="end" transform="rotate(-35 {x:.2} {:.2})">{}</text>"#,
                    bottom + 16.0,
                    bottom + 16.0,
                    esc(c)
                );
            } else {
                let _ = writeln!(
                    s,
                    r#"<text x="{x:.2}" y="{:.2}" font-size="12" fill="{MUTED}" text-anchor="middle">{}</text>"#,
                    bottom + 18.0,
                    esc(c)
                );
            }
        }
    } else {
        let (x0, xstep, xn) = ticks(xlo, xhi, 8);
        for k in 0..xn {
            let v = x0 + k as f64 * xstep;
            let x = px(v);
            let _ = writeln!(
                s,
                r#"<line x1="{x:.2}" y1="{top}" x2="{x:.2}" y2="{bottom}" stroke="{GRID}" stroke-dasharray="4 3"/>"#
            );
            let _ = writeln!(
                s,
                r#"<line x1="{x:.2}" y1="{bottom}" x2="{x:.2}" y2="{:.2}" stroke="{INK}"/>"#,
                bottom + 5.0
            );
            let _ = writeln!(
                s,
                r#"<text x="{x:.2}" y="{:.2}" font-size="12" fill="{MUTED}" text-anchor="middle">{}</text>"#,
                bottom + 19.0,
                tick_label(v, xstep)
            );
        }
    }
    // Axes.
    let _ = writeln!(
        s,
        r#"<line x1="{left}" y1="{bottom}" x2="{right}" y2="{bottom}" stroke="{INK}" stroke-width="1.2"/>"#
    );
    let _ = writeln!(
        s,
        r#"<line x1="{left}" y1="{top}" x2="{left}" y2="{bottom}" stroke="{INK}" stroke-width="1.2"/>"#
    );
    let _ = writeln!(
        s,
        r#"<text x="{:.2}" y="{:.2}" font-size="13" fill="{INK}" text-anchor="middle">{}</text>"#,
        (left + right) / 2.0,
        HEIGHT - 16.0,
        esc(xname)
    );
    let _ = writeln!(
        s,
        r#"<text x="18" y="{:.2}" font-size="13" fill="{INK}" text-anchor="middle" transform="rotate(-90 18 {:.2})">{}</text>"#,
        (top + bottom) / 2.0,
        (top + bottom) / 2.0,
        esc(yname)
    );

    // Data, clipped to the panel.
    let _ = writeln!(
        s,
        r#"<clipPath id="panel"><rect x="{left}" y="{top}" width="{:.2}" height="{:.2}"/></clipPath>"#,
        right - left,
        bottom - top
    );
    let _ = writeln!(s, r#"<g clip-path="url(#panel)">"#);
    let nser = series.len();
    for (i, ser) in series.iter().enumerate() {
        let colour = PALETTE[i % PALETTE.len()];
        match fig.kind {
            Kind::Lines | Kind::Steps => {
                let mut d = String::new();
                let pts: Vec<(f64, f64)> = ser
                    .points
                    .iter()
                    .filter_map(|(x, y)| {
                        if let X::Num(x) = x {
                            Some((px(*x), py(*y)))
                        } else {
                            None
                        }
                    })
                    .collect();
                for (k, (x, y)) in pts.iter().enumerate() {
                    if k == 0 {
                        let _ = write!(d, "M{x:.2},{y:.2}");
                    } else if fig.kind == Kind::Steps {
                        let _ = write!(d, "H{x:.2}V{y:.2}");
                    } else {
                        let _ = write!(d, "L{x:.2},{y:.2}");
                    }
                }
                if fig.kind == Kind::Steps {
                    let _ = write!(d, "H{right:.2}");
                }
                let _ = writeln!(
                    s,
                    r#"<path d="{d}" fill="none" stroke="{colour}" stroke-width="2.2" stroke-linejoin="round" stroke-linecap="round"/>"#
                );
                if pts.len() == 1 {
                    let (x, y) = pts[0];
                    let _ = writeln!(
                        s,
                        r#"<circle cx="{x:.2}" cy="{y:.2}" r="3.5" fill="{colour}"/>"#
                    );
                }
            }
            Kind::Bars => {
                for (x, y) in &ser.points {
                    let (x0, w) = match x {
                        X::Cat(c) => {
                            let band = (right - left) / cats.len() as f64;
                            let idx = cats.iter().position(|k| k == c).unwrap_or(0) as f64;
                            let inner = band * 0.78;
                            let w = inner / nser as f64;
                            (left + band * idx + (band - inner) / 2.0 + w * i as f64, w)
                        }
                        X::Num(v) => {
                            let full = (px(*v + bar_w / 2.0) - px(*v - bar_w / 2.0)) * 0.92;
                            let w = full / nser as f64;
                            (px(*v) - full / 2.0 + w * i as f64, w)
                        }
                    };
                    let (ya, yb) = (py(y.max(0.0).max(ylo)), py(y.min(0.0).max(ylo)));
                    let _ = writeln!(
                        s,
                        r#"<rect x="{x0:.2}" y="{ya:.2}" width="{:.2}" height="{:.2}" fill="{colour}" fill-opacity="0.82" stroke="{colour}" stroke-width="0.8"/>"#,
                        w.max(0.5),
                        (yb - ya).max(0.0)
                    );
                }
            }
        }
    }
    let _ = writeln!(s, "</g>");
    // Legend.
    for (x, y, i) in legend {
        let colour = PALETTE[i % PALETTE.len()];
        match fig.kind {
            Kind::Bars => {
                let _ = writeln!(
                    s,
                    r#"<rect x="{x:.2}" y="{:.2}" width="18" height="10" fill="{colour}" fill-opacity="0.82"/>"#,
                    y - 9.0
                );
            }
            _ => {
                let _ = writeln!(
                    s,
                    r#"<line x1="{x:.2}" y1="{:.2}" x2="{:.2}" y2="{:.2}" stroke="{colour}" stroke-width="3" stroke-linecap="round"/>"#,
                    y - 4.0,
                    x + 18.0,
                    y - 4.0
                );
            }
        }
        let _ = writeln!(
            s,
            r#"<text x="{:.2}" y="{y:.2}" font-size="12" fill="{INK}">{}</text>"#,
            x + 24.0,
            esc(&series[i].name)
        );
    }
    s.push_str("</svg>\n");
    // The last guard: no coordinate may have come out as NaN or an infinity.
    if !coordinates_finite(&s) {
        return Err(format!(
            "the values of {xname} and {yname} cannot be scaled to the plot (a coordinate \
             overflows); narrow the query's range"
        ));
    }
    Ok(s)
}

/// Whether every attribute value of the SVG (the coordinates; user text is only ever
/// element content) is free of NaN and infinities.
fn coordinates_finite(svg: &str) -> bool {
    let mut rest = svg;
    while let Some(i) = rest.find("=\"") {
        rest = &rest[i + 2..];
        let end = rest.find('"').unwrap_or(rest.len());
        let value = &rest[..end];
        if value.contains("NaN") || value.contains("inf") {
            return false;
        }
        rest = &rest[end..];
    }
    true
}

/// Refuses data whose own span overflows (values near +-1.7e308 at both ends).
fn raw_span(name: &str, lo: f64, hi: f64) -> Result<(), String> {
    if (hi - lo).is_finite() || lo > hi {
        return Ok(());
    }
    Err(format!(
        "{name} spans {} to {}: the span overflows a double, so it cannot be scaled to the \
         plot; narrow or rescale the values in the query (for example divide them by 1e300)",
        ogive::sqlite::render(&Value::Real(lo)),
        ogive::sqlite::render(&Value::Real(hi))
    ))
}

/// Refuses an axis whose span (or its widening to whole ticks) is not a finite, positive
/// number: data spanning +-1.7e308 overflows, and so does a tiny span at a huge magnitude.
fn span_ok(name: &str, lo: f64, hi: f64) -> Result<(), String> {
    let span = hi - lo;
    let (_, step, count) = ticks(lo, hi, 8);
    if lo.is_finite()
        && hi.is_finite()
        && span.is_finite()
        && span > 0.0
        && step.is_finite()
        && step > 0.0
        && count < 1000
        && lo + step > lo
    {
        return Ok(());
    }
    Err(format!(
        "{name} spans {} to {}, which cannot be drawn: the span overflows or vanishes at that \
         magnitude; narrow or rescale the values in the query (for example divide them by 1e300)",
        ogive::sqlite::render(&Value::Real(lo)),
        ogive::sqlite::render(&Value::Real(hi))
    ))
}

/// Refuses an output file that is not `.svg` before anything runs.
pub fn check_out(out: &Path) -> Result<(), Failure> {
    let ext = out
        .extension()
        .map(|e| e.to_string_lossy().to_ascii_lowercase());
    match ext.as_deref() {
        Some("svg") => Ok(()),
        Some(other) => Err(Failure::usage(format!(
            "ogive plot writes SVG only, not .{other}: give --out {} (a PNG can be made from \
             it with an SVG converter, for example rsvg-convert)",
            out.with_extension("svg").display()
        ))),
        None => Err(Failure::usage(format!(
            "--out {} has no extension: ogive plot writes SVG, so name a .svg file",
            out.display()
        ))),
    }
}

/// Runs a plot file and writes its figure; returns the number of rows drawn.
pub fn plot_source(
    conn: &rusqlite::Connection,
    src: &Source,
    out: &Path,
    kind: Option<Kind>,
    title: Option<&str>,
    params: &mut Params,
) -> Result<usize, Failure> {
    let mut last = None;
    for stmt in &src.statements {
        match step(crate::db::Engine::Sqlite(conn), src, stmt, params)? {
            Step::Failed(description) => return Err(Failure::failed(description)),
            Step::Ran(Outcome::Rows(rows)) => last = Some((stmt, rows)),
            Step::Ran(Outcome::Changed(_)) => {}
        }
    }
    let Some((stmt, rows)) = last else {
        return Err(Failure::usage(format!("{} has no query to plot", src.name)));
    };
    let kind = match kind {
        Some(k) => k,
        None => match stmt.directive("kind") {
            Some(w) => Kind::from_word(w).ok_or_else(|| {
                Failure::usage(format!(
                    "{}:{}: unknown plot kind '{w}' (steps, lines or bars)",
                    src.name, stmt.line
                ))
            })?,
            None => Kind::Lines,
        },
    };
    let fallback = format!(
        "{} by {}",
        rows.columns.get(1).map_or("y", |s| s),
        rows.columns[0]
    );
    let title = title.or(stmt.name()).unwrap_or(&fallback);
    let caption = format!(
        "{} · {} rows · {}",
        src.name,
        rows.rows.len(),
        kind_word(kind)
    );
    let text = svg(&Figure {
        kind,
        title,
        caption: &caption,
        rows: &rows,
    })
    .map_err(|e| Failure::failed(format!("{}:{}: {e}", src.name, stmt.line)))?;
    std::fs::write(out, text)
        .map_err(|e| Failure::usage(format!("cannot write {}: {e}", out.display())))?;
    Ok(rows.rows.len())
}

fn kind_word(k: Kind) -> &'static str {
    match k {
        Kind::Steps => "steps",
        Kind::Lines => "lines",
        Kind::Bars => "bars",
    }
}

/// The `plot` verb.
pub fn plot_file(
    file: &str,
    out: &Path,
    kind: Option<Kind>,
    title: Option<&str>,
    db_path: Option<&Path>,
    params: &[String],
) -> Result<i32, Failure> {
    let mut params = Params::parse(params)?;
    check_out(out)?;
    let src = Source::load(file)?;
    let conn = db::open(db_path, db::Access::Existing)?;
    let n = plot_source(&conn, &src, out, kind, title, &mut params)?;
    warn_unused(&params);
    eprintln!("ogive: drew {n} rows from {file} into {}", out.display());
    Ok(0)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ticks_are_nice() {
        assert_eq!(ticks(0.0, 1.0, 5), (0.0, 0.2, 6));
        let (first, step, n) = ticks(-1.3, 11.7, 8);
        assert_eq!((first, step, n), (0.0, 2.0, 6));
        assert_eq!(tick_label(0.30000000000000004, 0.1), "0.3");
        assert_eq!(tick_label(12.0, 2.0), "12");
    }

    #[test]
    fn svg_has_title_axes_and_legend() {
        let rows = ResultSet {
            columns: vec!["t".into(), "share".into(), "trailer".into()],
            rows: vec![
                vec![
                    Value::Real(1.0),
                    Value::Real(0.2),
                    Value::Text("A<1>".into()),
                ],
                vec![
                    Value::Real(2.0),
                    Value::Real(0.9),
                    Value::Text("A<1>".into()),
                ],
                vec![Value::Real(1.5), Value::Real(0.5), Value::Text("B".into())],
            ],
        };
        let s = svg(&Figure {
            kind: Kind::Steps,
            title: "T & U",
            caption: "c",
            rows: &rows,
        })
        .unwrap();
        assert!(s.contains("T &amp; U"));
        assert!(s.contains("A&lt;1&gt;"));
        assert_eq!(s.matches("<path").count(), 2);
        assert!(s.contains(">share</text>"));
    }

    #[test]
    fn text_x_needs_bars() {
        let rows = ResultSet {
            columns: vec!["k".into(), "n".into()],
            rows: vec![vec![Value::Text("a".into()), Value::Integer(3)]],
        };
        let fig = |kind| Figure {
            kind,
            title: "",
            caption: "",
            rows: &rows,
        };
        assert!(svg(&fig(Kind::Lines)).is_err());
        assert!(svg(&fig(Kind::Bars)).unwrap().contains("<rect x="));
    }
}
