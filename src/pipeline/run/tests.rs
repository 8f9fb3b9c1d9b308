//! The drive loop on its own: a consumer that writes down every call it receives, fed blocks
//! by hand (no reader, no threads), and consumers that pass letters to each other in every
//! order of the list.

use super::*;
use crate::dsp::WindowKind;
use crate::pipeline::{Letter, Post};
use std::cell::RefCell;
use std::rc::Rc;

const N: usize = 64;

fn spec() -> RunSpec {
    let source = SourceInfo::synthetic(1000.0, 0.0);
    // Rows of 4 frames of 64 samples, hop 64 (no overlap): 256 samples a row.
    let engine = EngineConfig {
        fft_size: N,
        window: WindowKind::Hann,
        overlap: 0.0,
        frames_per_output: Some(4),
    };
    RunSpec::new(source, engine, 1)
}

fn samples(n: usize) -> Vec<Complex32> {
    (0..n).map(|i| Complex32::new((i as f32 * 0.3).cos() * 0.1, 0.0)).collect()
}

/// Writes down each call in a shared diary, with what matters of its arguments.
struct Diary(Rc<RefCell<Vec<String>>>);

impl Consumer for Diary {
    fn start(&mut self, run: &RunInfo) -> io::Result<()> {
        self.0.borrow_mut().push(format!("start {}", run.engine.fft_size));
        Ok(())
    }
    fn block(&mut self, block: &Block) -> io::Result<()> {
        self.0.borrow_mut().push(format!("block {}+{}", block.start, block.samples.len()));
        Ok(())
    }
    fn row(&mut self, row: &Spectrum) -> io::Result<Flow> {
        self.0.borrow_mut().push(format!("row {}..{}", row.first_sample, row.end_sample));
        Ok(Flow::Continue)
    }
    fn partial_row(&mut self, row: &Spectrum) -> io::Result<()> {
        self.0.borrow_mut().push(format!("partial {}..{}", row.first_sample, row.end_sample));
        Ok(())
    }
    fn gap(&mut self, from: u64, to: u64, cause: GapCause, _run: &RunInfo) -> io::Result<()> {
        self.0.borrow_mut().push(format!("gap {from}..{to} {}", cause.as_str()));
        Ok(())
    }
    fn ending(&mut self, end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        self.0.borrow_mut().push(format!("ending {}", end.end_sample));
        Ok(())
    }
    fn settle(&mut self, _end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        self.0.borrow_mut().push("settle".into());
        Ok(())
    }
    fn finish(&mut self, end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        self.0.borrow_mut().push(format!(
            "finish {} {} dropped {}",
            end.reason.as_str(),
            end.end_sample,
            end.dropped_samples
        ));
        Ok(())
    }
}

#[test]
fn a_consumer_is_told_everything_in_order() {
    let diary = Rc::new(RefCell::new(Vec::new()));
    let mut d = Diary(diary.clone());
    let mut run = Run::new(spec(), vec![&mut d]);
    // 600 samples: two rows of 256 and 88 samples (one frame and a bit) left over.
    run.feed(&Block::new(0, samples(600))).unwrap();
    // Samples 600..700 lost: the leftover frame becomes a partial row before the gap.
    run.feed(&Block::new(700, samples(300))).unwrap();
    let end = run.finish(StopReason::EndOfInput).unwrap();
    assert_eq!(
        end,
        RunEnd { reason: StopReason::EndOfInput, end_sample: 1000, dropped_samples: 100 }
    );
    let got = diary.borrow().clone();
    let want = [
        "start 64",
        "block 0+600",
        "row 0..256",
        "row 256..512",
        "partial 512..576",
        "gap 600..700 behind",
        "block 700+300",
        "row 700..956",
        "ending 1000",
        "settle",
        "finish end_of_input 1000 dropped 100",
    ];
    assert_eq!(got, want);
}

#[test]
fn samples_that_are_not_numbers_are_a_gap_in_the_time_line() {
    let diary = Rc::new(RefCell::new(Vec::new()));
    let mut d = Diary(diary.clone());
    let mut run = Run::new(spec(), vec![&mut d]);
    let mut x = samples(600);
    for s in &mut x[300..310] {
        *s = Complex32::new(f32::NAN, 0.0);
    }
    run.feed(&Block::new(0, x)).unwrap();
    let end = run.finish(StopReason::EndOfInput).unwrap();
    assert_eq!(end.dropped_samples, 10);
    assert!(
        diary.borrow().iter().any(|l| l == "gap 300..310 not_a_number"),
        "{:?}",
        diary.borrow()
    );
}

/// Announces a thing at its second row and its end at the end of the input, as a finder of
/// emissions does.
struct Finder {
    post: Post,
    rows: u32,
}

#[derive(Clone, Debug, PartialEq)]
enum Note {
    Began(u64),
    Ended(u64),
    Written(String),
}

impl Consumer for Finder {
    fn connect(&mut self, post: &Post) {
        self.post = post.clone();
    }
    fn row(&mut self, row: &Spectrum) -> io::Result<Flow> {
        self.rows += 1;
        if self.rows == 2 {
            self.post.send(Note::Began(row.first_sample));
        }
        Ok(Flow::Continue)
    }
    fn ending(&mut self, end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        self.post.send(Note::Ended(end.end_sample));
        Ok(())
    }
}

/// Acts on the finder's letters and, when it closes its work, sends a record for the log, as
/// the captures do.
#[derive(Default)]
struct Writer {
    post: Post,
    began: Option<u64>,
    ended: Option<u64>,
}

impl Consumer for Writer {
    fn connect(&mut self, post: &Post) {
        self.post = post.clone();
    }
    fn mail(&mut self, letter: &Letter, _run: &RunInfo) -> io::Result<()> {
        match letter.read::<Note>() {
            Some(Note::Began(s)) => self.began = Some(*s),
            Some(Note::Ended(s)) => self.ended = Some(*s),
            _ => {}
        }
        Ok(())
    }
    fn settle(&mut self, _end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        self.post.send(Note::Written(format!("{:?}..{:?}", self.began, self.ended)));
        Ok(())
    }
}

/// Writes the records it is sent, then its own last line, as the log does.
#[derive(Default)]
struct Log(Vec<String>);

impl Consumer for Log {
    fn mail(&mut self, letter: &Letter, _run: &RunInfo) -> io::Result<()> {
        if let Some(Note::Written(w)) = letter.read::<Note>() {
            self.0.push(w.clone());
        }
        Ok(())
    }
    fn finish(&mut self, end: &RunEnd, _run: &RunInfo) -> io::Result<()> {
        self.0.push(format!("stop {}", end.end_sample));
        Ok(())
    }
}

/// The log of a finder → writer → log chain, the consumers listed in the order `order` gives.
fn chain(order: [usize; 3]) -> Vec<String> {
    let mut finder = Finder { post: Post::default(), rows: 0 };
    let mut writer = Writer::default();
    let mut log = Log::default();
    {
        let mut all: [Option<&mut dyn Consumer>; 3] =
            [Some(&mut finder), Some(&mut writer), Some(&mut log)];
        let list: Vec<&mut dyn Consumer> = order.iter().map(|&i| all[i].take().unwrap()).collect();
        let mut run = Run::new(spec(), list);
        run.feed(&Block::new(0, samples(1024))).unwrap();
        run.finish(StopReason::EndOfInput).unwrap();
    }
    log.0
}

#[test]
fn letters_reach_every_consumer_whatever_the_order_of_the_list() {
    let want = vec!["Some(256)..Some(1024)".to_string(), "stop 1024".to_string()];
    for order in [[0, 1, 2], [2, 1, 0], [1, 0, 2], [1, 2, 0], [0, 2, 1], [2, 0, 1]] {
        assert_eq!(chain(order), want, "consumers in the order {order:?}");
    }
}
