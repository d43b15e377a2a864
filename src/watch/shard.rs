//! `--shard I/N`: one machine's share of a folder, with no coordination between machines.
//!
//! Inputs are sorted by path and numbered from 0; shard `I/N` takes those whose number modulo
//! `N` is `I - 1`. Every machine sees the same sorted list of a shared folder, so shards
//! `1/N` … `N/N` together take every input exactly once. The numbering counts all inputs,
//! stale or not, so a file finishing on one machine does not shift the others' shares.

use std::fmt;
use std::path::PathBuf;
use std::str::FromStr;

/// One share of the inputs: `index` (1-based) of `count`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Shard {
    /// Which share, from 1 to `count`.
    pub index: usize,
    /// How many shares there are, at least 1.
    pub count: usize,
}

/// Why a shard is not valid.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[non_exhaustive]
pub enum ShardError {
    /// The text is not of the form `I/N`.
    #[error("a shard is written I/N with whole numbers, such as 2/5, but got \"{0}\"")]
    Syntax(String),
    /// The numbers do not satisfy 1 <= I <= N.
    #[error("a shard I/N needs 1 <= I <= N, but got {index}/{count}")]
    Range {
        /// The index given.
        index: usize,
        /// The count given.
        count: usize,
    },
}

impl Shard {
    /// Checks 1 <= index <= count.
    pub fn new(index: usize, count: usize) -> Result<Shard, ShardError> {
        if index >= 1 && index <= count {
            Ok(Shard { index, count })
        } else {
            Err(ShardError::Range { index, count })
        }
    }

    /// Checks a shard built directly from its fields.
    pub(crate) fn check(self) -> Result<Shard, ShardError> {
        Shard::new(self.index, self.count)
    }

    /// Whether the input at `position` (0-based, in path order) belongs to this shard.
    pub fn takes(&self, position: usize) -> bool {
        self.count > 0 && position % self.count == self.index.wrapping_sub(1)
    }

    /// This shard's share of `sorted` (inputs already sorted by path).
    pub(crate) fn select(&self, sorted: Vec<PathBuf>) -> Vec<PathBuf> {
        sorted
            .into_iter()
            .enumerate()
            .filter(|(i, _)| self.takes(*i))
            .map(|(_, p)| p)
            .collect()
    }
}

impl FromStr for Shard {
    type Err = ShardError;

    fn from_str(text: &str) -> Result<Shard, ShardError> {
        let syntax = || ShardError::Syntax(text.to_string());
        let (i, n) = text.trim().split_once('/').ok_or_else(syntax)?;
        let index = i.trim().parse::<usize>().map_err(|_| syntax())?;
        let count = n.trim().parse::<usize>().map_err(|_| syntax())?;
        Shard::new(index, count)
    }
}

impl fmt::Display for Shard {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}
