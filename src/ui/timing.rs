/*!
Timings of the real window, for the scale figures (`scripts/window-scale.sh`):
with `ZVET_WINDOW_TIMES=FILE` in the environment the window appends to FILE

- `first_frame_s S`: seconds from the start to the end of the first frame
  (the window and its drawing context are up);
- `objects_arrived_s S objects N`: … to the end of the first frame that
  holds the objects (a campaign's list, catalogue and fit summaries);
- `first_object_drawn_s S objects N`: seconds from the start of the window
  to the end of the first frame that drew an object (a campaign's objects are
  read in the background first);
- `switch_ms MS`: an object selected (by key or click) — the selection and
  its reads plus the work of the next frame, which draws it (panels laid out
  and plotted; egui's tessellation and the GPU's painting come after);
- `queue_ms MS sort=KEY shown=K`: a filter or sort of the queue;
- `open_ms MS PHASE`: one phase of opening a campaign in the background
  (inputs listed, catalogue joined, fit cache indexed, engine built, audit
  sample read), so that the open time can be taken apart
  ([`crate::store::open_phase`], which the headless library also has).

Without the variable nothing is measured or written.
*/
use std::io::Write;
use std::time::{Duration, Instant};

/// Where the timings go.
pub struct Timing {
    file: std::fs::File,
    start: Instant,
    first_drawn: bool,
    objects_seen: bool,
    frame: u64,
    /// Work of a selection not drawn yet, and the frame it happened in.
    pending_switch: Option<(Duration, u64)>,
}

impl Timing {
    /// From `ZVET_WINDOW_TIMES` (None when unset or the file cannot be opened).
    pub fn from_env(start: Instant) -> Option<Timing> {
        let path = std::env::var_os("ZVET_WINDOW_TIMES")?;
        let file = std::fs::OpenOptions::new()
            .create(true)
            .append(true)
            .open(path)
            .ok()?;
        Some(Timing {
            file,
            start,
            first_drawn: false,
            objects_seen: false,
            frame: 0,
            pending_switch: None,
        })
    }

    fn line(&mut self, text: String) {
        // a measurement that cannot be written is lost, nothing else
        let _ = writeln!(self.file, "{text}");
    }

    /// A selection took `work`.
    pub fn selected(&mut self, work: Duration) {
        self.pending_switch = Some((work, self.frame));
    }

    /// A filter or sort of the queue took `work`.
    pub fn queue(&mut self, work: Duration, sort: &str, shown: usize) {
        self.line(format!("queue_ms {:.3} sort={sort} shown={shown}", ms(work)));
    }

    /// A frame ended after `work`; `drew` when it drew an object of `objects`.
    pub fn frame_end(&mut self, work: Duration, drew: bool, objects: usize) {
        if self.frame == 0 {
            let s = self.start.elapsed().as_secs_f64();
            self.line(format!("first_frame_s {s:.3}"));
        }
        if objects > 0 && !self.objects_seen {
            self.objects_seen = true;
            let s = self.start.elapsed().as_secs_f64();
            self.line(format!("objects_arrived_s {s:.3} objects {objects}"));
        }
        if drew && !self.first_drawn {
            self.first_drawn = true;
            let s = self.start.elapsed().as_secs_f64();
            self.line(format!("first_object_drawn_s {s:.3} objects {objects}"));
        }
        if let Some((sel, at)) = self.pending_switch {
            if self.frame > at {
                self.pending_switch = None;
                if drew {
                    self.line(format!("switch_ms {:.3}", ms(sel + work)));
                }
            }
        }
        self.frame += 1;
    }
}

fn ms(d: Duration) -> f64 {
    d.as_secs_f64() * 1e3
}
