//! One table per choice of a study file: each word beside the value it parses to. The key
//! reference (`keys.rs`: `Kind::Choice(TABLE.words())`) and the parser (`Reader::choose`) use
//! the same table, so a word cannot be listed without a value (the table does not compile:
//! [`Choices::new`] checks the lengths at compile time) nor map to another word's value (a test
//! checks every table's values are distinct).

/// Words and the values they parse to, index for index.
#[derive(Debug)]
pub struct Choices<T: 'static> {
    words: &'static [&'static str],
    values: &'static [T],
}

impl<T: Copy + PartialEq + std::fmt::Debug> Choices<T> {
    /// A table; `words[i]` parses to `values[i]`. Panics (at compile time, in a `const`) when
    /// the lengths differ.
    pub const fn new(words: &'static [&'static str], values: &'static [T]) -> Choices<T> {
        assert!(
            words.len() == values.len(),
            "a choice table needs one value for each word"
        );
        Choices { words, values }
    }

    /// The words, in the table's order (the key reference lists them so).
    pub const fn words(&self) -> &'static [&'static str] {
        self.words
    }

    /// The value of a word, `None` for a word not in the table.
    pub fn parse(&self, word: &str) -> Option<T> {
        self.words
            .iter()
            .position(|w| *w == word)
            .map(|i| self.values[i])
    }

    /// The word of a value, `None` for a value not in the table.
    pub fn word(&self, value: T) -> Option<&'static str> {
        self.values
            .iter()
            .position(|v| *v == value)
            .map(|i| self.words[i])
    }

    /// Every (word, value) pair.
    pub fn pairs(&self) -> impl Iterator<Item = (&'static str, T)> + '_ {
        self.words.iter().copied().zip(self.values.iter().copied())
    }
}

/// The salt word: a named salt, or `custom` (whose data the study gives).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SaltChoice {
    /// Sodium chloride.
    NaCl,
    /// Potassium chloride.
    KCl,
    /// A 1:1 salt with the ionic data of the study.
    Custom,
}

/// The spacer word (the spacer's numbers come from their own keys).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpacerChoice {
    /// Open slit.
    None,
    /// Schock-Miquel spacer correlations.
    SchockMiquel,
    /// Open-slit correlations times factors.
    Multiplier,
}

/// The length-mode word (a product target comes with its own key).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LengthModeChoice {
    /// The channel length is given.
    Fixed,
    /// The length that reaches `product_target_mol_m3`.
    ProductTarget,
}

/// How the concentrate of a plant flows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LoopModeChoice {
    /// Each stage's concentrate is fed with feed water and drained.
    OnceThrough,
    /// One recirculating loop with a make-up and an equal bleed.
    FeedAndBleed,
}

#[cfg(test)]
mod tests {
    use super::super::keys::{
        ALGORITHMS, FLOWS, LENGTH_MODES, LOOP_MODES, OBJECTIVES, PATTERN_SIDES, SALTS, SAMPLERS,
        SCALARISATIONS, SOLVERS, SPACERS,
    };
    use super::*;

    fn distinct<T: Copy + PartialEq + std::fmt::Debug>(name: &str, table: &Choices<T>) {
        let pairs: Vec<_> = table.pairs().collect();
        assert!(!pairs.is_empty(), "{name} is empty");
        for (i, (w, v)) in pairs.iter().enumerate() {
            assert_eq!(table.parse(w), Some(*v), "{name}: {w}");
            for (w2, v2) in &pairs[i + 1..] {
                assert_ne!(w, w2, "{name}: {w} twice");
                assert_ne!(v, v2, "{name}: {w} and {w2} parse to the same {v:?}");
            }
        }
        assert_eq!(table.parse("no such word"), None);
    }

    #[test]
    fn every_listed_word_parses_to_its_own_value() {
        distinct("SALTS", &SALTS);
        distinct("SPACERS", &SPACERS);
        distinct("PATTERN_SIDES", &PATTERN_SIDES);
        distinct("FLOWS", &FLOWS);
        distinct("LENGTH_MODES", &LENGTH_MODES);
        distinct("OBJECTIVES", &OBJECTIVES);
        distinct("ALGORITHMS", &ALGORITHMS);
        distinct("SOLVERS", &SOLVERS);
        distinct("SCALARISATIONS", &SCALARISATIONS);
        distinct("SAMPLERS", &SAMPLERS);
        distinct("LOOP_MODES", &LOOP_MODES);
    }

    #[test]
    fn objective_and_algorithm_keys_are_their_table_words() {
        for (w, o) in OBJECTIVES.pairs() {
            assert_eq!(o.key(), w);
        }
        for (w, a) in ALGORITHMS.pairs() {
            assert_eq!(a.key(), w);
        }
    }
}
