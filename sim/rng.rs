//! Random streams seeded by (home seed, owner id, purpose), so adding an
//! appliance never changes the draws of another.

use rand::SeedableRng;
use rand_xoshiro::Xoshiro256PlusPlus;

/// A random stream (xoshiro256++): reproducible from its seed on every platform.
pub type RandomStream = Xoshiro256PlusPlus;

/// A stream for one owner (an appliance id, or "meter"/"source") and one purpose.
///
/// ```
/// use rand::Rng;
/// let a: u64 = loadloom::rng::stream(7, "fridge", "behaviour").random();
/// let b: u64 = loadloom::rng::stream(7, "fridge", "behaviour").random();
/// let c: u64 = loadloom::rng::stream(7, "kettle", "behaviour").random();
/// assert_eq!(a, b);
/// assert_ne!(a, c);
/// ```
pub fn stream(seed: u64, owner: &str, purpose: &str) -> RandomStream {
    // FNV-1a 64 over the three parts with separators: stable across
    // platforms and releases, unlike std's hasher.
    let mut h: u64 = 0xcbf2_9ce4_8422_2325;
    let mut eat = |b: u8| {
        h ^= b as u64;
        h = h.wrapping_mul(0x0000_0100_0000_01b3);
    };
    seed.to_le_bytes().iter().for_each(|&b| eat(b));
    eat(0xff);
    owner.bytes().for_each(&mut eat);
    eat(0xff);
    purpose.bytes().for_each(&mut eat);
    Xoshiro256PlusPlus::seed_from_u64(h)
}
