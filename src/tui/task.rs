//! What a session is for beyond the free run: a strip test (E and G of a free strip) or a
//! point walk (one recording per point of a plan, then the mode shapes over all points).
//! State and the walk's moves; the engine does the analysis and the files, the view draws.

use super::engine::Cmd;
use super::model::{Action, Effect, Mode, Model};
use crate::error::Result;
use crate::run::naming::{stem_for, stem_taken};
use crate::shapes::points::{Point, ShapeFile, read_plan};
use crate::strip::session::StripSetup;
use std::path::{Component, Path, PathBuf};
use std::sync::Arc;

/// The session's task.
#[derive(Debug, Clone, Default)]
pub enum Task {
    /// The usual app: tap, average, save runs.
    #[default]
    Free,
    /// Strip test: the strip's size and mass; E and G come with the analysis snapshots.
    Strip(StripSetup),
    /// Point walk over a plan.
    Walk(Walk),
}

/// One point of the walk.
#[derive(Debug, Clone, PartialEq)]
pub struct WalkPoint {
    pub point: Point,
    /// Folder of the point's recording.
    pub dir: PathBuf,
    /// Stem of the point's recording (`p3` for `p3.wav`).
    pub stem: String,
    /// The recording is on disk (found at the start or kept in this session).
    pub done: bool,
}

impl WalkPoint {
    /// The label the app records a take of this point under (`p3.take`, then `p3.take-2`,
    /// ... by the app's one naming rule): a take becomes the point's recording only when
    /// the operator keeps it.
    pub fn take_label(&self) -> String {
        format!("{}.take", self.stem)
    }

    pub fn wav(&self) -> PathBuf {
        self.dir.join(format!("{}.wav", self.stem))
    }
}

/// The state of the fit once every point is recorded.
#[derive(Debug, Clone, PartialEq)]
pub enum Fit {
    /// Not every point is recorded yet.
    Waiting,
    Running,
    /// The shapes and the file they were written to.
    Done(Arc<ShapeFile>, PathBuf),
    Failed(String),
}

/// A walk over the points of a plan.
#[derive(Debug, Clone, PartialEq)]
pub struct Walk {
    pub plan: PathBuf,
    /// Label of the shape file (the plan's stem).
    pub label: String,
    pub points: Vec<WalkPoint>,
    /// The point being tapped (or, once all are kept, the last one kept).
    pub current: usize,
    /// True once every point is recorded: the engine takes no taps until a point is
    /// opened again.
    pub complete: bool,
    pub fit: Fit,
    /// First mode shown in the shape bars (`b` turns the page).
    pub shown: usize,
}

impl Walk {
    /// Read the plan and check that the app can write every point's recording where the plan
    /// says: a `.wav` inside the plan's folder (no absolute path, no `..`), a name the app's
    /// naming rule keeps as it is, no recording named twice. Missing folders are created.
    /// The walk starts at the first point without a recording.
    pub fn load(plan: &Path) -> Result<Walk> {
        let points = read_plan(plan)?;
        let base = plan.parent().unwrap_or(Path::new(".")).to_path_buf();
        let mut out: Vec<WalkPoint> = Vec::new();
        for (i, p) in points.into_iter().enumerate() {
            let rel = Path::new(&p.recording);
            let n = i + 1;
            if rel
                .components()
                .any(|c| !matches!(c, Component::Normal(_) | Component::CurDir))
            {
                crate::fail!(
                    "point {n} of the plan '{}' names '{}': the app writes recordings only inside the plan's folder (no absolute path, no '..')",
                    plan.display(),
                    p.recording
                );
            }
            if !rel
                .extension()
                .is_some_and(|e| e.eq_ignore_ascii_case("wav"))
            {
                crate::fail!(
                    "point {n} of the plan '{}' names '{}': a recording must end in .wav",
                    plan.display(),
                    p.recording
                );
            }
            let stem = rel
                .file_stem()
                .map(|s| s.to_string_lossy().into_owned())
                .unwrap_or_default();
            if stem_for(&stem) != stem || rel.extension() != Some("wav".as_ref()) {
                crate::fail!(
                    "point {n} of the plan '{}' names '{}': the app names files with letters, digits, '-', '_' and '.' only and a lower-case .wav (try '{}.wav')",
                    plan.display(),
                    p.recording,
                    stem_for(&stem)
                );
            }
            let dir = base.join(rel.parent().unwrap_or(Path::new("")));
            if let Some(j) = out.iter().position(|q| q.dir == dir && q.stem == stem) {
                crate::fail!(
                    "points {} and {n} of the plan '{}' both name '{}': each point needs its own recording",
                    j + 1,
                    plan.display(),
                    p.recording
                );
            }
            std::fs::create_dir_all(&dir).map_err(|e| {
                crate::error::Error::from(e)
                    .context(format!("cannot create the folder '{}'", dir.display()))
            })?;
            let done = std::fs::symlink_metadata(dir.join(format!("{stem}.wav"))).is_ok();
            out.push(WalkPoint {
                point: p,
                dir,
                stem,
                done,
            });
        }
        let current = out.iter().position(|p| !p.done).unwrap_or(0);
        let complete = out.iter().all(|p| p.done);
        Ok(Walk {
            label: plan
                .file_stem()
                .map_or("shapes".into(), |s| s.to_string_lossy().into_owned()),
            plan: plan.to_path_buf(),
            points: out,
            current,
            complete,
            fit: Fit::Waiting,
            shown: 0,
        })
    }

    pub fn point(&self) -> &WalkPoint {
        &self.points[self.current]
    }

    /// "point 3 of 8: left front arm, root (z)".
    pub fn prompt(&self) -> String {
        let p = self.point();
        format!(
            "point {} of {}: {} ({})",
            self.current + 1,
            self.points.len(),
            p.point.name,
            p.point.direction
        )
    }

    /// How many points have their recording.
    pub fn recorded(&self) -> usize {
        self.points.iter().filter(|p| p.done).count()
    }

    /// The next point without a recording after `from` (wrapping round), if any.
    pub fn next_missing(&self, from: usize) -> Option<usize> {
        let n = self.points.len();
        (1..=n)
            .map(|k| (from + k) % n)
            .find(|&i| !self.points[i].done)
    }

    /// Whether the point's recording (any of its files) is on disk now.
    pub fn taken_on_disk(&self, i: usize) -> bool {
        let p = &self.points[i];
        stem_taken(&p.dir, &p.stem)
    }
}

/// The walk's keys (`]`, `[`, `r`, `b`); outside a walk they say what they are for.
pub(super) fn act(m: &mut Model, a: Action, fx: &mut Vec<Effect>) {
    let (accepted, hits) = m.counts();
    let Task::Walk(w) = &mut m.task else {
        m.notice = Some("] [ r b belong to a point walk (tapmodes tui --plan PLAN.txt)".into());
        return;
    };
    match a {
        Action::KeepPoint => {
            if w.complete {
                m.notice = Some("every point is recorded: [ or r opens a point again".into());
            } else if accepted == 0 {
                m.notice = Some(format!(
                    "point {} has no accepted tap yet: nothing to keep",
                    w.current + 1
                ));
            } else {
                let p = w.point();
                let cmd = Cmd::KeepPoint {
                    index: w.current,
                    dir: p.dir.clone(),
                    stem: p.stem.clone(),
                    label: p.point.name.clone(),
                    note: format!(
                        "point {} of {} of the plan '{}', direction {}",
                        w.current + 1,
                        w.points.len(),
                        w.plan.display(),
                        p.point.direction
                    ),
                };
                m.send(cmd, fx);
            }
        }
        Action::PointBack => {
            if w.complete {
                let to = w.current;
                leave(m, to, 0, fx);
            } else if w.current == 0 {
                m.notice = Some("this is the first point".into());
            } else {
                let to = w.current - 1;
                leave(m, to, hits, fx);
            }
        }
        Action::Retake => {
            let (to, hits) = (w.current, if w.complete { 0 } else { hits });
            leave(m, to, hits, fx);
        }
        Action::NextShape => match &w.fit {
            Fit::Done(f, _) if !f.modes.is_empty() => {
                w.shown = (w.shown + 1) % f.modes.len();
            }
            _ => m.notice = Some("the shapes come once every point is recorded".into()),
        },
        _ => {}
    }
}

/// Leave the current take for point `to`, asking first when the take has taps.
fn leave(m: &mut Model, to: usize, hits: usize, fx: &mut Vec<Effect>) {
    if hits > 0 {
        m.mode = Mode::ConfirmLeave { to };
    } else {
        open_point(m, to, fx);
    }
}

/// Open point `to` with a fresh take (the take so far stays on disk as it is).
pub(super) fn open_point(m: &mut Model, to: usize, fx: &mut Vec<Effect>) {
    let Task::Walk(w) = &mut m.task else {
        return;
    };
    w.current = to.min(w.points.len() - 1);
    w.complete = false;
    w.fit = Fit::Waiting;
    let p = w.point();
    let cmd = Cmd::NewPoint {
        dir: p.dir.clone(),
        label: p.take_label(),
    };
    let notice = if p.done {
        format!(
            "{}: '{}.wav' is on disk; ] keeps a new take only once it is moved away",
            w.prompt(),
            p.stem
        )
    } else {
        format!("tap {}", w.prompt())
    };
    if let Cmd::NewPoint { label, .. } = &cmd {
        m.label = label.clone();
    }
    m.mode = Mode::Normal;
    m.selected = None;
    m.follow = true;
    m.send(cmd, fx);
    m.notice = Some(notice);
}

/// The saver made the take point `index`'s recording: open the next point without one, or
/// fit the shapes when there is none.
pub(super) fn point_kept(m: &mut Model, index: usize, wav: &Path, fx: &mut Vec<Effect>) {
    let Task::Walk(w) = &mut m.task else {
        return;
    };
    let name = wav
        .file_name()
        .map_or(String::new(), |n| n.to_string_lossy().into_owned());
    if let Some(p) = w.points.get_mut(index) {
        p.done = true;
    }
    match w.next_missing(index) {
        Some(i) => {
            open_point(m, i, fx);
            if let Some(n) = m.notice.take() {
                m.notice = Some(format!("kept {name}; {n}"));
            }
        }
        None => {
            w.current = index;
            w.complete = true;
            w.fit = Fit::Running;
            m.notice = Some(format!(
                "kept {name}: all {} points recorded; fitting the shapes...",
                w.points.len()
            ));
            fx.push(Effect::FitShapes);
        }
    }
}

/// The fit's outcome.
pub(super) fn shapes_done(
    m: &mut Model,
    r: std::result::Result<(Arc<ShapeFile>, PathBuf), String>,
) {
    let Task::Walk(w) = &mut m.task else {
        return;
    };
    w.shown = 0;
    match r {
        Ok((f, path)) => {
            m.notice = Some(format!(
                "wrote {}: {} mode(s) over {} points",
                path.display(),
                f.modes.len(),
                f.points.len()
            ));
            w.fit = Fit::Done(f, path);
        }
        Err(e) => {
            m.notice = Some(format!("no shapes: {e}"));
            w.fit = Fit::Failed(e);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plan(dir: &Path, text: &str) -> PathBuf {
        std::fs::create_dir_all(dir).unwrap();
        let p = dir.join("plan.txt");
        std::fs::write(&p, text).unwrap();
        p
    }

    #[test]
    fn plans_the_app_cannot_write_are_refused_with_one_sentence() {
        let dir = std::env::temp_dir().join(format!("tapmodes-walk-load-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        for (text, says) in [
            (
                "a | z | ../p1.wav\nb | z | p2.wav\n",
                "inside the plan's folder",
            ),
            ("a | z | p1.txt\nb | z | p2.wav\n", "must end in .wav"),
            ("a | z | point 1.wav\nb | z | p2.wav\n", "try 'point_1.wav'"),
            (
                "a | z | p1.wav\nb | z | p1.wav\n",
                "name the same recording 'p1.wav'",
            ),
        ] {
            let e = Walk::load(&plan(&dir, text)).unwrap_err().to_string();
            assert!(e.contains(says), "{text:?}: {e}");
            assert!(!e.contains('\n'), "one sentence: {e}");
        }
        std::fs::write(dir.join("p1.wav"), b"RIFF").unwrap();
        let w = Walk::load(&plan(&dir, "a | z | p1.wav\nb | y | sub/p2.wav\n")).unwrap();
        assert!(w.points[0].done && !w.points[1].done);
        assert_eq!(
            w.current, 1,
            "the walk starts at the first point without a recording"
        );
        assert_eq!(w.prompt(), "point 2 of 2: b (y)");
        assert!(dir.join("sub").is_dir());
        assert_eq!(w.next_missing(1), Some(1));
        std::fs::remove_dir_all(&dir).unwrap();
    }
}
