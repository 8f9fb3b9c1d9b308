//! What of a run has been received: the highest `seq` and the holes below it. Records of a run
//! arrive mostly in order, so this stays a few numbers however long the run; the collector sees
//! holes and copies with it ([`crate::net::collect`]) and the database writer knows a copy
//! without asking the database ([`crate::store::write`]).

/// What one run of one site has delivered.
#[derive(Debug, Default, Clone, PartialEq)]
pub struct RunSeen {
    /// Highest `seq` written plus one.
    next: u64,
    /// Ranges `[from, to)` below `next` never received.
    holes: Vec<(u64, u64)>,
}

impl RunSeen {
    /// Takes `seq` if new (true) or says it is a copy (false).
    pub fn take(&mut self, seq: u64) -> bool {
        if seq >= self.next {
            if seq > self.next {
                self.holes.push((self.next, seq));
            }
            self.next = seq + 1;
            return true;
        }
        let Some(i) = self.holes.iter().position(|&(a, b)| (a..b).contains(&seq)) else {
            return false;
        };
        let (a, b) = self.holes.remove(i);
        if seq + 1 < b {
            self.holes.insert(i, (seq + 1, b));
        }
        if a < seq {
            self.holes.insert(i, (a, seq));
        }
        true
    }

    pub fn holes(&self) -> &[(u64, u64)] {
        &self.holes
    }

    /// Highest `seq` taken plus one.
    pub fn next(&self) -> u64 {
        self.next
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn copies_are_dropped_and_late_records_fill_their_hole() {
        let mut r = RunSeen::default();
        assert!(r.take(0) && r.take(1) && !r.take(1) && !r.take(0));
        assert!(r.take(5));
        assert_eq!(r.holes(), [(2, 5)]);
        assert!(r.take(3));
        assert_eq!(r.holes(), [(2, 3), (4, 5)]);
        assert!(!r.take(3) && r.take(2) && r.take(4) && !r.take(4));
        assert!(r.holes().is_empty());
    }
}
