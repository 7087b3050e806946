//! A bounded, thread-safe cache of simulated responses, keyed by the exact parameters.

use std::collections::{HashMap, VecDeque};
use std::sync::{Arc, Mutex, PoisonError};

use super::{Placement, RoomError, Shoebox};

/// The exact bit patterns of every parameter: equal keys mean equal responses.
type Key = [u64; 13];

fn key(room: &Shoebox, at: &Placement, rate: u32, max_len_s: f64, c_m_s: f64) -> Key {
    let mut k = [0u64; 13];
    let values = room
        .dims_m
        .iter()
        .chain([&room.absorption])
        .chain(&at.source_m)
        .chain(&at.mic_m)
        .chain([&max_len_s, &c_m_s]);
    for (slot, v) in k.iter_mut().zip(values) {
        *slot = v.to_bits();
    }
    k[12] = u64::from(rate);
    k
}

#[derive(Debug, Default)]
struct Entries {
    map: HashMap<Key, Arc<Vec<f32>>>,
    order: VecDeque<Key>,
}

/// Responses already simulated in this run, shared between threads. Holds at most
/// `capacity` responses; a new one evicts the oldest. Computing happens outside the lock, so
/// two threads asking for the same new room at once may both compute it; the first stored
/// wins and both get the same `Arc`.
#[derive(Debug)]
pub struct RoomCache {
    capacity: usize,
    entries: Mutex<Entries>,
}

impl Default for RoomCache {
    /// A cache of 64 responses.
    fn default() -> Self {
        RoomCache::new(64)
    }
}

impl RoomCache {
    /// An empty cache holding at most `capacity` responses (at least 1).
    pub fn new(capacity: usize) -> Self {
        RoomCache {
            capacity: capacity.max(1),
            entries: Mutex::default(),
        }
    }

    /// The cached response for these exact parameters, or `make()`'s, stored for next time.
    /// `make` must compute the response for exactly these parameters (e.g.
    /// `|| impulse_response(room, at, rate, max_len_s, c_m_s)`). An error is returned, not
    /// stored.
    ///
    /// # Errors
    /// Whatever `make` returns.
    pub fn get_or_make(
        &self,
        room: &Shoebox,
        at: &Placement,
        rate: u32,
        max_len_s: f64,
        c_m_s: f64,
        make: impl FnOnce() -> Result<Vec<f32>, RoomError>,
    ) -> Result<Arc<Vec<f32>>, RoomError> {
        let k = key(room, at, rate, max_len_s, c_m_s);
        if let Some(h) = self.lock().map.get(&k) {
            return Ok(Arc::clone(h));
        }
        let h = Arc::new(make()?);
        let mut e = self.lock();
        if let Some(existing) = e.map.get(&k) {
            return Ok(Arc::clone(existing));
        }
        while e.order.len() >= self.capacity {
            if let Some(old) = e.order.pop_front() {
                e.map.remove(&old);
            }
        }
        e.order.push_back(k);
        e.map.insert(k, Arc::clone(&h));
        Ok(h)
    }

    /// The response of [`super::impulse_response`] for these parameters, from the cache
    /// when it is there.
    ///
    /// # Errors
    /// As [`super::impulse_response`].
    pub fn get(
        &self,
        room: &Shoebox,
        at: &Placement,
        rate: u32,
        max_len_s: f64,
        c_m_s: f64,
    ) -> Result<Arc<Vec<f32>>, RoomError> {
        self.get_or_make(room, at, rate, max_len_s, c_m_s, || {
            super::impulse_response(room, at, rate, max_len_s, c_m_s)
        })
    }

    /// Responses held now.
    pub fn len(&self) -> usize {
        self.lock().map.len()
    }

    /// Whether no response is held.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    fn lock(&self) -> std::sync::MutexGuard<'_, Entries> {
        // The entries are never left half-updated by a panic (insert and evict cannot
        // panic on these types), so a poisoned lock still guards consistent data.
        self.entries.lock().unwrap_or_else(PoisonError::into_inner)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn room(alpha: f64) -> Shoebox {
        Shoebox {
            dims_m: [5.0, 4.0, 3.0],
            absorption: alpha,
        }
    }
    const AT: Placement = Placement {
        source_m: [1.0, 1.0, 1.0],
        mic_m: [2.0, 2.0, 1.5],
    };

    #[test]
    fn same_parameters_share_one_response_and_the_oldest_is_evicted() {
        let cache = RoomCache::new(2);
        let calls = std::cell::Cell::new(0);
        let get = |alpha: f64, cache: &RoomCache| {
            cache
                .get_or_make(&room(alpha), &AT, 8000, 0.1, 343.0, || {
                    calls.set(calls.get() + 1);
                    Ok(vec![alpha as f32])
                })
                .unwrap()
        };
        let a = get(0.3, &cache);
        let a2 = get(0.3, &cache);
        assert!(Arc::ptr_eq(&a, &a2));
        get(0.4, &cache);
        get(0.5, &cache); // evicts 0.3
        assert_eq!(cache.len(), 2);
        let a3 = get(0.3, &cache);
        assert!(!Arc::ptr_eq(&a, &a3));
        assert_eq!(calls.get(), 4);
    }

    #[test]
    fn errors_are_not_stored() {
        let cache = RoomCache::default();
        let r = cache.get_or_make(&room(0.3), &AT, 8000, 0.1, 343.0, || {
            Err(RoomError::Absorption(2.0))
        });
        assert!(r.is_err());
        assert!(cache.is_empty());
        let h = cache.get(&room(0.3), &AT, 8000, 0.1, 343.0).unwrap();
        assert_eq!(h.len(), 800);
        assert_eq!(cache.len(), 1);
    }
}
