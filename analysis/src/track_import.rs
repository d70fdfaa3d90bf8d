//! Tracks CSV files from other pipelines: which column holds what, the units
//! of positions and times, and a reader that turns them into a
//! [`TrackTable`] in nm and frames.
//!
//! Without options the layout is thicket's own (`track_id`, `frame`,
//! `time_s`, `x_nm`, `y_nm`, `z_nm`; see [`crate::tracks`]). Any other
//! layout is described by a [`TrackCsvLayout`], usually built from the
//! command-line options by [`TrackCsvLayout::from_options`]:
//! - columns: `track=NAME,frame=NAME,x=NAME,y=NAME[,z=NAME][,time=NAME]`,
//!   each a header name or a 1-based column number; `frame` or `time` (or
//!   both) is needed;
//! - position unit `nm`, `um` (`µm`) or `px` with a pixel size in nm;
//! - time unit `s` or `ms` of the time column;
//! - a frame interval in seconds, needed when the file has frame numbers
//!   but no times; with times only, frames are the times divided by it
//!   (inferred from the times when not given).
//!
//! The first non-empty line is a header when any of its fields is not a
//! number; otherwise the file has no header and columns must be numbers.

use std::collections::BTreeMap;
use std::io::BufRead;
use std::path::{Path, PathBuf};

use crate::tracks::{ObservedTrack, TrackTable, TracksError};

/// A column of the file: by header name or by 1-based number.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum ColumnRef {
    /// Header name (matched exactly, else case-insensitively if unique).
    Name(String),
    /// 1-based column number.
    Number(usize),
}

impl ColumnRef {
    fn parse(s: &str) -> Self {
        match s.parse::<usize>() {
            Ok(n) if n >= 1 => ColumnRef::Number(n),
            _ => ColumnRef::Name(s.to_string()),
        }
    }
}

/// Unit of the position columns.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LengthUnit {
    /// Nanometres.
    Nm,
    /// Micrometres.
    Um,
    /// Camera pixels of the given size in nm.
    Px(f64),
}

impl LengthUnit {
    /// Nanometres per unit.
    pub fn nm(&self) -> f64 {
        match *self {
            LengthUnit::Nm => 1.0,
            LengthUnit::Um => 1000.0,
            LengthUnit::Px(size) => size,
        }
    }
}

/// Unit of the time column.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum TimeUnit {
    /// Seconds.
    S,
    /// Milliseconds.
    Ms,
}

impl TimeUnit {
    /// Seconds per unit.
    pub fn seconds(&self) -> f64 {
        match self {
            TimeUnit::S => 1.0,
            TimeUnit::Ms => 1e-3,
        }
    }
}

/// How to read a tracks CSV.
#[derive(Debug, Clone, PartialEq)]
pub struct TrackCsvLayout {
    /// Track id column (whole numbers).
    pub track: ColumnRef,
    /// Frame number column (whole numbers).
    pub frame: Option<ColumnRef>,
    /// Time column.
    pub time: Option<ColumnRef>,
    /// x position column.
    pub x: ColumnRef,
    /// y position column.
    pub y: ColumnRef,
    /// z position column (3D tracks).
    pub z: Option<ColumnRef>,
    /// `time` and `z` are used only when the file has them (thicket's own layout).
    pub optional_if_absent: bool,
    /// Unit of x, y, z.
    pub length_unit: LengthUnit,
    /// Unit of the time column.
    pub time_unit: TimeUnit,
    /// Frame interval, s, when given rather than read from the times.
    pub frame_interval_s: Option<f64>,
    /// Lines skipped after the header (rows of units or descriptions).
    pub skip_rows: usize,
}

impl TrackCsvLayout {
    /// thicket's own layout: `track_id`, `frame`, `x_nm`, `y_nm`, and
    /// `time_s`, `z_nm` when present.
    pub fn thicket() -> Self {
        Self {
            track: ColumnRef::Name("track_id".into()),
            frame: Some(ColumnRef::Name("frame".into())),
            time: Some(ColumnRef::Name("time_s".into())),
            x: ColumnRef::Name("x_nm".into()),
            y: ColumnRef::Name("y_nm".into()),
            z: Some(ColumnRef::Name("z_nm".into())),
            optional_if_absent: true,
            length_unit: LengthUnit::Nm,
            time_unit: TimeUnit::S,
            frame_interval_s: None,
            skip_rows: 0,
        }
    }

    /// The layout the command-line options describe; thicket's own when
    /// `columns` is `None` (the units and frame interval still apply).
    /// `file` is the CSV, named in errors.
    ///
    /// # Errors
    /// [`TracksError::Option`] naming the option, the value and what is allowed.
    pub fn from_options(file: &Path, o: &ImportOptions) -> Result<Self, TracksError> {
        let bad = |option: &str, value: String, allowed: &str| TracksError::Option {
            file: file.to_path_buf(),
            option: option.to_string(),
            value,
            allowed: allowed.to_string(),
        };
        let mut layout = Self::thicket();
        if let Some(spec) = &o.columns {
            let allowed_keys = "KEY=COLUMN pairs separated by commas, keys track, frame, time, x, y, z (each at most once), COLUMN a header name or a 1-based column number, e.g. track=TRACK_ID,frame=FRAME,x=POSITION_X,y=POSITION_Y";
            let mut map: BTreeMap<&str, ColumnRef> = BTreeMap::new();
            for part in spec.split(',').map(str::trim).filter(|p| !p.is_empty()) {
                let Some((key, col)) = part.split_once('=') else {
                    return Err(bad("--columns", part.to_string(), allowed_keys));
                };
                let (key, col) = (key.trim(), col.trim());
                let key = match key {
                    "track" | "frame" | "time" | "x" | "y" | "z" => key,
                    _ => return Err(bad("--columns", format!("key {key:?}"), allowed_keys)),
                };
                if col.is_empty() || map.insert(key, ColumnRef::parse(col)).is_some() {
                    return Err(bad("--columns", part.to_string(), allowed_keys));
                }
            }
            for need in ["track", "x", "y"] {
                if !map.contains_key(need) {
                    return Err(bad(
                        "--columns",
                        format!("{spec:?} (no {need}=…)"),
                        "a mapping with track, x and y, and frame or time (or both)",
                    ));
                }
            }
            if !map.contains_key("frame") && !map.contains_key("time") {
                return Err(bad(
                    "--columns",
                    format!("{spec:?} (neither frame=… nor time=…)"),
                    "a mapping with track, x and y, and frame or time (or both)",
                ));
            }
            layout = Self {
                track: map.remove("track").expect("checked"),
                frame: map.remove("frame"),
                time: map.remove("time"),
                x: map.remove("x").expect("checked"),
                y: map.remove("y").expect("checked"),
                z: map.remove("z"),
                optional_if_absent: false,
                ..layout
            };
        }
        let pixel_size = match o.pixel_size_nm {
            Some(p) if !(p.is_finite() && p > 0.0) => {
                return Err(bad(
                    "--pixel-size",
                    p.to_string(),
                    "a pixel size in nm, finite and > 0",
                ))
            }
            p => p,
        };
        layout.length_unit = match o.length_unit.as_deref().map(str::trim) {
            None | Some("nm") => LengthUnit::Nm,
            Some("um" | "µm" | "μm") => LengthUnit::Um,
            Some("px" | "pixel" | "pixels") => LengthUnit::Px(pixel_size.ok_or_else(|| {
                bad(
                    "--length-unit",
                    "px".into(),
                    "px together with --pixel-size NM (the pixel size in nm)",
                )
            })?),
            Some(other) => {
                return Err(bad(
                    "--length-unit",
                    other.to_string(),
                    "nm, um (or µm), px (with --pixel-size NM)",
                ))
            }
        };
        if pixel_size.is_some() && !matches!(layout.length_unit, LengthUnit::Px(_)) {
            return Err(bad(
                "--pixel-size",
                pixel_size.unwrap_or_default().to_string(),
                "--pixel-size only with --length-unit px",
            ));
        }
        layout.time_unit = match o.time_unit.as_deref().map(str::trim) {
            None | Some("s") => TimeUnit::S,
            Some("ms") => TimeUnit::Ms,
            Some(other) => {
                return Err(bad(
                    "--time-unit",
                    other.to_string(),
                    "s or ms (the unit of the time column)",
                ))
            }
        };
        if let Some(dt) = o.frame_interval_s {
            if !(dt.is_finite() && dt > 0.0) {
                return Err(bad(
                    "--frame-interval",
                    dt.to_string(),
                    "a frame interval in seconds, finite and > 0",
                ));
            }
            layout.frame_interval_s = Some(dt);
        }
        layout.skip_rows = o.skip_rows;
        Ok(layout)
    }
}

/// The command-line options that describe a tracks CSV (all optional).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ImportOptions {
    /// `--columns`: `KEY=COLUMN,…` with keys track, frame, time, x, y, z.
    pub columns: Option<String>,
    /// `--length-unit`: nm, um, px.
    pub length_unit: Option<String>,
    /// `--pixel-size`, nm.
    pub pixel_size_nm: Option<f64>,
    /// `--time-unit`: s, ms.
    pub time_unit: Option<String>,
    /// `--frame-interval`, s.
    pub frame_interval_s: Option<f64>,
    /// `--skip-rows`: lines after the header to skip.
    pub skip_rows: usize,
}

/// One detection while reading: (frame or None, time s or None, position nm, line).
type Row = (Option<i64>, Option<f64>, [f64; 3], usize);

/// Splits a CSV line into trimmed fields without surrounding double quotes.
fn fields(line: &str) -> Vec<&str> {
    line.split(',')
        .map(|f| {
            let f = f.trim();
            f.strip_prefix('"')
                .and_then(|f| f.strip_suffix('"'))
                .unwrap_or(f)
                .trim()
        })
        .collect()
}

/// A whole number, also when written as a float with no fraction ("3.0").
fn whole(s: &str) -> Option<i64> {
    s.parse::<i64>().ok().or_else(|| {
        s.parse::<f64>()
            .ok()
            .filter(|v| v.is_finite() && v.fract() == 0.0 && v.abs() < 9e15)
            .map(|v| v as i64)
    })
}

/// Reads a tracks CSV in the given layout; positions in nm, frames from 0
/// or as written, the frame interval from the times, the layout or both.
///
/// # Errors
/// [`TracksError::Io`]; [`TracksError::Csv`] naming the line, the column
/// and the value of a missing column, a field that is not a number, a
/// repeated frame in a track, or times inconsistent with one frame
/// interval; [`TracksError::Option`] when the frame interval given
/// disagrees with the times.
pub fn read_csv_with(path: &Path, layout: &TrackCsvLayout) -> Result<TrackTable, TracksError> {
    let file = std::fs::File::open(path).map_err(|source| TracksError::Io {
        file: path.to_path_buf(),
        source,
    })?;
    let reader = std::io::BufReader::with_capacity(1 << 20, file);
    let bad = |line: usize, column: &str, value: &str, allowed: &str| TracksError::Csv {
        file: path.to_path_buf(),
        line,
        column: column.to_string(),
        value: format!("{value:?}"),
        allowed: allowed.to_string(),
    };
    let own = layout.optional_if_absent;
    let mut lines = reader.lines().enumerate().peekable();
    let io = |source| TracksError::Io {
        file: path.to_path_buf(),
        source,
    };
    // First non-empty line: header row, or the first row of a file without one.
    let (first_no, first) = loop {
        match lines.next() {
            None => {
                return Err(bad(
                    1,
                    "header",
                    "",
                    if own {
                        "the file must start with a header row such as track_id,frame,time_s,x_nm,y_nm"
                    } else {
                        "a header row and rows of detections"
                    },
                ))
            }
            Some((_, Err(e))) => return Err(io(e)),
            Some((_, Ok(l))) if l.trim().is_empty() => continue,
            Some((i, Ok(l))) => break (i + 1, l.trim_start_matches('\u{feff}').to_string()),
        }
    };
    let first_fields: Vec<String> = fields(&first).into_iter().map(String::from).collect();
    let has_header = first_fields.iter().any(|f| f.parse::<f64>().is_err());
    let width = first_fields.len();
    let option_of = |key: &str| {
        if own {
            "header".to_string()
        } else {
            format!("--columns {key}=")
        }
    };
    let resolve = |key: &str, c: &ColumnRef| -> Result<Option<usize>, TracksError> {
        match c {
            ColumnRef::Number(n) if *n <= width => Ok(Some(n - 1)),
            ColumnRef::Number(n) => Err(bad(
                first_no,
                &option_of(key),
                &n.to_string(),
                &format!("a column number from 1 to {width} (the file has {width} columns)"),
            )),
            ColumnRef::Name(name) if !has_header => Err(bad(
                first_no,
                &option_of(key),
                name,
                "column numbers (1 = first) for a file without a header row (its first line is all numbers)",
            )),
            ColumnRef::Name(name) => {
                if let Some(i) = first_fields.iter().position(|f| f == name) {
                    return Ok(Some(i));
                }
                let folded: Vec<usize> = (0..width)
                    .filter(|&i| first_fields[i].eq_ignore_ascii_case(name))
                    .collect();
                if folded.len() == 1 {
                    return Ok(Some(folded[0]));
                }
                if own && matches!(key, "time" | "z") {
                    return Ok(None);
                }
                let allowed = if own {
                    format!("the header must name the column `{name}` (track_id, frame, x_nm, y_nm are required; time_s, z_nm optional), or give --columns for another layout")
                } else {
                    let shown: Vec<&str> =
                        first_fields.iter().take(30).map(String::as_str).collect();
                    format!(
                        "a column of the header: {}{}",
                        shown.join(", "),
                        if width > 30 { ", …" } else { "" }
                    )
                };
                Err(bad(
                    first_no,
                    &if own { "header".to_string() } else { format!("--columns {key}={name}") },
                    if own { &first } else { name },
                    &allowed,
                ))
            }
        }
    };
    let opt = |key: &str, c: &Option<ColumnRef>| match c {
        Some(c) => resolve(key, c),
        None => Ok(None),
    };
    let c_id = resolve("track", &layout.track)?.expect("required");
    let c_frame = opt("frame", &layout.frame)?;
    let c_x = resolve("x", &layout.x)?.expect("required");
    let c_y = resolve("y", &layout.y)?.expect("required");
    let c_t = opt("time", &layout.time)?;
    let c_z = opt("z", &layout.z)?;
    let dims = if c_z.is_some() { 3 } else { 2 };
    let name_of = |c: usize| {
        if has_header {
            first_fields[c].clone()
        } else {
            format!("column {}", c + 1)
        }
    };
    let scale = layout.length_unit.nm();
    let t_scale = layout.time_unit.seconds();

    let mut by_id: BTreeMap<i64, Vec<Row>> = BTreeMap::new();
    let mut parse_row = |line: usize, l: &str| -> Result<(), TracksError> {
        let f = fields(l);
        if f.len() != width {
            return Err(bad(
                line,
                "row",
                l,
                &format!(
                    "every row must have {width} fields like the {}",
                    if has_header { "header" } else { "first row" }
                ),
            ));
        }
        let num = |c: usize| -> Result<f64, TracksError> {
            f[c].parse::<f64>()
                .ok()
                .filter(|v| v.is_finite())
                .ok_or_else(|| bad(line, &name_of(c), f[c], "a finite number"))
        };
        let int = |c: usize| -> Result<i64, TracksError> {
            whole(f[c]).ok_or_else(|| bad(line, &name_of(c), f[c], "a whole number"))
        };
        let id = int(c_id)?;
        let frame = match c_frame {
            Some(c) => {
                let v = int(c)?;
                if v < 0 {
                    return Err(bad(line, &name_of(c), f[c], "a whole number ≥ 0"));
                }
                Some(v)
            }
            None => None,
        };
        let time = c_t.map(|c| num(c).map(|t| t * t_scale)).transpose()?;
        let z = c_z.map(num).transpose()?.unwrap_or(0.0);
        let pos = [num(c_x)? * scale, num(c_y)? * scale, z * scale];
        by_id.entry(id).or_default().push((frame, time, pos, line));
        Ok(())
    };
    if !has_header {
        parse_row(first_no, &first)?;
    }
    let mut skip = if has_header { layout.skip_rows } else { 0 };
    for (i, l) in lines {
        let l = l.map_err(io)?;
        if skip > 0 {
            skip -= 1;
            continue;
        }
        if l.trim().is_empty() {
            continue;
        }
        parse_row(i + 1, &l)?;
    }
    if by_id.is_empty() {
        return Err(bad(
            first_no,
            "row",
            "",
            "at least one row of detections after the header",
        ));
    }

    let time_name = c_t.map_or_else(|| "time".to_string(), name_of);
    let frame_interval_s = match c_frame {
        Some(_) => {
            let times: Vec<(i64, f64, usize)> = by_id
                .values()
                .flatten()
                .filter_map(|r| Some((r.0?, r.1?, r.3)))
                .collect();
            let from_times = frame_interval_from_times(&times)
                .map_err(|(line, value, allowed)| bad(line, &time_name, &value, &allowed))?;
            match (from_times, layout.frame_interval_s) {
                (Some(a), Some(b)) if (a - b).abs() > 1e-6 * b => {
                    return Err(TracksError::Option {
                        file: path.to_path_buf(),
                        option: "--frame-interval".into(),
                        value: format!("{b:e}"),
                        allowed: format!(
                            "the frame interval of the time column {time_name}, {a:e} s (or leave --frame-interval out)"
                        ),
                    })
                }
                (a, b) => a.or(b),
            }
        }
        None => {
            let dt = frames_from_times(&mut by_id, layout.frame_interval_s)
                .map_err(|(line, value, allowed)| bad(line, &time_name, &value, &allowed))?;
            Some(dt)
        }
    };

    let mut tracks = Vec::with_capacity(by_id.len());
    for (id, mut rows) in by_id {
        rows.sort_by_key(|r| r.0);
        if let Some(w) = rows.windows(2).find(|w| w[0].0 == w[1].0) {
            return Err(bad(
                w[1].3,
                &c_frame.map_or_else(|| time_name.clone(), name_of),
                &w[1].0.unwrap_or_default().to_string(),
                &format!("each frame at most once per track; track {id} has it twice"),
            ));
        }
        tracks.push(ObservedTrack {
            id,
            frames: rows.iter().map(|r| r.0.unwrap_or_default()).collect(),
            positions_nm: rows.iter().map(|r| r.2).collect(),
        });
    }
    Ok(TrackTable {
        path: PathBuf::from(path),
        dims,
        frame_interval_s,
        tracks,
    })
}

/// Numbers the rows of a file with times but no frame numbers: frame =
/// round((t − t_first) / Δt), Δt given or inferred (shortest step within a
/// track, then refined over the whole span), each time within a tenth of
/// a frame interval of its frame (times are often printed rounded).
fn frames_from_times(
    by_id: &mut BTreeMap<i64, Vec<Row>>,
    given: Option<f64>,
) -> Result<f64, (usize, String, String)> {
    let t0 = by_id
        .values()
        .flatten()
        .filter_map(|r| r.1)
        .fold(f64::INFINITY, f64::min);
    let mut dt = match given {
        Some(dt) => dt,
        None => {
            let mut shortest = f64::INFINITY;
            for rows in by_id.values() {
                let mut t: Vec<f64> = rows.iter().filter_map(|r| r.1).collect();
                t.sort_by(f64::total_cmp);
                for w in t.windows(2) {
                    if w[1] > w[0] {
                        shortest = shortest.min(w[1] - w[0]);
                    }
                }
            }
            if !shortest.is_finite() {
                let line = by_id.values().flatten().map(|r| r.3).min().unwrap_or(1);
                return Err((line, String::new(), "tracks with at least two different times, or --frame-interval S, so the frame interval is known".into()));
            }
            // Refine over the whole file: rounded times make the shortest step inexact.
            let (mut num, mut den) = (0.0, 0.0);
            for r in by_id.values().flatten() {
                let t = r.1.unwrap_or(t0) - t0;
                let k = (t / shortest).round();
                num += k * t;
                den += k * k;
            }
            if den > 0.0 {
                num / den
            } else {
                shortest
            }
        }
    };
    if !(dt.is_finite() && dt > 0.0) {
        dt = 1.0;
    }
    let mut span: Option<((i64, f64), (i64, f64))> = None;
    for r in by_id.values_mut().flatten() {
        let t = r.1.unwrap_or(t0);
        let k = ((t - t0) / dt).round() as i64;
        r.0 = Some(k);
        span = Some(match span {
            None => ((k, t), (k, t)),
            Some((lo, hi)) => (
                if k < lo.0 { (k, t) } else { lo },
                if k > hi.0 { (k, t) } else { hi },
            ),
        });
    }
    // The frame interval from the first and last frames, as for a file with frame numbers.
    if let (None, Some((lo, hi))) = (given, span) {
        if hi.0 > lo.0 {
            dt = (hi.1 - lo.1) / (hi.0 - lo.0) as f64;
        }
    }
    for r in by_id.values().flatten() {
        let t = r.1.unwrap_or(t0) - t0;
        let k = r.0.unwrap_or_default() as f64;
        if (t - k * dt).abs() > 0.1 * dt {
            return Err((
                r.3,
                r.1.unwrap_or_default().to_string(),
                format!("times on a grid of one frame interval ({dt:e} s) from the first time; give --frame-interval S if it is another"),
            ));
        }
    }
    Ok(dt)
}

/// The frame interval implied by (frame, time) pairs: one Δt with
/// time = frame × Δt + t0 for every row, to 1e-6 of Δt.
pub(crate) fn frame_interval_from_times(
    times: &[(i64, f64, usize)],
) -> Result<Option<f64>, (usize, String, String)> {
    let (Some(lo), Some(hi)) = (
        times.iter().min_by_key(|t| t.0),
        times.iter().max_by_key(|t| t.0),
    ) else {
        return Ok(None);
    };
    if hi.0 == lo.0 {
        return Ok(None);
    }
    let dt = (hi.1 - lo.1) / (hi.0 - lo.0) as f64;
    if !(dt.is_finite() && dt > 0.0) {
        return Err((
            hi.2,
            hi.1.to_string(),
            "times that increase with the frame number".into(),
        ));
    }
    for &(f, t, line) in times {
        let expected = lo.1 + (f - lo.0) as f64 * dt;
        if (t - expected).abs() > 1e-6 * dt + 1e-9 * expected.abs() {
            return Err((line, t.to_string(), format!("frame {f} at time {expected:e} s: one frame interval ({dt:e} s) for the whole file")));
        }
    }
    Ok(Some(dt))
}

#[cfg(test)]
mod tests {
    use super::*;

    // Frames recovered from rounded times: 1/30 s printed with 4 decimals.
    #[test]
    fn frames_from_rounded_times() {
        let mut by_id = BTreeMap::new();
        let rows: Vec<_> = (0..200)
            .map(|k| {
                let t = ((k as f64 / 30.0) * 1e4).round() / 1e4;
                (None, Some(t), [0.0; 3], k + 2)
            })
            .collect();
        by_id.insert(0, rows);
        let dt = frames_from_times(&mut by_id, None).unwrap();
        assert!((dt * 30.0 - 1.0).abs() < 1e-4, "{dt}");
        for (k, r) in by_id[&0].iter().enumerate() {
            assert_eq!(r.0, Some(k as i64));
        }
    }
}
