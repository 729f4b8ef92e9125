//! The window's session journal (issue 12), driven headless with egui_kittest: the journal
//! file appears and grows one line per trend point, a kill loses at most the last line,
//! a journal reopens beside the live trends, the trends export as `stillpoint track`'s CSV
//! and the waterfall as `.npy` + `.json` axes, and a journal folder that cannot be written
//! is a message in the window while the live view goes on.
//!
//! The engine runs on the wall clock; the tests poll with a generous deadline and never
//! assert on elapsed time.

#![allow(clippy::unwrap_used)]
#![cfg(feature = "gui")]

use std::path::{Path, PathBuf};
use std::time::Duration;

use stillpoint::model::journal::{self, JournalHeader, JournalWriter};
use stillpoint::model::trend::{TRACK_COLUMNS, TRACK_HEADER, TrendRow};
use stillpoint::ui::{MonitorOptions, StillpointApp};

#[path = "common/gui.rs"]
mod gui_util;
use gui_util::{harness, wait_for};

const DEADLINE: Duration = Duration::from_secs(90);

fn options(journal_dir: &Path) -> MonitorOptions {
    let mut o = MonitorOptions::demo();
    o.fresh_settings = true;
    o.journal_dir = Some(journal_dir.to_path_buf());
    if let Some(w) = o.welch.as_mut() {
        w.segment = 16_384;
    }
    o
}

fn journal_rows(app: &StillpointApp) -> usize {
    app.journal_path()
        .and_then(|p| journal::read_journal(p).ok())
        .map_or(0, |j| j.rows.len())
}

#[test]
fn the_journal_appears_and_grows_one_line_per_trend_point() {
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path().join("journal");
    let mut h = harness(options(&folder));
    wait_for(&mut h, DEADLINE, "a journal with 2 points", |a| {
        journal_rows(a) >= 2
    });
    let path = h.state().journal_path().unwrap().to_path_buf();
    assert!(path.starts_with(&folder), "{}", path.display());
    assert_eq!(journal::list_journals(&folder), vec![path.clone()]);
    let first = journal::read_journal(&path).unwrap();
    wait_for(&mut h, DEADLINE, "more points", |a| {
        journal_rows(a) >= first.rows.len() + 2
    });
    let later = journal::read_journal(&path).unwrap();
    // Grows by appending: the earlier lines are unchanged.
    assert_eq!(&later.rows[..first.rows.len()], &first.rows[..]);
    assert_eq!(later.skipped_lines, 0);
    // Every line has the wall-clock time and the track columns, times increasing.
    let now = journal::now_unix_s();
    for w in later.rows.windows(2) {
        assert!(w[0].0 <= w[1].0 && w[1].0 <= now + 1.0);
        assert!(w[0].1.t_end_s <= w[1].1.t_end_s);
        assert_eq!(w[1].1.t_start_s, w[0].1.t_end_s);
    }
    assert!(
        later.rows.iter().any(|r| r.1.frequency_hz.is_some()),
        "{:?}",
        later.rows.last()
    );
    // The header holds the source and the settings.
    let header = later.header.unwrap();
    assert_eq!(header.format, journal::FORMAT);
    assert!(header.source.contains("demo"), "{}", header.source);
    assert!(header.settings.get("window").is_some());
    assert!(header.settings["window"].get("welch").is_some());
    assert_eq!(header.columns.len(), TRACK_COLUMNS + 1);
    // No journal error was shown.
    assert!(
        !h.state().messages().iter().any(|m| m.error),
        "{:?}",
        h.state().messages()
    );
}

#[test]
fn a_kill_loses_at_most_the_last_line() {
    // A line cut short by a kill during its write: the earlier rows read back unchanged.
    let dir = tempfile::tempdir().unwrap();
    let header = JournalHeader::new("test", serde_json::json!({}));
    let mut w = JournalWriter::create(dir.path(), header).unwrap();
    let rows: Vec<TrendRow> = (0..6)
        .map(|i| TrendRow {
            t_start_s: f64::from(i),
            t_end_s: f64::from(i + 1),
            averages: Some(3),
            frequency_hz: Some((1000.0 + f64::from(i), Some(0.1))),
            status: "ok".into(),
            ..TrendRow::default()
        })
        .collect();
    for (i, r) in rows.iter().enumerate() {
        w.append(1.7e9 + i as f64, r).unwrap();
    }
    let path = w.path().to_path_buf();
    // No flush, no sync: the writer goes as a killed process's would.
    drop(w);
    let full = std::fs::read(&path).unwrap();
    let back = journal::read_journal(&path).unwrap();
    assert_eq!(back.rows.len(), 6);
    for cut in [1, 10, 40] {
        std::fs::write(&path, &full[..full.len() - cut]).unwrap();
        let back = journal::read_journal(&path).unwrap();
        assert_eq!(back.rows.len(), 5, "cut {cut}");
        assert_eq!(back.skipped_lines, 1);
        let kept: Vec<TrendRow> = back.rows.into_iter().map(|r| r.1).collect();
        assert_eq!(kept, rows[..5]);
    }
}

#[test]
fn a_journal_reopens_beside_the_live_trends_and_exports_like_track() {
    let dir = tempfile::tempdir().unwrap();
    let folder = dir.path().join("journal");
    let mut h = harness(options(&folder));
    wait_for(&mut h, DEADLINE, "a journal with 3 points", |a| {
        journal_rows(a) >= 3
    });
    let path = h.state().journal_path().unwrap().to_path_buf();
    // A copy with a cut last line, as after a kill.
    let copy = dir.path().join("copy.csv");
    let mut bytes = std::fs::read(&path).unwrap();
    bytes.extend_from_slice(b"1.7e9,0.0,1.0,3,100");
    std::fs::write(&copy, &bytes).unwrap();
    let want = journal::read_journal(&copy).unwrap();
    assert!(want.rows.len() >= 3);
    h.state_mut().open_journal(&copy);
    h.step();
    let opened = h.state().opened_journal().unwrap();
    assert_eq!(opened.journal.rows.len(), want.rows.len());
    assert_eq!(opened.journal.skipped_lines, 1);
    assert_eq!(opened.trends.points().len(), want.rows.len());
    assert_eq!(
        opened.trends.points()[0].frequency_hz,
        want.rows[0].1.frequency_hz.map(|f| f.0)
    );
    assert!(
        h.state()
            .messages()
            .iter()
            .any(|m| !m.error && m.text.contains("journal opened"))
    );
    // A file that is not a journal: a message, the opened journal stays.
    let bad = dir.path().join("bad.csv");
    std::fs::write(&bad, "a,b\n1,2\n").unwrap();
    h.state_mut().open_journal(&bad);
    h.step();
    assert!(h.state().messages().iter().any(|m| m.error));
    assert!(h.state().opened_journal().is_some());

    // Trends: track's CSV, every row of the journal written so far.
    let csv = dir.path().join("trends.csv");
    h.state_mut().export_trends(&csv);
    let text = std::fs::read_to_string(&csv).unwrap();
    let mut lines = text.lines();
    assert_eq!(lines.next(), Some(TRACK_HEADER));
    let exported: Vec<TrendRow> = lines
        .map(|l| TrendRow::parse_csv_line(l).unwrap())
        .collect();
    let journal_now = journal::read_journal(&path).unwrap();
    assert!(exported.len() >= want.rows.len());
    assert_eq!(
        exported[..want.rows.len()],
        journal_now.rows[..want.rows.len()]
            .iter()
            .map(|r| r.1.clone())
            .collect::<Vec<_>>()[..]
    );

    // Waterfall: float32 .npy + .json axes, one row per waterfall row held.
    let npy = dir.path().join("wf.npy");
    h.state_mut().export_waterfall(&npy);
    let held = h.state().live().waterfall.rows().len();
    let (rows, cols, data) =
        stillpoint::npy_writer::read_f32_2d(&std::fs::read(&npy).unwrap()).unwrap();
    assert!(rows >= 1 && rows <= held.max(1) + 1, "{rows} vs {held}");
    let axes: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(npy.with_extension("json")).unwrap())
            .unwrap();
    assert_eq!(axes["frequency_hz"].as_array().unwrap().len(), cols);
    assert_eq!(axes["t_end_s"].as_array().unwrap().len(), rows);
    assert_eq!(axes["unit"], "V^2/Hz");
    assert!(data.iter().any(|v| v.is_finite() && *v > 0.0));
}

#[test]
fn a_journal_folder_that_cannot_be_written_is_a_message_and_the_live_view_goes_on() {
    let dir = tempfile::tempdir().unwrap();
    // A file where the folder should be.
    let blocked: PathBuf = dir.path().join("not-a-folder");
    std::fs::write(&blocked, "x").unwrap();
    let mut h = harness(options(&blocked));
    wait_for(&mut h, DEADLINE, "the journal error", |a| {
        a.messages()
            .iter()
            .any(|m| m.error && m.text.contains("journal"))
    });
    assert!(h.state().journal_path().is_none());
    let frames = h.state().live().frames_applied;
    wait_for(&mut h, DEADLINE, "more frames", |a| {
        a.live().frames_applied > frames + 3
    });
    // Choosing a folder that works starts a journal there.
    let good = dir.path().join("good");
    h.state_mut().set_journal_folder(good.clone());
    wait_for(&mut h, DEADLINE, "a journal in the new folder", |a| {
        journal_rows(a) >= 1
    });
    assert!(h.state().journal_path().unwrap().starts_with(&good));
}
